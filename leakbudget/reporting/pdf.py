"""Lay a :class:`leakbudget.reporting.document.Report` out as A4 PDF pages with reportlab (no browser needed).

A :class:`PageWriter` places blocks top to bottom on reportlab's canvas: text line by line at measured positions
(the report's typeface, :mod:`leakbudget.reporting.typeface`, embedded as a TrueType subset so the text can be
searched and copied), tables row by row with wrapped cells and their header repeated on every page, and each chart
as the vector shapes :mod:`leakbudget.reporting.charts` drew once (the same shapes the HTML writes as SVG). The
first page holds the cover and the one-page summary; the job, the settings, the circuit overview and the split plan
each start a new page, the other sections flow (one kept on one page where it fits).
"""

from __future__ import annotations

import functools
import io
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from leakbudget.reporting.charts import INK, STATUS_COLOURS, WIDTH_IN, Chart, Line, Polygon, Rect, Text
from leakbudget.reporting.document import Block, Cell, Facts, Figure, Paragraph, Report, Section, Table
from leakbudget.reporting.typeface import ASCENT, font_name, text_width_pt

PAGE_W_IN, PAGE_H_IN = 8.27, 11.69  # A4 (ISO 216: 210 mm × 297 mm)
MARGIN_IN = 0.6
CONTENT_W_IN = PAGE_W_IN - 2 * MARGIN_IN
FOOTER_IN = 0.35
WRAP_SLACK = 0.97  # wrap to 97 % of a box: room for a PDF viewer's rounding of glyph positions
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
NEW_PAGE_SECTIONS = ("job",)  # the summary has page 1 to itself; the other sections flow
KEEP_TOGETHER = 0.4  # a section up to this share of a page moves whole to the next page rather than split


def text_width_in(text: str, size_pt: float, bold: bool = False) -> float:
    """Width [in] of ``text`` set in the report's typeface at ``size_pt``, as the PDF draws it."""
    return text_width_pt(text, size_pt, bold) / PT_PER_IN


@functools.lru_cache(maxsize=64)
def _rgb(colour: str) -> tuple[float, float, float]:
    """A ``#rrggbb`` colour as reportlab's 0-1 RGB triple."""
    return int(colour[1:3], 16) / 255, int(colour[3:5], 16) / 255, int(colour[5:7], 16) / 255


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


