"""How long work tells its caller how far it has got: a plain callback, so the library never imports a display.

A job takes ``progress: Progress | None`` and calls it with a stage name, the items done and the items in all
(``progress("Writing 'Load results'", 4000, 100000)``), as often as is cheap: every few thousand items, not every
item. The command line draws a bar per stage on a terminal; library callers pass their own callback or None.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from typing import Protocol, TypeVar

_T = TypeVar("_T")


class Progress(Protocol):
    def __call__(self, stage: str, done: int, total: int) -> None:
        """``done`` of ``total`` items of ``stage`` are finished (``done == total`` at the end of the stage)."""


def tracked(items: Iterable[_T], total: int, stage: str, progress: Progress | None, every: int = 1000) -> Iterator[_T]:
    """Yield ``items``, telling ``progress`` every ``every`` items and at the end (a no-op wrapper without one)."""
    if progress is None:
        yield from items
        return
    done = 0
    progress(stage, 0, total)
    for item in items:
        yield item
        done += 1
        if done % every == 0:
            progress(stage, done, total)
    progress(stage, done, total)
