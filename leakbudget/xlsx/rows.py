"""The rows of a result sheet as SpreadsheetML, generated directly: the fast path for big sheets.

XlsxWriter writes the sheet's frame (header, styles, column widths, frozen pane, chart) and one *sample row* that
holds a cell of every column in that column's format; this module reads each column's style index from the sample
row and replaces the sample row with the real rows, written the way XlsxWriter writes them in constant_memory mode
(inline strings, ECMA-376 Part 1 §18.3.1.4 ``c`` / §18.3.1.53 ``is``), about fifteen times faster than cell-by-cell
calls. Text is always text (never a formula, never markup): XML escapes, control characters as ``_xHHHH_`` and a
literal ``_xHHHH_`` protected as ``_x005F_xHHHH_`` (ECMA-376 Part 1 §22.9.2.19, ST_Xstring). Lone surrogates and
the noncharacters U+FFFE and U+FFFF, which XML 1.0 §2.2 excludes and which no reader we test decodes from an
escape, become U+FFFD (XlsxWriter writes ``_xFFFE_``, which python-calamine shows as those seven characters).
"""

from __future__ import annotations

import math
import numbers
import re
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass

# Largest number a cell holds (Microsoft, "Excel specifications and limits"); beyond it, and for ±inf, the value
# is written as text.
EXCEL_MAX_NUMBER = 9.99999999999999e307
# Most characters a cell holds, counted in UTF-16 units (Microsoft, "Excel specifications and limits"); longer
# text is cut there, as XlsxWriter's write_string does.
EXCEL_MAX_TEXT_UTF16 = 32767
SAMPLE_ROW = 2  # 1-based row of the sample cells, right under the header
QUOTE_ROW = SAMPLE_ROW + 1  # 1-based row of the one sample cell in the quote-prefix style (cell A)
# A text that starts with one of these is a formula or a command to a spreadsheet program that re-reads it (on
# editing the cell, or from a CSV export): such cells carry the quote-prefix style (ECMA-376 Part 1 §18.8.45,
# xf quotePrefix), as a spreadsheet program marks text typed with a leading apostrophe.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
ROWS_PER_CHUNK = 2000  # rows joined into one piece of output (and one progress report)

Cell = str | float | int | bool | None
RowProgress = Callable[[int, int], None]  # (rows written, rows in all)

# Anything in a text that needs more than copying: XML specials, C0 controls other than tab and line feed (XML 1.0
# cannot hold most of them, and a parser would turn a carriage return into a line feed), U+FFFE/U+FFFF, lone
# surrogates, and text that reads like an _xHHHH_ escape.
_NEEDS_ESCAPING = re.compile("[&<>\x00-\x08\x0b-\x1f\ufffe\uffff\ud800-\udfff]|_x[0-9A-Fa-f]{4}_")
_LITERAL_ESCAPE = re.compile("(_x[0-9A-Fa-f]{4}_)")
_CONTROL = re.compile("[\x00-\x08\x0b-\x1f]")
_NOT_A_CHARACTER = re.compile("[\ud800-\udfff\ufffe\uffff]")
_SAMPLE_CELL = re.compile(rb'<c r="([A-Z]+%d)"( s="\d+")?' % SAMPLE_ROW)
_DIMENSION = re.compile(rb'<dimension ref="[^"]*"/>')
_QUOTE_CELL = re.compile(rb'<c r="A%d"( s="\d+")?' % QUOTE_ROW)


def escape_text(text: str) -> str:
    """``text`` as the content of a ``<t>`` element, cut to the cell limit; see the module docstring."""
    if (
        len(text) > EXCEL_MAX_TEXT_UTF16 // 2
        and len(text.encode("utf-16-le", "surrogatepass")) > 2 * EXCEL_MAX_TEXT_UTF16
    ):
        units = 0
        for index, char in enumerate(text):  # never split a character above U+FFFF
            units += 2 if ord(char) > 0xFFFF else 1
            if units > EXCEL_MAX_TEXT_UTF16:
                text = text[:index]
                break
    if _NEEDS_ESCAPING.search(text) is None:
        return text
    text = _NOT_A_CHARACTER.sub("\ufffd", text)
    text = _LITERAL_ESCAPE.sub(r"_x005F\1", text)
    text = _CONTROL.sub(lambda m: f"_x{ord(m.group()):04X}_", text)
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def text_cell(text: str) -> str:
    """Everything after ``<c r="…" s="…"`` for a text cell."""
    body = escape_text(text)
    preserve = ' xml:space="preserve"' if body[:1].isspace() or body[-1:].isspace() else ""
    return f' t="inlineStr"><is><t{preserve}>{body}</t></is></c>'


def number_cell(value: float | int) -> str | None:
    """Everything after ``<c r="…" s="…"`` for a number (text beyond Excel's range), or None for NaN."""
    number = float(value)
    if number != number:
        return None
    if abs(number) > EXCEL_MAX_NUMBER:
        return text_cell(repr(number))
    return f"><v>{value if type(value) is int else repr(number)}</v></c>"


def _cell(value: object) -> str | None:
    """The general (slower) case: any value the rows may hold, as XlsxWriter's write_* calls would store it."""
    if isinstance(value, bool):
        return f' t="b"><v>{int(value)}</v></c>'
    if isinstance(value, numbers.Real):
        return number_cell(int(value) if isinstance(value, numbers.Integral) else float(value))
    return text_cell(str(value))


