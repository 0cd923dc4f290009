"""The rows of a result sheet as SpreadsheetML, generated directly: the fast path for big sheets.

XlsxWriter writes the sheet's frame (header, styles, column widths, frozen pane, chart) and one *sample row* that
holds a cell of every column in that column's format; this module reads each column's style index from the sample
row and replaces the sample row with the real rows, written the way XlsxWriter writes them in constant_memory mode
(inline strings, ECMA-376 Part 1 §18.3.1.4 ``c`` / §18.3.1.53 ``is``), about fifteen times faster than cell-by-cell
calls. Text is always text (never a formula, never markup): XML escapes, control characters as ``_xHHHH_`` and a
literal ``_xHHHH_`` protected as ``_x005F_xHHHH_`` (ECMA-376 Part 1 §22.9.2.19, ST_Xstring). Lone surrogates and
the noncharacters U+FFFE and U+FFFF, which XML 1.0 §2.2 excludes and which no reader we test decodes from an
escape, become U+FFFD (XlsxWriter writes ``_xFFFE_``, which python-calamine shows as those seven characters).
Characters beyond ASCII are written as character references (XML 1.0 §4.1, ``&#960;`` for π), which every XML
reader turns back into the same characters: the rows are then ASCII, whose text Python joins and encodes to UTF-8
by copying (text with one character beyond Latin-1 is held two bytes a character and encoded character by
character).
"""

from __future__ import annotations

import itertools
import math
import numbers
import re
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any, overload

from leakbudget.xlsx.cells import column_index

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


class ColumnRows(Sequence[tuple[Cell, ...]]):
    """Rows kept as their columns (one list per column, all of one length): a sheet of many rows built a column at
    a time, which :func:`rows_xml` writes without making the rows. As a sequence it gives each row as a tuple."""

    def __init__(self, columns: list[list[Cell]]) -> None:
        if len({len(column) for column in columns}) > 1:
            raise ValueError("the columns of ColumnRows must be of one length")
        self.columns = columns

    def __len__(self) -> int:
        return len(self.columns[0]) if self.columns else 0

    @overload
    def __getitem__(self, index: int) -> tuple[Cell, ...]: ...

    @overload
    def __getitem__(self, index: slice) -> list[tuple[Cell, ...]]: ...

    def __getitem__(self, index: int | slice) -> tuple[Cell, ...] | list[tuple[Cell, ...]]:
        if isinstance(index, slice):
            return list(zip(*(column[index] for column in self.columns)))
        if not -len(self) <= index < len(self):
            raise IndexError(index)
        return tuple(column[index] for column in self.columns)

    def __iter__(self) -> Iterator[tuple[Cell, ...]]:
        return iter(zip(*self.columns))

    def append(self, row: Sequence[Cell]) -> None:
        """Add a row: a value per column, missing ones None."""
        if len(row) > len(self.columns):
            raise ValueError(f"a row of {len(row)} cells for {len(self.columns)} columns")
        for column, value in itertools.zip_longest(self.columns, row):
            column.append(value)

    def extend(self, rows: Iterable[Sequence[Cell]]) -> None:
        for row in rows:
            self.append(row)


def rows_width(rows: Sequence[Sequence[Cell]]) -> int:
    """The most cells a row has."""
    if isinstance(rows, ColumnRows):
        return len(rows.columns) if rows else 0
    return max(map(len, rows), default=0)


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
_HEADER_CELL = re.compile(rb'(<c r="([A-Z]+)1"(?: s="\d+")?)><v>0</v></c>')


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
    for number in range(len(rows) + SAMPLE_ROW - 1, SAMPLE_ROW - 1, -1):  # the last row holding a cell
        if _last_filled(rows[number - SAMPLE_ROW]) >= 0:
            last_row = number
            break
    if rows_width(rows) > last_column + 1:
        for row in rows:  # only a row longer than the header can widen the range
            if len(row) > last_column + 1:
                last_column = max(last_column, _last_filled(row))
    end = f"{xl_col_to_name(max(last_column, 0))}{last_row}"
    return "A1" if end == "A1" else f"A1:{end}"


def _last_filled(row: Sequence[Cell]) -> int:
    """The 0-based column of the row's last cell that is written (not None, not NaN), -1 for none."""
    for column in range(len(row) - 1, -1, -1):
        value = row[column]
        if value is not None and not (type(value) is float and math.isnan(value)):
            return column
    return -1


_PLAIN_LENGTH = EXCEL_MAX_TEXT_UTF16 // 2  # a text of no more characters is never cut
# In texts joined by "|", what a plain text (copied as it is, see _Column.plain) never holds. A printable text holds
# no control character, surrogate or noncharacter, and no white space but the space.
_NOT_PLAIN = ("&", "<", ">", "_x", "| ", " |")
_EMPTY_ROW = re.compile(r'<row r="\d+"></row>')
_REPEATS = 4  # a chunk of a column with at most 1/_REPEATS as many distinct numbers as rows formats each once

