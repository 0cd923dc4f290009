"""leakbudget: standing earth-leakage budgets for GFCI/RCD-protected circuits.

The front door (:mod:`leakbudget.api`)::

    import leakbudget
    job = leakbudget.check("plan.xlsx")        # reads and computes; writes nothing
    job.circuits_frame()                      # pandas DataFrame, columns = the keys of `check --json`
    leakbudget.check("plan.xlsx", write=True)  # writes the result sheets, as the command line does

``check``, ``split``, ``review`` and ``report`` run the command of the same name; ``read_project`` reads a workbook
into a :class:`leakbudget.model.Project`. ``check_many`` and ``review_many`` (:mod:`leakbudget.portfolio`) run a
check or review over many workbooks and folders, in parallel. They are imported on first use, so ``import
leakbudget`` stays cheap.

A planning aid, not a substitute for measurement, the local wiring code and licensed practice (:data:`CAUTION`).
The library never imports typer or rich; the command line lives in :mod:`leakbudget.cli`.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from leakbudget.about import CAUTION, __version__

if TYPE_CHECKING:
    from leakbudget.api import check, read_project, report, review, split
    from leakbudget.portfolio import check_many, review_many

__all__ = [
    "CAUTION",
    "__version__",
    "check",
    "check_many",
    "read_project",
    "report",
    "review",
    "review_many",
    "split",
]
_FRONT_DOOR = {"check", "read_project", "report", "review", "split"}
_PORTFOLIO = {"check_many", "review_many"}  # above the api layer (DEVELOPERS.md, "Imports run one way")


def __getattr__(name: str) -> Any:
    if name in _FRONT_DOOR:
        from leakbudget import api

        return getattr(api, name)
    if name in _PORTFOLIO:
        from leakbudget import portfolio

        return getattr(portfolio, name)
    raise AttributeError(f"module 'leakbudget' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | _FRONT_DOOR | _PORTFOLIO)
