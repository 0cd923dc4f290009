"""The review's edges: the document ``review --json`` prints and the rows of the ``Review findings`` sheet."""

from __future__ import annotations

from typing import Any

from leakbudget.about import CAUTION, __version__
from leakbudget.compliance.rules import Review, Severity
from leakbudget.input.schema import REVIEW_FINDINGS
from leakbudget.xlsx.package import SheetData

FINDING_COLUMNS = ("Severity", "Rule", "Circuit", "Load", "Finding", "Source", "Source kind")


def to_json(rv: Review) -> dict[str, Any]:
    """The document ``leakbudget review --json`` prints."""
    project = rv.check.project
    return {
        "tool": f"leakbudget {__version__}",
        "file": str(project.path),
        "code": rv.code.key,
        "code_label": rv.label,
        "code_source": str(rv.code_source),
        "counts": {s.value: rv.count(s) for s in Severity},
        "findings": [f.to_dict() for f in rv.findings],
        "unplaced_loads": [r.name for r in rv.check.unplaced],
        "warnings": project.warnings,
        "caution": CAUTION,
    }


def findings_rows(rv: Review) -> list[list[Any]]:
    """The rows of the ``Review findings`` sheet under :data:`FINDING_COLUMNS`: one per finding, a blank row,
    then footer lines (code used, counts, provenance of the sheet, caution) in the first column."""
    rows: list[list[Any]] = [
        [f.severity.value, f.rule, f.circuit, f.load, f.message, str(f.source), f.source.kind.value]
        for f in rv.findings
    ]
    blank: list[Any] = [None] * len(FINDING_COLUMNS)
    footer = [
        f"Reviewed against {rv.label}: {rv.code_source}.",
        f"{rv.count(Severity.ERROR)} error(s), {rv.count(Severity.WARNING)} warning(s), "
        f"{rv.count(Severity.INFO)} info.",
        f"Written by leakbudget {__version__}; this sheet is replaced on every run.",
        f"Caution: {CAUTION}",
    ]
    return rows + [blank] + [[line] + blank[1:] for line in footer]


def findings_sheet(rv: Review) -> SheetData:
    """The ``Review findings`` sheet (an :class:`leakbudget.xlsx.package.SheetData`) for write-back."""
    return SheetData(
        name=REVIEW_FINDINGS,
        header=list(FINDING_COLUMNS),
        rows=findings_rows(rv),
        number_formats={},
        column_widths={0: 10.0, 1: 18.0, 2: 12.0, 3: 20.0, 4: 100.0, 5: 60.0, 6: 20.0},
    )