Pieces = list[str | Sequence[str]]  # one row's cell(s) of a column, in order: a str is the same in every row


class _Column:
    """Writes the cells of one column, a chunk of rows at a time.

    A chunk of the usual kind (every row holding text, or a number within Excel's range; or nothing at all) is
    given as pieces that one join puts together, no string made per cell: the row numbers, the values' texts, and
    the markup between them, the same in every row. Any other chunk is written cell by cell (:meth:`cells`), with
    the same result.
    """

    def __init__(self, letter: str, style: str, quoted: str) -> None:
        self.start = f'<c r="{letter}'  # then the row number
        self.style, self.quoted = style, quoted
        self.number = f'"{style}><v>'
        self.text = f'"{style} t="inlineStr"><is><t>'
        self.texts: dict[str, str] = {}  # text → its cell after the row number, for texts that are not plain

    def pieces(self, values: Sequence[Any], numbers: list[str]) -> tuple[Pieces, bool]:
        """The pieces of the column's cell in each row (``numbers``: the rows' numbers as text), and whether
        every row has a cell."""
        kinds = set(map(type, values))
        if kinds == {type(None)}:
            return [], False
        top = EXCEL_MAX_NUMBER
        if kinds == {str}:
            distinct = set(values)
            if self.plain(distinct):
                shown = values if all(map(str.isascii, distinct)) else _as_ascii(values, distinct)
                return [self.start, numbers, self.text, shown, "</t></is></c>"], True
            return [self.start, numbers, [self._text(v) for v in values]], True
        if kinds == {float}:
            total = sum(values)  # NaN or ±inf when a value is (or when the sum overflows)
            if total - total == 0 and -top <= min(values) and max(values) <= top:
                return [self.start, numbers, self.number, _shown(values, repr), "</v></c>"], True
        elif kinds == {int} and -top <= min(values) and max(values) <= top:
            return [self.start, numbers, self.number, _shown(values, str), "</v></c>"], True
        cells = self.cells(values, numbers)
        return [cells], all(cells)

    def cells(self, values: Sequence[Any], numbers: list[str]) -> list[str]:
        """Each row's ``<c …>`` string, "" for no cell."""
        start, number, top = self.start, self.number, EXCEL_MAX_NUMBER
        kinds = set(map(type, values))
        if kinds == {str, type(None)}:
            distinct = set(values)
            distinct.discard(None)
            if self.plain(distinct):
                text = self.text
                shown = values if all(map(str.isascii, distinct)) else _as_ascii(values, distinct)
                return ["" if v is None else f"{start}{n}{text}{v}</t></is></c>" for v, n in zip(shown, numbers)]
            return ["" if v is None else f"{start}{n}{self._text(v)}" for v, n in zip(values, numbers)]
        if kinds <= {float, type(None)}:
            return [
                "" if v is None else f"{start}{n}{number}{v!r}</v></c>" if -top <= v <= top else self.cell(v, n)
                for v, n in zip(values, numbers)
            ]
        if kinds <= {int, type(None)}:
            return [
                "" if v is None else f"{start}{n}{number}{v}</v></c>" if -top <= v <= top else self.cell(v, n)
                for v, n in zip(values, numbers)
            ]
        return [self.cell(v, n) for v, n in zip(values, numbers)]

    def cell(self, value: Cell, n: str) -> str:
        """One cell of any value the rows may hold, as XlsxWriter's write_* calls would store it; "" for none."""
        if type(value) is str:
            return f"{self.start}{n}{self._text(value)}"
        if type(value) is float:
            if value != value:
                return ""
            body = f"><v>{value!r}</v></c>" if -EXCEL_MAX_NUMBER <= value <= EXCEL_MAX_NUMBER else _cell(value)
        elif value is None:
            return ""
        elif type(value) is int and -EXCEL_MAX_NUMBER <= value <= EXCEL_MAX_NUMBER:
            body = f"><v>{value}</v></c>"
        else:
            body = _cell(value)
            if body is None:
                return ""
        return f'{self.start}{n}"{self.style}{body}'

    def _text(self, text: str) -> str:
        """A text's cell after its row number (kept: rows repeat the same texts)."""
        found = self.texts.get(text)
        if found is None:
            chosen = self.quoted if self.quoted and text.startswith(FORMULA_STARTS) else self.style
            found = self.texts[text] = f'"{chosen}{text_cell(text)}'.encode("ascii", "xmlcharrefreplace").decode()
        return found

    def plain(self, texts: Iterable[str]) -> bool:
        """Whether every text goes into its cell as it is: nothing to escape (:func:`escape_text`) or cut, no
        white space at either end (``xml:space``), and, with a quote-prefix style, no formula-like start.
        Checked on the texts joined by "|", which only errs towards False (a "|" beside a space or a "=")."""
        texts = list(texts)
        joined = "|".join(texts)
        if (
            not joined.isprintable()
            or any(mark in joined for mark in _NOT_PLAIN)
            or joined[:1] == " "
            or joined[-1:] == " "
            or (self.quoted and (joined.startswith(FORMULA_STARTS) or any("|" + c in joined for c in FORMULA_STARTS)))
        ):
            return False
        return max(map(len, texts), default=0) <= _PLAIN_LENGTH