class PageWriter:
    """Places blocks top to bottom on A4 pages of a reportlab canvas, starting a new page when the next block does
    not fit. Positions are inches from the page's top-left corner; the canvas counts points from bottom-left."""

    def __init__(self, report: Report, canvas: Any) -> None:
        self.report = report
        self.canvas = canvas
        self.count = 0
        self.open = False  # a page has been started and not yet finished
        self.y = 0.0  # distance of the cursor from the page top [in]
        self.dry = False  # measuring: move the cursor, draw nothing, never break the page
        self.fonts = {False: font_name(False), True: font_name(True)}

    # -- pages
    def finish(self) -> None:
        if self.open:
            self.canvas.showPage()
            self.open = False

    def new_page(self) -> None:
        self.finish()
        self.open = True
        self.count += 1
        self.y = MARGIN_IN
        footer = f"{self.report.title} · {self.report.generated} · {self.report.tool} · page {self.count}"
        self._text(MARGIN_IN, PAGE_H_IN - MARGIN_IN + 0.12, footer, 7, SOFT)

    def room(self) -> float:
        return float("inf") if self.dry else PAGE_H_IN - MARGIN_IN - FOOTER_IN - self.y

    def ensure(self, height_in: float) -> None:
        if not self.open or (height_in > self.room() and self.y > MARGIN_IN + 1e-9):
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
        """Start a new page when a short section (at most KEEP_TOGETHER of a page) would not fit in the room left;
        a longer one flows on from here (its charts are never split, its tables repeat their header)."""
        height = self.measure(section)
        if height <= KEEP_TOGETHER * (PAGE_H_IN - 2 * MARGIN_IN - FOOTER_IN):
            self.ensure(height)

    # -- primitives (inches from the top-left corner)
    def _text(self, x_in: float, y_in: float, text: str, size: float, colour: str = INK, bold: bool = False) -> None:
        """A line of text whose top (the font's ascent) is at ``y_in``."""
        if self.dry or not text:
            return
        c = self.canvas
        c.setFillColorRGB(*_rgb(colour))
        c.setFont(self.fonts[bold], size)
        c.drawString(x_in * PT_PER_IN, (PAGE_H_IN - y_in) * PT_PER_IN - ASCENT * size, text)

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
        c = self.canvas
        c.setStrokeColorRGB(*_rgb(colour))
        c.setLineWidth(width)
        c.setDash()
        y = (PAGE_H_IN - y_in) * PT_PER_IN
        c.line(x0 * PT_PER_IN, y, x1 * PT_PER_IN, y)

    def _fill(self, x_in: float, y_in: float, w_in: float, h_in: float, colour: str) -> None:
        if self.dry:
            return
        self.canvas.setFillColorRGB(*_rgb(colour))
        self.canvas.rect(
            x_in * PT_PER_IN,
            (PAGE_H_IN - y_in - h_in) * PT_PER_IN,
            w_in * PT_PER_IN,
            h_in * PT_PER_IN,
            stroke=0,
            fill=1,
        )

    def lines(
        self,
        lines: Sequence[str],
        size: float,
        colour: str = INK,
        bold: bool = False,
        indent_in: float = 0.0,
    ) -> None:
        step = size * LINE_SPACING / PT_PER_IN
        for line in lines:
            self.ensure(step)
            self._text(MARGIN_IN + indent_in, self.y, line, size, colour, bold)
            self.y += step

    # -- blocks
    def cover(self) -> None:
        r = self.report
        self.new_page()
        self._fill(0, 0, PAGE_W_IN, 0.18, ACCENT)
        self._text(MARGIN_IN, self.y, "STANDING EARTH-LEAKAGE REPORT", 8.5, ACCENT, True)
        self.y += 0.25
        self.lines(_wrap(r.title, CONTENT_W_IN, 20, True), 20, bold=True)
        self.lines(_wrap(r.subtitle, CONTENT_W_IN, 10.5), 10.5, SOFT)
        self.y += 0.1
        tone = TONE_COLOURS.get(r.verdict.tone or "", INK)
        self.lines(_wrap(r.verdict.text, CONTENT_W_IN - 0.2, 11, True), 11, tone, True, indent_in=0.15)
        counts = "   ".join(f"{n} {status}" for status, n in sorted(r.status_counts.items()))
        self.lines([counts], 9.5, SOFT, indent_in=0.15)
        self.y += 0.1
        self._rule(self.y)
        self.y += 0.1

    def heading(self, title: str, first: Block | None = None) -> None:
        """A section's title, on the page where its first block starts (a heading never ends a page)."""
        self.ensure(0.5 + min(self._height(first), 2.0) if first is not None else 0.9)
        self.y += 0.12
        self.lines([title], 14, ACCENT, True)
        self.y += 0.04

    def paragraph(self, p: Paragraph) -> None:
        if p.tone == "heading":
            self.ensure(0.7)  # a sub-heading never ends a page
            self.y += 0.06
            self.lines(_wrap(p.text, CONTENT_W_IN, 11, True), 11, ACCENT, True)
            self.y += 0.03
            return
        colour = TONE_COLOURS.get(p.tone or "", INK)
        bold = p.tone in STATUS_COLOURS
        self.lines(_wrap(p.text, CONTENT_W_IN, 9, bold), 9, colour, bold)
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
        """Draw the chart's vector shapes, scaled to the content width when that is narrower than the chart."""
        chart: Chart = fig.chart
        scale = min(1.0, CONTENT_W_IN / WIDTH_IN)
        height_in = chart.height_in * scale
        caption = _wrap(fig.caption, CONTENT_W_IN, 7.5)
        self.ensure(height_in + 0.1 + len(caption) * 7.5 * LINE_SPACING / PT_PER_IN)
        if not self.dry:
            self._chart(chart, MARGIN_IN, self.y, scale)
        self.y += height_in + 0.05
        self.lines(caption, 7.5, SOFT)
        self.y += 0.1

    def _chart(self, chart: Chart, x_in: float, y_in: float, scale: float) -> None:
        c = self.canvas
        c.saveState()
        # chart points run from its top-left corner downwards: move there, scale, and flip the y axis
        c.translate(x_in * PT_PER_IN, (PAGE_H_IN - y_in) * PT_PER_IN)
        c.scale(scale, -scale)
        for shape in chart.shapes:
            if isinstance(shape, Rect):
                c.setFillColorRGB(*_rgb(shape.fill))
                stroke = 1 if shape.stroke and shape.stroke_width else 0
                if stroke:
                    c.setStrokeColorRGB(*_rgb(shape.stroke or INK))
                    c.setLineWidth(shape.stroke_width)
                    c.setDash()
                c.rect(shape.x, shape.y, shape.w, shape.h, stroke=stroke, fill=1)
            elif isinstance(shape, Line):
                c.setStrokeColorRGB(*_rgb(shape.colour))
                c.setLineWidth(shape.width)
                if shape.dash:
                    c.setDash(list(shape.dash))
                else:
                    c.setDash()
                c.line(shape.x1, shape.y1, shape.x2, shape.y2)
            elif isinstance(shape, Polygon):
                c.setFillColorRGB(*_rgb(shape.fill))
                path = c.beginPath()
                path.moveTo(*shape.points[0])
                for point in shape.points[1:]:
                    path.lineTo(*point)
                path.close()
                c.drawPath(path, stroke=0, fill=1)
            elif isinstance(shape, Text):
                self._chart_text(shape)
        c.restoreState()

    def _chart_text(self, t: Text) -> None:
        """Text in the flipped chart space: unflip round its baseline so the glyphs stand upright."""
        c = self.canvas
        c.saveState()
        c.translate(t.x, t.y)
        c.scale(1, -1)
        c.setFillColorRGB(*_rgb(t.colour))
        c.setFont(self.fonts[t.bold], t.size)
        if t.anchor == "end":
            c.drawRightString(0, 0, t.text)
        elif t.anchor == "middle":
            c.drawCentredString(0, 0, t.text)
        else:
            c.drawString(0, 0, t.text)
        c.restoreState()

    def table(self, table: Table, size: float = 7.0) -> None:
        pad = 0.05
        widths = column_widths(table, size, pad)
        step = size * LINE_SPACING / PT_PER_IN
        header = [PdfCell(_wrap(h, w - 2 * pad, size, True), [], ACCENT, True) for h, w in zip(table.headers, widths)]
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
        self.lines(caption, 8.5, bold=True)
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
        if self.dry:
            return
        x = MARGIN_IN
        step = size * LINE_SPACING / PT_PER_IN
        for cell, width in zip(row, widths):
            for i, line in enumerate(cell.lines):
                self._text(x + pad, self.y + pad + i * step, line, size, cell.colour, cell.bold)
            for i, line in enumerate(cell.notes, start=len(cell.lines)):
                self._text(x + pad, self.y + pad + i * step, line, size, SOFT)
            x += width

    def _height(self, block: Block) -> float:
        """Height [in] of one block laid out without a page break (a dry run)."""
        y, self.y, dry = self.y, 0.0, self.dry
        self.dry = True
        try:
            self.block(block)
            return self.y
        finally:
            self.y, self.dry = y, dry

    def block(self, block: Block) -> None:
        if isinstance(block, Table):
            self.table(block)
        elif isinstance(block, Figure):
            self.figure(block)
        elif isinstance(block, Facts):
            self.facts(block)
        else:
            self.paragraph(block)

    def section(self, section: Section) -> None:
        self.heading(section.title, section.blocks[0] if section.blocks else None)
        for block in section.blocks:
            self.block(block)


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
    bold: bool = False


