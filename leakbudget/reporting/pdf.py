"""Lay a :class:`leakbudget.reporting.document.Report` out as A4 PDF pages with matplotlib's PdfPages (no browser needed).

Each page is a matplotlib Figure the size of an A4 sheet; text is placed line by line at measured positions,
tables are drawn row by row with wrapped cells and their header repeated on every page, charts are the same PNGs
the HTML report embeds. The first page holds the cover, the job and the cautions; the settings, the circuit
overview, the per-circuit details (flowing, a circuit kept on one page where it fits) and the closing sections
each start a new page. Fonts are embedded as TrueType (``pdf.fonttype`` 42), so the text can be searched.
"""

from __future__ import annotations

import functools
import io
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

from leakbudget.reporting.charts import DPI, INK, STATUS_COLOURS, WIDTH_IN
from leakbudget.reporting.document import Cell, Facts, Figure, Paragraph, Report, Section, Table

PAGE_W_IN, PAGE_H_IN = 8.27, 11.69  # A4 (ISO 216: 210 mm × 297 mm)
MARGIN_IN = 0.6
CONTENT_W_IN = PAGE_W_IN - 2 * MARGIN_IN
FOOTER_IN = 0.35
MEASURE_DPI = 720  # resolution of the text measurements used for wrapping (0.1 pt steps)
WRAP_SLACK = 0.95  # wrap to 95 % of a box: screen renderings hint glyphs up to ~4 % wider than the PDF draws
LINE_SPACING = 1.3  # line height as a multiple of the font size
PT_PER_IN = 72.0
ACCENT = "#1d5c63"
SOFT = "#5b6672"
RULE = "#ddd7ca"
HEADER_FILL = "#eef2f1"
TONE_COLOURS = {
    **STATUS_COLOURS,
    "error": STATUS_COLOURS["trip-risk"],
    "warning": STATUS_COLOURS["over-budget"],
    "info": "#3f5f8a",
    "caution": STATUS_COLOURS["over-budget"],
    "muted": SOFT,
}
NEW_PAGE_SECTIONS = ("supply", "circuits", "split")  # these start a page; the sections after them flow


@functools.cache
def _renderer() -> Any:
    from matplotlib.backends.backend_agg import RendererAgg

    return RendererAgg(10, 10, MEASURE_DPI)


@functools.lru_cache(maxsize=65536)
def text_width_in(text: str, size_pt: float, bold: bool = False) -> float:
    """Width [in] of ``text`` set in the default sans-serif font at ``size_pt``, as the PDF will draw it."""
    from matplotlib.font_manager import FontProperties

    prop = FontProperties(size=size_pt, weight="bold" if bold else "normal")
    width_px, _, _ = _renderer().get_text_width_height_descent(text, prop, ismath=False)
    return width_px / MEASURE_DPI


def _wrap(text: str, width_in: float, size_pt: float, bold: bool = False) -> list[str]:
    """Break ``text`` into lines no wider than ``width_in``, keeping its own line breaks.

    A line's width is the sum of its words' measured widths and the spaces between them (words are measured
    once and cached; kerning across a space is nil).
    """
    width_in *= WRAP_SLACK
    space = text_width_in("a a", size_pt, bold) - text_width_in("aa", size_pt, bold)
    lines: list[str] = []
    for part in text.split("\n"):
        line, used = "", 0.0
        for word in part.split():
            word_in = text_width_in(word, size_pt, bold)
            if line and used + space + word_in <= width_in:
                line, used = f"{line} {word}", used + space + word_in
                continue
            if line:
                lines.append(line)
            while len(word) > 1 and word_in > width_in:  # split an over-long word
                cut = len(word) - 1
                while cut > 1 and text_width_in(word[:cut], size_pt, bold) > width_in:
                    cut -= 1
                lines.append(word[:cut])
                word = word[cut:]
                word_in = text_width_in(word, size_pt, bold)
            line, used = word, word_in
        lines.append(line)
    return lines


def _plain(text: str) -> str:
    return text.replace("$", r"\$")


