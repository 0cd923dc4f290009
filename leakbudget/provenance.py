"""Where a number comes from.

Every value leakbudget shows carries one of these: a published source with clause, a user measurement, a value
computed from component values, a catalogue value from memory, or common practice of the trade.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum


class Kind(str, Enum):
    PUBLISHED = "published"
    MEASURED = "measured"
    COMPUTED = "computed"
    FROM_MEMORY = "typical, from memory"
    COMMON_PRACTICE = "common practice"
    USER = "user setting"
    DEFAULT = "default"


@dataclass(frozen=True, slots=True)
class Source:
    """The provenance of one value: its kind and a human-readable citation."""

    kind: Kind
    text: str

    def __str__(self) -> str:
        return self.text

    @staticmethod
    def published(citation: str) -> Source:
        """A published standard or handbook, e.g. ``"BS 7671:2018 reg. 531.3.2"``."""
        return Source(Kind.PUBLISHED, citation)

    @staticmethod
    def measured(detail: str = "measured") -> Source:
        return Source(Kind.MEASURED, detail)

    @staticmethod
    def computed(detail: str) -> Source:
        return Source(Kind.COMPUTED, detail)

    @staticmethod
    def from_memory(detail: str = "typical, from memory") -> Source:
        text = detail if "from memory" in detail else f"{detail} (typical, from memory)"
        return Source(Kind.FROM_MEMORY, text)

    @staticmethod
    def common_practice(detail: str) -> Source:
        text = detail if "common practice" in detail else f"{detail} (common practice)"
        return Source(Kind.COMMON_PRACTICE, text)


def source_from_text(text: str) -> Source:
    """Turn a source string from a catalogue row or sheet into a :class:`Source`.

    "typical, from memory" and "common practice" are recognised by those words; "measured" and "computed" by
    their first word; anything else is taken as a published citation (standard and clause).
    """
    t = text.strip()
    low = t.lower()
    if "from memory" in low:
        return Source(Kind.FROM_MEMORY, t)
    if "common practice" in low:
        return Source(Kind.COMMON_PRACTICE, t)
    if low.startswith("measured"):
        return Source(Kind.MEASURED, t)
    if low.startswith("computed"):
        return Source(Kind.COMPUTED, t)
    return Source(Kind.PUBLISHED, t)