def _pdf_cell(cell: Cell, width_in: float, size: float) -> PdfCell:
    bold = cell.tone is not None
    text = cell.text
    if cell.kind and cell.kind.lower() not in cell.text.lower():
        text += f" [{cell.kind}]"
    return PdfCell(
        _wrap(text, width_in, size, bold),
        _wrap(cell.note, width_in, size) if cell.note else [],
        TONE_COLOURS.get(cell.tone or "", INK),
        bold,
    )


def _cell_text(cell: Cell) -> str:
    """A cell as plain text: value, provenance mark in brackets (unless the text says it already), source below."""
    text = cell.text
    if cell.kind and cell.kind.lower() not in cell.text.lower():
        text += f" [{cell.kind}]"
    if cell.note:
        text += f"\n{cell.note}"
    return text


def lay_out(report: Report, canvas: Any) -> int:
    """Lay the report out on the pages of a reportlab canvas; return the page count."""
    writer = PageWriter(report, canvas)
    writer.cover()
    for i, section in enumerate(report.sections):
        if section.anchor in NEW_PAGE_SECTIONS and i > 0:
            writer.new_page()
        elif i > 0:
            writer.keep_together(section)
        writer.section(section)
    writer.finish()
    return writer.count


def render_pdf(report: Report) -> bytes:
    """The report as PDF bytes (A4 pages, the typeface embedded as a TrueType subset)."""
    from reportlab.pdfgen.canvas import Canvas

    buffer = io.BytesIO()
    canvas = Canvas(
        buffer,
        pagesize=(PAGE_W_IN * PT_PER_IN, PAGE_H_IN * PT_PER_IN),
        pageCompression=1,
        initialFontName=font_name(False),
    )
    canvas.setTitle(report.title)
    canvas.setCreator(report.tool)
    canvas.setAuthor("")  # reportlab's default says "anonymous"; who prepared the plan is in the report
    canvas.setSubject("Standing earth-leakage report")
    lay_out(report, canvas)
    canvas.save()
    return buffer.getvalue()