class PageWriter:
    """Places blocks top to bottom on A4 figures, starting a new page when the next block does not fit."""

    def __init__(self, report: Report, sink: Callable[[Any], None]) -> None:
        self.report = report
        self.sink = sink  # receives each finished page, so only one page is held in memory
        self.count = 0
        self.fig: Any = None
        self.y = 0.0  # distance of the cursor from the page top [in]
        self.dry = False  # measuring: move the cursor, draw nothing, never break the page

    # -- pages
    def finish(self) -> None:
        if self.fig is not None:
            self.sink(self.fig)
            self.fig = None

    def new_page(self) -> None:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure as MplFigure

        self.finish()
        self.fig = MplFigure(figsize=(PAGE_W_IN, PAGE_H_IN), dpi=DPI, facecolor="white")
        FigureCanvasAgg(self.fig)
        self.count += 1
        self.y = MARGIN_IN
        footer = f"{self.report.title} · {self.report.generated} · {self.report.tool} · page {self.count}"
        self._text(MARGIN_IN, PAGE_H_IN - MARGIN_IN + 0.12, footer, 7, SOFT)

    def room(self) -> float:
        return float("inf") if self.dry else PAGE_H_IN - MARGIN_IN - FOOTER_IN - self.y

    def ensure(self, height_in: float) -> None:
        if self.fig is None or (height_in > self.room() and self.y > MARGIN_IN + 1e-9):
            self.new_page()

    def measure(self, section: Section) -> float:
        """Height [in] the section takes when laid out without a page break."""
        y, self.y, self.dry = self.y, 0.0, True
        try:
            self.section(section)
            return self.y
        finally:
            self.y, self.dry = y, False

    def keep_together(self, section: Section) -> None:
        """Start a new page when the section would fit on one page but not in the room left on this one."""
        height = self.measure(section)
        if height <= PAGE_H_IN - 2 * MARGIN_IN - FOOTER_IN:
            self.ensure(height)

    # -- primitives (inches from the top-left corner)
    def _text(
        self,
        x_in: float,
        y_in: float,
        text: str,
        size: float,
        colour: str = INK,
        weight: str = "normal",
        style: str = "normal",
    ) -> None:
        if self.dry:
            return
        self.fig.text(
            x_in / PAGE_W_IN,
            1 - y_in / PAGE_H_IN,
            _plain(text),
            fontsize=size,
            color=colour,
            fontweight=weight,
            fontstyle=style,
            va="top",
            ha="left",
        )

    def _rule(
        self,
        y_in: float,
        colour: str = RULE,
        width: float = 0.6,
        x0: float = MARGIN_IN,
        x1: float = PAGE_W_IN - MARGIN_IN,
    ) -> None:
        if self.dry:
            return
        from matplotlib.lines import Line2D

        y = 1 - y_in / PAGE_H_IN
        self.fig.add_artist(Line2D([x0 / PAGE_W_IN, x1 / PAGE_W_IN], [y, y], color=colour, linewidth=width))

    def _fill(self, x_in: float, y_in: float, w_in: float, h_in: float, colour: str) -> None:
        if self.dry:
            return
        from matplotlib.patches import Rectangle

        self.fig.add_artist(
            Rectangle(
                (x_in / PAGE_W_IN, 1 - (y_in + h_in) / PAGE_H_IN),
                w_in / PAGE_W_IN,
                h_in / PAGE_H_IN,
                facecolor=colour,
                edgecolor="none",
                zorder=0,
            )
        )

    def lines(
        self,
        lines: Sequence[str],
        size: float,
        colour: str = INK,
        weight: str = "normal",
        indent_in: float = 0.0,
        style: str = "normal",
    ) -> None:
        step = size * LINE_SPACING / PT_PER_IN
        for line in lines:
            self.ensure(step)
            self._text(MARGIN_IN + indent_in, self.y, line, size, colour, weight, style)
            self.y += step

    # -- blocks
    def cover(self) -> None:
        r = self.report
        self.new_page()
        self._fill(0, 0, PAGE_W_IN, 0.18, ACCENT)
        self._text(MARGIN_IN, self.y, "STANDING EARTH-LEAKAGE REPORT", 8.5, ACCENT, "bold")
        self.y += 0.25
        self.lines(_wrap(r.title, CONTENT_W_IN, 20, True), 20, weight="bold")
        self.lines(_wrap(r.subtitle, CONTENT_W_IN, 10.5), 10.5, SOFT)
        self.y += 0.1
        tone = TONE_COLOURS.get(r.verdict.tone or "", INK)
        self.lines(_wrap(r.verdict.text, CONTENT_W_IN - 0.2, 11, True), 11, tone, "bold", indent_in=0.15)
        counts = "   ".join(f"{n} {status}" for status, n in sorted(r.status_counts.items()))
        self.lines([counts], 9.5, SOFT, indent_in=0.15)
        self.y += 0.1
        self._rule(self.y)
        self.y += 0.1

    def heading(self, title: str) -> None:
        self.ensure(0.9)  # a heading never ends a page
        self.y += 0.12
        self.lines([title], 14, ACCENT, "bold")
        self.y += 0.04

    def paragraph(self, p: Paragraph) -> None:
        colour = TONE_COLOURS.get(p.tone or "", INK)
        bold = p.tone in STATUS_COLOURS
        self.lines(_wrap(p.text, CONTENT_W_IN, 9, bold), 9, colour, "bold" if bold else "normal")
        self.y += 0.08

    def facts(self, facts: Facts) -> None:
        label_w = max(text_width_in(label, 9) for label, _ in facts.items) + 0.25 if facts.items else 0.0
        for label, cell in facts.items:
            value = _wrap(_cell_text(cell), CONTENT_W_IN - label_w, 9)
            self.ensure(len(value) * 9 * LINE_SPACING / PT_PER_IN)
            self._text(MARGIN_IN, self.y, label, 9, SOFT)
            self.lines(value, 9, indent_in=label_w)
        self.y += 0.08

    def figure(self, fig: Figure) -> None:
        """Draw the chart itself (vectors, not its PNG) in a sub-figure the chart's own height."""
        width_in = min(CONTENT_W_IN, WIDTH_IN)
        height_in = fig.chart.height_in
        caption = _wrap(fig.caption, CONTENT_W_IN, 7.5)
        self.ensure(height_in + 0.1 + len(caption) * 7.5 * LINE_SPACING / PT_PER_IN)
        # sub-figures take their place from a grid's width and height ratios (not its margins): a 3 × 3 grid
        # whose middle cell is the chart's rectangle on the page
        if not self.dry:
            grid = self.fig.add_gridspec(
                3,
                3,
                width_ratios=(MARGIN_IN, width_in, PAGE_W_IN - MARGIN_IN - width_in),
                height_ratios=(self.y, height_in, PAGE_H_IN - self.y - height_in),
            )
            fig.chart.draw(self.fig.add_subfigure(grid[1, 1]))
        self.y += height_in + 0.05
        self.lines(caption, 7.5, SOFT)
        self.y += 0.1

    def table(self, table: Table, size: float = 7.0) -> None:
        pad = 0.05
        widths = column_widths(table, size, pad)
        step = size * LINE_SPACING / PT_PER_IN
        header = [PdfCell(_wrap(h, w - 2 * pad, size, True), [], ACCENT, "bold") for h, w in zip(table.headers, widths)]
        rows = [[_pdf_cell(c, w - 2 * pad, size) for c, w in zip(row, widths)] for row in table.rows]
        header_h = max(len(c.lines) for c in header) * step + 2 * pad

        def draw_header() -> None:
            self._fill(MARGIN_IN, self.y, CONTENT_W_IN, header_h, HEADER_FILL)
            self._row(header, widths, size, pad)
            self.y += header_h
            self._rule(self.y, ACCENT, 1.0)

        def height(row: list[PdfCell]) -> float:
            return max(len(c.lines) + len(c.notes) for c in row) * step + 2 * pad

        caption = _wrap(table.caption, CONTENT_W_IN, 8.5, True) if table.caption else []
        self.ensure(len(caption) * 8.5 * LINE_SPACING / PT_PER_IN + header_h + (height(rows[0]) if rows else 0))
        self.lines(caption, 8.5, weight="bold")
        draw_header()
        for row in rows:
            if height(row) > self.room():
                self.new_page()
                draw_header()
            self._row(row, widths, size, pad)
            self.y += height(row)
            self._rule(self.y)
        self.y += 0.15

    def _row(self, row: Sequence[PdfCell], widths: Sequence[float], size: float, pad: float) -> None:
        x = MARGIN_IN
        step = size * LINE_SPACING / PT_PER_IN
        for cell, width in zip(row, widths):
            for i, line in enumerate(cell.lines):
                self._text(x + pad, self.y + pad + i * step, line, size, cell.colour, cell.weight)
            for i, line in enumerate(cell.notes, start=len(cell.lines)):
                self._text(x + pad, self.y + pad + i * step, line, size, SOFT)
            x += width

    def section(self, section: Section) -> None:
        self.heading(section.title)
        for block in section.blocks:
            if isinstance(block, Table):
                self.table(block)
            elif isinstance(block, Figure):
                self.figure(block)
            elif isinstance(block, Facts):
                self.facts(block)
            else:
                self.paragraph(block)