def used_range(rows: Sequence[Sequence[Cell]], header_width: int) -> str:
    """The ``<dimension>`` reference of the header plus ``rows`` (blank cells and NaN do not count)."""
    from xlsxwriter.utility import xl_col_to_name  # XlsxWriter is imported only when something is written

    last_row, last_column = 1, header_width - 1
    for number, row in enumerate(rows, start=SAMPLE_ROW):
        for column in range(len(row) - 1, -1, -1):
            value = row[column]
            if value is not None and not (type(value) is float and math.isnan(value)):
                last_row = number
                last_column = max(last_column, column)
                break
    end = f"{xl_col_to_name(max(last_column, 0))}{last_row}"
    return "A1" if end == "A1" else f"A1:{end}"


def rows_xml(
    rows: Sequence[Sequence[Cell]], styles: Sequence[str], progress: RowProgress | None = None, quoted: str = ""
) -> Iterator[bytes]:
    """``<row>`` elements for ``rows`` from row ``SAMPLE_ROW`` on, in UTF-8 pieces of ``ROWS_PER_CHUNK`` rows.

    ``styles[column]`` is the cell's style attribute (``' s="3"'`` or ``""``); a text that starts like a formula
    (:data:`FORMULA_STARTS`) takes ``quoted``, the quote-prefix style, when given. Rows with no cell are left out.
    """
    from xlsxwriter.utility import xl_col_to_name

    width = max((len(row) for row in rows), default=0)
    letters = [xl_col_to_name(c) for c in range(width)]
    styles = list(styles) + [""] * (width - len(styles))
    texts: dict[str, str] = {}  # text → cell body; result rows repeat the same texts many times
    total = len(rows)
    pieces: list[str] = []
    for number, row in enumerate(rows, start=SAMPLE_ROW):
        cells = []
        for column, value in enumerate(row):
            if type(value) is str:
                body = texts.get(value)
                if body is None:
                    body = texts[value] = text_cell(value)
                if quoted and value.startswith(FORMULA_STARTS):
                    cells.append(f'<c r="{letters[column]}{number}"{quoted}{body}')
                    continue
            elif type(value) is float:
                if value != value:
                    continue
                body = f"><v>{value!r}</v></c>" if -EXCEL_MAX_NUMBER <= value <= EXCEL_MAX_NUMBER else _cell(value)
            elif value is None:
                continue
            elif type(value) is int and -EXCEL_MAX_NUMBER <= value <= EXCEL_MAX_NUMBER:
                body = f"><v>{value}</v></c>"
            else:
                body = _cell(value)
                if body is None:
                    continue
            cells.append(f'<c r="{letters[column]}{number}"{styles[column]}{body}')
        if cells:
            pieces.append(f'<row r="{number}">{"".join(cells)}</row>')
        if (number - SAMPLE_ROW + 1) % ROWS_PER_CHUNK == 0:
            yield "".join(pieces).encode()
            pieces.clear()
            if progress is not None:
                progress(number - SAMPLE_ROW + 1, total)
    if pieces:
        yield "".join(pieces).encode()
    if progress is not None:
        progress(total, total)


@dataclass(frozen=True)
class SheetXml:
    """A worksheet part whose rows are generated while it is written: the frame around them, and the rows."""

    name: str  # the sheet's name
    head: bytes  # the frame up to the first generated row (``<dimension>`` already covering every row)
    rows: Sequence[Sequence[Cell]]
    styles: tuple[str, ...]  # style attribute per column, from the sample row
    tail: bytes  # the frame from ``</sheetData>`` on
    quoted: str = ""  # the quote-prefix style attribute, for text that starts like a formula

    def chunks(self, progress: RowProgress | None = None) -> Iterator[bytes]:
        yield self.head
        yield from rows_xml(self.rows, self.styles, progress, self.quoted)
        yield self.tail


def with_rows(frame: bytes, name: str, header: Sequence[str], rows: Sequence[Sequence[Cell]]) -> SheetXml | bytes:
    """Put ``rows`` in place of the sample row of ``frame`` (a worksheet part XlsxWriter wrote); with no rows,
    ``frame`` is returned as it is (it has no sample row)."""
    if not rows:
        return frame
    from xlsxwriter.utility import xl_cell_to_rowcol

    start = frame.index(b'<row r="%d"' % SAMPLE_ROW)
    end = frame.index(b"</row>", start) + len(b"</row>")
    styles: dict[int, str] = {}
    for match in _SAMPLE_CELL.finditer(frame, start, end):
        styles[xl_cell_to_rowcol(match.group(1).decode())[1]] = (match.group(2) or b"").decode()
    quoted = ""
    if frame.startswith(b'<row r="%d"' % QUOTE_ROW, end):
        quote_end = frame.index(b"</row>", end) + len(b"</row>")
        found = _QUOTE_CELL.search(frame, end, quote_end)
        quoted = (found.group(1) or b"").decode() if found else ""
        end = quote_end
    head = _DIMENSION.sub(f'<dimension ref="{used_range(rows, len(header))}"/>'.encode(), frame[:start], count=1)
    width = max(styles) + 1 if styles else 0
    return SheetXml(name, head, rows, tuple(styles.get(c, "") for c in range(width)), frame[end:], quoted)
