"""A portfolio's summary as plain data: one record per workbook, and the columns of the summary workbook.

One place names a workbook's summary at the edges (the ``summary`` records of ``check --json`` over several
workbooks, the terminal table, the ``--summary`` workbook and ``summary_frame()``), so they agree. Every figure is
computed from the workbook's check (and review), as the single-workbook command reports it.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

from leakbudget.about import CAUTION, __version__
from leakbudget.devices import Status

if TYPE_CHECKING:  # the figures come from these; a portfolio's parent process needs only the records
    from leakbudget.checking import CheckResult
    from leakbudget.compliance.rules import Review

# How bad a status is, for "the worst status" of a workbook (modelling choice: an unprotected circuit is not judged
# against a budget, so it ranks below ok; trip risk is the worst, as in the terminal table's ordering).
STATUS_RANK = {
    Status.UNPROTECTED: 0,
    Status.OK: 1,
    Status.MARGINAL: 2,
    Status.OVER_BUDGET: 3,
    Status.TRIP_RISK: 4,
}
OVER = (Status.OVER_BUDGET, Status.TRIP_RISK)

# Exit codes of one workbook (and of the portfolio: the highest of them), as the single-workbook command has them.
EXIT_OK = 0
EXIT_PROBLEM = 1
EXIT_BAD_INPUT = 2


def summary_row(check: CheckResult, review: Review | None = None) -> dict[str, Any]:
    """The figures of one checked (or reviewed) workbook: counts, the worst status and the highest share used.

    ``over_budget`` counts circuits and shared devices over budget or at trip risk; ``highest_share_used`` is the
    largest gate sum / budget of any protected circuit or shared device (1.0 = the whole budget), ``highest_share_at``
    the circuit or device it belongs to.
    """
    judged = [(c.circuit.circuit_id, c.status, c.headroom_used) for c in check.circuits]
    judged += [(d.device_id, d.status, d.headroom_used) for d in check.devices]
    worst = max((status for _, status, _ in judged), key=STATUS_RANK.__getitem__, default=None)
    shares = [(used, name) for name, _, used in judged if used is not None and not math.isnan(used)]
    highest = max(shares, key=lambda s: s[0], default=None)
    row: dict[str, Any] = {
        "circuits": len(check.circuits),
        "shared_devices": len(check.devices),
        "worst_status": worst.value if worst is not None else None,
        "over_budget": sum(status in OVER for _, status, _ in judged),
        "marginal": sum(status is Status.MARGINAL for _, status, _ in judged),
        "highest_share_used": round(highest[0], 4) if highest is not None else None,
        "highest_share_at": highest[1] if highest is not None else None,
        "unplaced_loads": len(check.unplaced),
        "warnings": "; ".join(check.project.warnings) or None,
    }
    if review is None:
        row["exit_code"] = EXIT_OK if check.all_ok else EXIT_PROBLEM
    else:
        from leakbudget.compliance.rules import Severity

        row["error_findings"] = review.count(Severity.ERROR)
        row["warning_findings"] = review.count(Severity.WARNING)
        row["exit_code"] = EXIT_PROBLEM if review.errors else EXIT_OK
    return row


# (header, record key, number format) of the summary workbook's sheet, for `check` and, with the review's counts,
# for `review`.
CHECK_COLUMNS: tuple[tuple[str, str, str | None], ...] = (
    ("Workbook", "workbook", None),
    ("Path", "path", None),
    ("Exit code", "exit_code", "0"),
    ("Circuits", "circuits", "0"),
    ("Shared devices", "shared_devices", "0"),
    ("Worst status", "worst_status", None),
    ("Over budget", "over_budget", "0"),
    ("Marginal", "marginal", "0"),
    ("Highest share used", "highest_share_used", "0%"),
    ("Highest at", "highest_share_at", None),
    ("Unplaced loads", "unplaced_loads", "0"),
    ("Warnings", "warnings", None),
    ("Written to", "written_to", None),
    ("Could not be checked", "error", None),
)
REVIEW_COLUMNS: tuple[tuple[str, str, str | None], ...] = (
    *CHECK_COLUMNS[:8],
    ("Error findings", "error_findings", "0"),
    ("Warning findings", "warning_findings", "0"),
    *CHECK_COLUMNS[8:],
)
SUMMARY_SHEET = "Portfolio summary"
NOTES_SHEET = "Notes"


def summary_columns(command: str) -> tuple[tuple[str, str, str | None], ...]:
    return REVIEW_COLUMNS if command == "review" else CHECK_COLUMNS


def record(
    command: str, workbook: str, path: str, figures: dict[str, Any] | None, written_to: str | None, error: str | None
) -> dict[str, Any]:
    """One workbook's summary record, with the keys of :func:`summary_columns` in their order: ``figures`` from
    :func:`summary_row`, or None (every figure None, exit code 2) with the ``error`` sentence when the workbook
    could not be checked."""
    values: dict[str, Any] = {"workbook": workbook, "path": path, "written_to": written_to, "error": error}
    values.update(figures if figures is not None else {"exit_code": EXIT_BAD_INPUT})
    return {key: values.get(key) for _, key, _ in summary_columns(command)}


def notes(command: str) -> list[str]:
    """The lines of the summary workbook's notes sheet: what the columns mean and where they come from."""
    what = (
        "reviewed (each workbook's own 'Review findings' sheet has the findings)"
        if command == "review"
        else ("checked (each workbook's own result sheets have every circuit)")
    )
    return [
        f"Written by leakbudget {__version__}: one row per workbook {what}.",
        "Exit code: 0 all is well, 1 a problem found (a circuit or shared device not within budget; for a review, "
        "an error finding), 2 the workbook could not be read or checked (the sentence says why).",
        "Over budget: circuits and shared devices over budget or at trip risk. Highest share used: the largest "
        "standing leakage / budget of any protected circuit or shared device (computed).",
        "Worst status, from best to worst: unprotected, ok, marginal, over-budget, trip-risk.",
        "Path is plain text (no links); it names the workbook as it was found on this machine.",
        f"Caution: {CAUTION}",
    ]