def _as_ascii(values: Sequence[Any], distinct: Iterable[str]) -> list[Any]:
    """``values`` (texts of a plain chunk, perhaps None) with every character beyond ASCII as a character reference
    (XML 1.0 §4.1, ``&#960;`` for π): each distinct text converted once, all of them in one call."""
    texts = list(distinct)
    ascii_texts = "\n".join(texts).encode("ascii", "xmlcharrefreplace").decode().split("\n")  # no "\n" in them
    table: dict[Any, Any] = dict(zip(texts, ascii_texts))
    table[None] = None
    return list(map(table.__getitem__, values))


def _shown(values: Sequence[Any], show: Callable[[Any], str]) -> list[str]:
    """``show`` of each number; each distinct one once where there are few (but not with a zero among them:
    -0.0 and 0.0 are one key, with two texts)."""
    distinct = set(values)
    if _REPEATS * len(distinct) <= len(values) and 0 not in distinct:
        table = {v: show(v) for v in distinct}
        return list(map(table.__getitem__, values))
    return list(map(show, values))


def rows_xml(
    rows: Sequence[Sequence[Cell]], styles: Sequence[str], progress: RowProgress | None = None, quoted: str = ""
) -> Iterator[bytes]:
    """``<row>`` elements for ``rows`` from row ``SAMPLE_ROW`` on, in UTF-8 pieces of ``ROWS_PER_CHUNK`` rows.

    ``styles[column]`` is the cell's style attribute (``' s="3"'`` or ``""``); a text that starts like a formula
    (:data:`FORMULA_STARTS`) takes ``quoted``, the quote-prefix style, when given. Rows with no cell are left out.
    Each piece is made a column at a time (:class:`_Column`), its parts put in row order and joined once.
    """
    from xlsxwriter.utility import xl_col_to_name

    width = rows_width(rows)
    styles = list(styles) + [""] * (width - len(styles))
    columns = [_Column(xl_col_to_name(c), styles[c], quoted) for c in range(width)]
    total = len(rows)
    for first in range(0, total, ROWS_PER_CHUNK):
        by_column: Iterable[Sequence[Cell]]
        if isinstance(rows, ColumnRows):
            by_column = [column[first : first + ROWS_PER_CHUNK] for column in rows.columns]
            count = min(ROWS_PER_CHUNK, total - first)
        else:
            chunk = rows[first : first + ROWS_PER_CHUNK]
            by_column = zip(*chunk) if len(set(map(len, chunk))) == 1 else itertools.zip_longest(*chunk)
            count = len(chunk)
        numbers = [str(n) for n in range(first + SAMPLE_ROW, first + SAMPLE_ROW + count)]
        pieces: Pieces = ['<row r="', numbers, '">']
        full = False  # some column has a cell in every row: no row is empty
        for column, values in zip(columns, by_column):
            more, every = column.pieces(values, numbers)
            pieces += more
            full = full or every
        pieces.append("</row>")
        merged: Pieces = []  # the same, neighbouring constant pieces as one
        for piece in pieces:
            if isinstance(piece, str):
                if merged and isinstance(merged[-1], str):
                    merged[-1] += piece
                else:
                    merged.append(piece)
            else:
                merged.append(piece)
        step = len(merged)
        parts: list[str] = [""] * (count * step)
        for offset, piece in enumerate(merged):
            parts[offset::step] = [piece] * count if isinstance(piece, str) else piece
        text = "".join(parts)
        yield (text if full or '"></row>' not in text else _EMPTY_ROW.sub("", text)).encode()
        if progress is not None and count == ROWS_PER_CHUNK:
            progress(first + ROWS_PER_CHUNK, total)
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


def with_header(frame: bytes, header: Sequence[str]) -> bytes:
    """``frame`` with the header's texts (inline strings, escaped as every text cell) in the header row's sample
    cells (a number in each, in the bold style)."""
    if not header:
        return frame
    start = frame.index(b'<row r="1"')
    end = frame.index(b"</row>", start)

    def text(cell: re.Match[bytes]) -> bytes:
        title = str(header[column_index(cell.group(2).decode())])
        return cell.group(1) + text_cell(title).encode("ascii", "xmlcharrefreplace")

    return frame[:start] + _HEADER_CELL.sub(text, frame[start:end]) + frame[end:]


def with_rows(frame: bytes, name: str, header: Sequence[str], rows: Sequence[Sequence[Cell]]) -> SheetXml | bytes:
    """Put the header's texts in the header row (:func:`with_header`) and ``rows`` in place of the sample row of
    ``frame`` (a worksheet part XlsxWriter wrote); with no rows, that is all (the frame has no sample row)."""
    frame = with_header(frame, header)
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