def column_widths(table: Table, size: float, pad: float) -> list[float]:
    """Column widths [in] filling the content width: each column at least as wide as its longest word, the
    rest shared by the table's relative widths (by those alone when the longest words do not fit)."""
    weights = table.widths or (1.0,) * len(table.headers)
    share = [w / sum(weights) for w in weights]
    columns = zip(table.headers, *([_cell_text(c) for c in row] for row in table.rows))
    least = [
        max(text_width_in(word, size, True) for text in column for word in text.split() or [""]) / WRAP_SLACK + 2 * pad
        for column in columns
    ]
    spare = CONTENT_W_IN - sum(least)
    if spare < 0:
        return [CONTENT_W_IN * s for s in share]
    return [m + spare * s for m, s in zip(least, share)]


@dataclass(slots=True)
class PdfCell:
    """A table cell broken into lines: its value (in the cell's colour and weight), then its source note."""

    lines: list[str]
    notes: list[str]
    colour: str = INK
    weight: str = "normal"


def _pdf_cell(cell: Cell, width_in: float, size: float) -> PdfCell:
    bold = cell.tone is not None
    text = cell.text
    if cell.kind and cell.kind.lower() not in cell.text.lower():
        text += f" [{cell.kind}]"
    return PdfCell(
        _wrap(text, width_in, size, bold),
        _wrap(cell.note, width_in, size) if cell.note else [],
        TONE_COLOURS.get(cell.tone or "", INK),
        "bold" if bold else "normal",
    )


