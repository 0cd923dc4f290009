"""The report as a document independent of its format: sections of facts, tables, charts and paragraphs.

:mod:`leakbudget.reporting.content` fills it from the results; :mod:`leakbudget.reporting.html` and
:mod:`leakbudget.reporting.pdf` lay it out.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any


@dataclass(frozen=True, slots=True)
class Cell:
    """One table cell: display text, and for numbers the check-JSON key and value it shows.

    ``kind`` is a provenance kind (a :class:`leakbudget.provenance.Kind` value) shown as a badge, ``note`` the
    source text shown beneath the value, ``tone`` a status or severity word the layout may colour.
    """

    text: str
    key: str | None = None
    value: float | None = None
    kind: str | None = None
    note: str | None = None
    tone: str | None = None


@dataclass(slots=True)
class Paragraph:
    text: str
    tone: str | None = None  # "caution", "muted", "heading" (a sub-heading), or a status or severity word


@dataclass(slots=True)
class Facts:
    """Label → value pairs (a definition list)."""

    items: list[tuple[str, Cell]]


@dataclass(slots=True)
class Table:
    headers: tuple[str, ...]
    rows: list[list[Cell]]
    caption: str = ""
    name: str = ""  # stable id, e.g. "circuits" or "loads-K1"
    widths: tuple[float, ...] = ()  # relative column widths for paged layouts; empty = equal


@dataclass(slots=True)
class Figure:
    """A chart (a :class:`leakbudget.reporting.charts.Chart`, drawn once as vector shapes): the HTML writes it as
    inline SVG, the PDF draws the same shapes on its page."""

    chart: Any
    alt: str
    caption: str
    name: str = ""


Block = Paragraph | Facts | Table | Figure


@dataclass(slots=True)
class Section:
    anchor: str
    title: str
    blocks: list[Block] = field(default_factory=list)


@dataclass(slots=True)
class Report:
    title: str
    subtitle: str
    verdict: Paragraph
    status_counts: dict[str, int]
    sections: list[Section]
    generated: str
    tool: str


def iter_tables(report: Report) -> Iterable[Table]:
    """Every table of the report, in order (for layouts and tests)."""
    for section in report.sections:
        for block in section.blocks:
            if isinstance(block, Table):
                yield block