def _cell_text(cell: Cell) -> str:
    """A cell as plain text: value, provenance mark in brackets (unless the text says it already), source below."""
    text = cell.text
    if cell.kind and cell.kind.lower() not in cell.text.lower():
        text += f" [{cell.kind}]"
    if cell.note:
        text += f"\n{cell.note}"
    return text


def lay_out(report: Report, sink: Callable[[Any], None]) -> int:
    """Lay the report out on A4 matplotlib Figures, handing each finished page to ``sink``; return the count."""
    writer = PageWriter(report, sink)
    writer.cover()
    for section in report.sections:
        if section.anchor in NEW_PAGE_SECTIONS:
            writer.new_page()
        else:
            writer.keep_together(section)
        writer.section(section)
    writer.finish()
    return writer.count


def pdf_pages(report: Report) -> list[Any]:
    """The report's pages as a list of matplotlib Figures (for looking at them; :func:`render_pdf` streams)."""
    pages: list[Any] = []
    lay_out(report, pages.append)
    return pages


def render_pdf(report: Report) -> bytes:
    """The report as PDF bytes (A4 pages, fonts embedded as TrueType)."""
    import matplotlib
    from matplotlib.backends.backend_pdf import PdfPages

    buffer = io.BytesIO()
    with matplotlib.rc_context({"pdf.fonttype": 42}):
        with PdfPages(
            buffer, metadata={"Title": report.title, "Creator": report.tool, "Subject": "Standing earth-leakage report"}
        ) as pdf:
            lay_out(report, pdf.savefig)
    return buffer.getvalue()
