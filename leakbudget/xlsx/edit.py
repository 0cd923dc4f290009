"""Change cells of existing worksheets of a user's .xlsx, keeping every other byte of the package.

No domain knowledge here: a sheet name, and cells by (1-based row, 0-based column) with the values they are to
hold. The caller (``split --apply``) writes only into a new file; the source is only read.

Each edited worksheet part is scanned once with expat for the byte offsets of the rows and cells concerned (after
defusedxml has refused a DTD, the one place entities could be declared), then edited by byte splices:

* a changed cell is replaced whole, keeping its style index ``s`` (its formatting);
* a missing cell is inserted in column order, a missing row in row order (ECMA-376 Part 1 §18.3.1.4 ``c`` and
  the ``row`` element, §18.3.1.73 from memory: rows ascend in ``sheetData``, cells ascend in a row), taking the
  style of the cell its :class:`CellWrite` names (so a new row looks like the row above it);
* ``<dimension>`` (§18.3.1.35) and a row's ``spans`` hint are widened to cover the new cells.

Every other byte of the part, and every other part (shared strings, styles, the workbook's registration parts
included), stays as it was. Text is written as an inline string (``t="inlineStr"``, §18.3.1.53 ``is``), escaped as
:func:`leakbudget.xlsx.rows.escape_text` escapes result sheets, so the shared-strings part is never touched
(``docs/reading.md`` says why). A cell holding a formula is never replaced: :class:`CellRefused` names it, since
removing a formula could break other cells that share it and the workbook's calculation chain.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
import zipfile
import zlib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from io import BytesIO
from pathlib import Path
from typing import IO
from xml.parsers import expat

import defusedxml
import defusedxml.ElementTree as DET

from leakbudget.errors import WriteBackError
from leakbudget.xlsx.cells import column_index, column_letter
from leakbudget.xlsx.files import rewrite, same_file
from leakbudget.xlsx.package import DOC_REL_NS, MAIN_NS, REL_TYPE_WORKSHEET, WORKBOOK, _Package, _write_package
from leakbudget.xlsx.rows import EXCEL_MAX_NUMBER, escape_text
from leakbudget.xlsx.xml_text import BadXmlError, UnsafeXmlError, start_tag_end

# The largest row and column of a worksheet (ECMA-376 Part 1, ``row`` and ``c``; Microsoft, "Excel
# specifications and limits": 1,048,576 rows by 16,384 columns).
MAX_ROW = 1_048_576
MAX_COLUMN = 16_384

Cell = str | float | int | bool | None

_CELL_REF = re.compile(r"([A-Z]{1,3})([1-9][0-9]*)$")
_ENCODING = re.compile(rb'^<\?xml[^>]*encoding\s*=\s*["\']([A-Za-z0-9._-]+)["\']')
_SPANS = re.compile(rb'(\sspans\s*=\s*)("[^"]*"|\'[^\']*\')')
_R_ATTRIBUTE = re.compile(rb'(\sr\s*=\s*)("[^"]*"|\'[^\']*\')')
_SHEET_DATA = re.compile(rb"<((?:[A-Za-z_][\w.-]*:)?)sheetData(?=[\s/>])")
_REF = re.compile(rb'(\sref\s*=\s*)("[^"]*"|\'[^\']*\')')


@dataclass(frozen=True)
class CellWrite:
    """The value one cell is to hold (None: empty), and for a cell that does not exist yet, the cell (1-based row,
    0-based column) whose style it takes."""

    value: Cell
    style_from: tuple[int, int] | None = None


@dataclass(frozen=True)
class SheetEdit:
    """The cells to write into one worksheet, by (1-based row, 0-based column)."""

    sheet: str  # the sheet's name as it is in the workbook
    cells: Mapping[tuple[int, int], CellWrite]


class CellRefused(WriteBackError):
    """A cell to change holds a formula; nothing was written."""

    def __init__(self, path: Path, sheet: str, row: int, column: int, formula: str) -> None:
        self.sheet, self.row, self.column, self.formula = sheet, row, column, formula
        self.ref = f"{column_letter(column)}{row}"
        shown = f" (={formula[:60]})" if formula else ""
        super().__init__(
            f"{path.name}, sheet '{sheet}', cell {self.ref}: the cell holds a formula{shown}, which leakbudget does "
            "not replace; nothing was written; type the value into the cell in your spreadsheet program and run again."
        )


def edit_sheets(source: Path, edits: Sequence[SheetEdit], out: Path) -> Path:
    """Write to ``out`` the workbook ``source`` with the cells of ``edits`` changed; ``source`` is only read.

    ``out`` is written atomically (:func:`leakbudget.xlsx.files.rewrite`) and must be another file. Raises
    :class:`WriteBackError` (nothing written) when ``out`` is open in a spreadsheet program, the source is not a
    readable .xlsx package or exceeds the zip limits, a part declares a DTD, a named sheet is not a worksheet, or
    a cell to change holds a formula (:class:`CellRefused`).
    """
    source, out = Path(source), Path(out)
    if same_file(out, source) or out.resolve() == source.resolve():
        raise ValueError(f"edit_sheets writes a new file; {out} is the source itself")

    def build(original: IO[bytes], dest: IO[bytes]) -> None:
        try:
            archive = zipfile.ZipFile(original)
        except (zipfile.BadZipFile, OSError, ValueError) as exc:
            raise WriteBackError(
                f"{source.name}: not an .xlsx workbook ({exc}); save it as an Excel .xlsx workbook and run again."
            ) from None
        with archive:
            try:
                _edit_package(archive, edits, dest, source)
            except (zipfile.BadZipFile, zlib.error, EOFError, NotImplementedError) as exc:
                raise WriteBackError(
                    f"{source.name}: the workbook's zip package is damaged or uses an unsupported feature ({exc}); "
                    "re-save it in a spreadsheet program and run again."
                ) from None

    return rewrite(source, out, build).path


def _edit_package(archive: zipfile.ZipFile, edits: Sequence[SheetEdit], dest: IO[bytes], path: Path) -> None:
    user = _Package(archive, path)
    parts = _worksheets(user)
    writes: dict[str, bytes] = {}
    for edit in edits:
        part = parts.get(edit.sheet)
        actual = user.actual(part) if part is not None else None
        if actual is None:
            raise WriteBackError(
                f"{path.name}: sheet '{edit.sheet}' is not a worksheet of the package (it is a chart sheet or is "
                "missing); re-save the workbook in a spreadsheet program and run again."
            )
        try:
            writes[actual] = edit_sheet_xml(user.read(actual), edit.cells, path, edit.sheet)
        except UnsafeXmlError:
            raise WriteBackError(
                f"{path.name}: part {actual} declares a DTD or entities, which an .xlsx never needs (it may be an "
                "entity-expansion attack); nothing was written; re-save the workbook in a spreadsheet program."
            ) from None
        except BadXmlError as exc:
            raise WriteBackError(
                f"{path.name}: sheet '{edit.sheet}' is not a worksheet leakbudget can edit ({exc}); nothing was "
                "written; re-save the workbook in a spreadsheet program and run again."
            ) from None
    _write_package(user, dest, dict(writes), set())


def _worksheets(user: _Package) -> dict[str, str]:
    """Sheet name as in the workbook -> its worksheet part (chart sheets and dialog sheets left out)."""
    workbook = user.xml(WORKBOOK, 2)
    rels = {rel.id: rel for rel, _ in user.rels(WORKBOOK)[1]}
    out: dict[str, str] = {}
    for element in workbook.root.iter(f"{{{MAIN_NS}}}sheet"):
        rel = rels.get(element.get(f"{{{DOC_REL_NS}}}id", ""))
        if rel is not None and rel.type == REL_TYPE_WORKSHEET and rel.target is not None:
            out[element.get("name", "")] = rel.target
    return out


# ------------------------------------------------------------------------------------------------ one sheet part


@dataclass
class _CellSpan:
    column: int  # 0-based
    start: int
    end: int
    style: str | None  # its s attribute
    empty: bool  # written as <c …/>
    formula: str | None = None  # the text of its <f> child; None when it has none


@dataclass
class _RowSpan:
    name: str  # qualified name as written ("row" or "x:row")
    number: int
    start: int
    start_end: int
    end: int
    empty: bool
    cells: list[_CellSpan] = field(default_factory=list)


@dataclass
class _Scan:
    prefix: str = ""  # prefix of the main namespace on sheetData ("" or "x:")
    sheet_data: _RowSpan | None = None  # sheetData's span (number unused)
    dimension: tuple[int, int] | None = None  # start, start_end of <dimension>
    rows: dict[int, _RowSpan] = field(default_factory=dict)  # the rows asked for that exist
    insert_at: dict[int, int] = field(default_factory=dict)  # rows asked for that do not: the offset they go at


def edit_sheet_xml(data: bytes, cells: Mapping[tuple[int, int], CellWrite], path: Path, sheet: str) -> bytes:
    """The worksheet part ``data`` with ``cells`` written (see the module docstring); ``path`` and ``sheet`` name
    the workbook and sheet in a :class:`CellRefused`."""
    for row, column in cells:
        if not (1 <= row <= MAX_ROW and 0 <= column < MAX_COLUMN):
            raise ValueError(f"cell (row {row}, column {column}) is outside a worksheet")
    _refuse_dtd(data)
    wanted = {r for r, _ in cells} | {w.style_from[0] for w in cells.values() if w.style_from is not None}
    scan = _scan(data, wanted)
    if scan.sheet_data is None:
        raise BadXmlError("it has no sheetData")
    p = scan.prefix
    splices: list[tuple[int, int, bytes]] = []
    new_rows: dict[int, list[str]] = {}  # offset -> <row> elements, in row order

    def style_of(ref: tuple[int, int] | None) -> str | None:
        if ref is None or ref[0] not in scan.rows:
            return None
        return next((c.style for c in scan.rows[ref[0]].cells if c.column == ref[1]), None)

    by_row: dict[int, dict[int, CellWrite]] = {}
    for (r, c), write in cells.items():
        by_row.setdefault(r, {})[c] = write
    for number in sorted(by_row):
        targets = sorted(by_row[number].items())
        existing = scan.rows.get(number)
        if existing is None:
            body = "".join(_cell_xml(p, number, c, w.value, style_of(w.style_from)) for c, w in targets)
            if body:
                new_rows.setdefault(scan.insert_at[number], []).append(f'<{p}row r="{number}">{body}</{p}row>')
            continue
        splices += _edit_row(data, existing, targets, p, style_of, path, sheet)
    for offset, rows in new_rows.items():
        splices.append(_insert(data, scan.sheet_data, offset, "".join(rows).encode()))
    if scan.dimension is not None:
        written = [(r, c) for (r, c), w in cells.items() if w.value is not None]
        splices += _widen_dimension(data, scan.dimension, written)
    return _apply(data, splices)


def _edit_row(
    data: bytes,
    row: _RowSpan,
    targets: list[tuple[int, CellWrite]],
    p: str,
    style_of,  # noqa: ANN001 (Callable[[tuple[int, int] | None], str | None])
    path: Path,
    sheet: str,
) -> list[tuple[int, int, bytes]]:
    """Splices that write ``targets`` (column, value) into the existing ``row``."""
    splices: list[tuple[int, int, bytes]] = []
    inserts: dict[int, list[str]] = {}
    added: list[int] = []
    for column, write in targets:
        cell = next((c for c in row.cells if c.column == column), None)
        if cell is not None:
            if cell.formula is not None:
                raise CellRefused(path, sheet, row.number, column, cell.formula)
            splices.append((cell.start, cell.end, _cell_xml(p, row.number, column, write.value, cell.style).encode()))
            continue
        xml = _cell_xml(p, row.number, column, write.value, style_of(write.style_from))
        if not xml:
            continue
        after = next((c for c in row.cells if c.column > column), None)
        inserts.setdefault(after.start if after is not None else -1, []).append(xml)
        added.append(column)
    for offset, pieces in inserts.items():
        splices.append(_insert(data, row, offset, "".join(pieces).encode()))
    if added:
        splices += _widen_spans(data, row, added)
    return splices


def _insert(data: bytes, parent: _RowSpan, offset: int, fragment: bytes) -> tuple[int, int, bytes]:
    """Insert ``fragment`` at ``offset`` inside ``parent`` (-1 or the parent's end: after its last child),
    expanding an empty-element tag."""
    if parent.empty:
        slash = data.rindex(b"/", parent.start, parent.start_end)
        return slash, parent.start_end, b">" + fragment + b"</" + parent.name.encode() + b">"
    if offset < 0 or offset >= parent.end:
        offset = data.rindex(b"</", parent.start_end, parent.end)
    return offset, offset, fragment


def _cell_xml(p: str, row: int, column: int, value: Cell, style: str | None) -> str:
    """A ``<c>`` element holding ``value`` (text as an inline string); "" for an empty cell without style."""
    ref = f"{column_letter(column)}{row}"
    s = f' s="{style}"' if style else ""
    if value is None or (type(value) is float and value != value):
        return f'<{p}c r="{ref}"{s}/>' if style else ""
    if isinstance(value, bool):
        return f'<{p}c r="{ref}"{s} t="b"><{p}v>{int(value)}</{p}v></{p}c>'
    if isinstance(value, int | float):
        number = float(value)
        if abs(number) <= EXCEL_MAX_NUMBER:
            shown = str(value) if isinstance(value, int) else repr(number)
            return f'<{p}c r="{ref}"{s}><{p}v>{shown}</{p}v></{p}c>'
        value = repr(number)  # ±inf and numbers beyond Excel's range are written as text, as the result sheets do
    text = escape_text(str(value))
    preserve = ' xml:space="preserve"' if text[:1].isspace() or text[-1:].isspace() else ""
    return f'<{p}c r="{ref}"{s} t="inlineStr"><{p}is><{p}t{preserve}>{text}</{p}t></{p}is></{p}c>'


def _widen_spans(data: bytes, row: _RowSpan, columns: list[int]) -> list[tuple[int, int, bytes]]:
    """Widen a row's optional ``spans`` hint ("1:8", 1-based columns) to cover ``columns``."""
    match = _SPANS.search(data, row.start, row.start_end)
    if match is None:
        return []
    numbers = [int(n) for n in re.findall(rb"\d+", match.group(2))] + [c + 1 for c in columns]
    return [(match.start(2), match.end(2), f'"{min(numbers)}:{max(numbers)}"'.encode())]


def _widen_dimension(
    data: bytes, dimension: tuple[int, int], cells: list[tuple[int, int]]
) -> list[tuple[int, int, bytes]]:
    """Widen ``<dimension ref="A1:H20"/>`` to cover ``cells``; a ref that does not parse is left as it is."""
    match = _REF.search(data, *dimension)
    if match is None or not cells:
        return []
    corners = []
    for ref in match.group(2)[1:-1].decode("ascii", "replace").split(":"):
        found = _CELL_REF.match(ref.strip().replace("$", ""))
        if found is None:
            return []
        corners.append((int(found.group(2)), column_index(found.group(1))))
    rows = [r for r, _ in corners] + [r for r, _ in cells]
    columns = [c for _, c in corners] + [c for _, c in cells]
    first, last = f"{column_letter(min(columns))}{min(rows)}", f"{column_letter(max(columns))}{max(rows)}"
    ref = first if first == last else f"{first}:{last}"
    return [(match.start(2), match.end(2), f'"{ref}"'.encode())]


def _apply(data: bytes, splices: list[tuple[int, int, bytes]]) -> bytes:
    out: list[bytes] = []
    position = 0
    for start, end, text in sorted(splices, key=lambda s: (s[0], s[1])):
        if start < position:
            raise ValueError("overlapping splices in a worksheet part")
        out += [data[position:start], text]
        position = end
    out.append(data[position:])
    return b"".join(out)


def _refuse_dtd(data: bytes) -> None:
    """Refuse a DTD (the only place entities could be declared) and any encoding but UTF-8, before expat reads on."""
    match = _ENCODING.match(data.lstrip(b"\xef\xbb\xbf"))
    if data[:2] in (b"\xff\xfe", b"\xfe\xff") or (match and match.group(1).lower() not in (b"utf-8", b"utf8")):
        raise BadXmlError("not UTF-8")
    try:
        for _ in DET.iterparse(
            BytesIO(data), events=("start",), forbid_dtd=True, forbid_entities=True, forbid_external=True
        ):
            break
    except defusedxml.DefusedXmlException as exc:
        raise UnsafeXmlError(type(exc).__name__) from exc
    except ET.ParseError as exc:
        raise BadXmlError(str(exc)) from exc


def _scan(data: bytes, wanted: set[int]) -> _Scan:
    """Where things are: sheetData and dimension, the rows in ``wanted`` with their cells, and where each wanted
    row that does not exist would go. Rows and cells without an ``r`` attribute follow the one before (§18.3.1.4;
    §18.3.1.73 from memory). The fast path finds the rows by their start tags and parses only the wanted ones; a
    part with comments, CDATA sections or processing instructions (where ``<row`` could be text) is parsed
    whole."""
    return _fast_scan(data, wanted) or _parsed_scan(data, wanted)


def _fast_scan(data: bytes, wanted: set[int]) -> _Scan | None:
    """The rows located in the raw bytes (in XML a ``<`` outside comments, CDATA and processing instructions
    always starts markup), the wanted ones parsed with expat; None when the part needs the full parse."""
    root = re.search(rb"<[^?!]", data)
    if root is None or b"<!--" in data or b"<![CDATA[" in data or data.find(b"<?", root.start()) >= 0:
        return None
    found = _SHEET_DATA.search(data)
    if found is None:
        return None
    scan = _Scan(prefix=found.group(1).decode())
    prefix = found.group(1)
    tag_end, empty = start_tag_end(data, found.start())
    scan.sheet_data = span = _RowSpan(f"{scan.prefix}sheetData", 0, found.start(), tag_end, tag_end, empty)
    if not empty:
        close = re.compile(rb"</" + re.escape(prefix) + rb"sheetData\s*>").search(data, tag_end)
        if close is None:
            return None
        span.end = close.end()
    dimension = re.compile(rb"<" + re.escape(prefix) + rb"dimension(?=[\s/>])").search(data, 0, found.start())
    if dimension is not None:
        scan.dimension = (dimension.start(), start_tag_end(data, dimension.start())[0])
    pending = sorted(wanted)
    k, last = 0, 0
    row_close = re.compile(rb"</" + re.escape(prefix) + rb"row\s*>")
    for match in re.compile(rb"<" + re.escape(prefix) + rb"row(?=[\s/>])").finditer(data, span.start_end, span.end):
        begin = match.start()
        row_end, row_empty = start_tag_end(data, begin)
        r = _R_ATTRIBUTE.search(data, begin, row_end)
        number = _row_number(r.group(2)[1:-1].decode() if r else None, last)
        last = number
        while k < len(pending) and pending[k] < number:
            scan.insert_at[pending[k]] = begin
            k += 1
        if k < len(pending) and pending[k] == number:
            k += 1
            end = row_end
            if not row_empty:
                closing = row_close.search(data, row_end)
                if closing is None:
                    return None
                end = closing.end()
            row = _RowSpan(f"{scan.prefix}row", number, begin, row_end, end, row_empty)
            row.cells = _row_cells(data, row)
            scan.rows[number] = row
    for number in pending[k:]:
        scan.insert_at[number] = -1  # after the last row
    return scan


def _row_cells(data: bytes, row: _RowSpan) -> list[_CellSpan]:
    """The cells of one row, parsed from its bytes with expat (offsets into ``data``)."""
    fragment = data[row.start : row.end]
    parsed = _parsed_scan(
        b'<w><sheetData r="0">' + fragment + b"</sheetData></w>", {row.number}, first_row=row.number - 1
    )
    shift = row.start - len(b'<w><sheetData r="0">')
    cells = parsed.rows[row.number].cells
    for cell in cells:
        cell.start += shift
        cell.end += shift
    return cells


def _parsed_scan(data: bytes, wanted: set[int], first_row: int = 0) -> _Scan:
    """The careful path: the whole part parsed with expat (``first_row``: the row number before the first row)."""
    parser = expat.ParserCreate()
    scan = _Scan()
    pending = sorted(wanted)
    state = {"next": 0, "last_row": first_row, "last_column": -1}
    stack: list[str] = []
    current: list[_RowSpan | _CellSpan | None] = [None, None]  # the wanted row open, and its cell open
    formula: list[str] = []

    def start(name: str, attrs: dict[str, str]) -> None:
        depth = len(stack)
        local = name.rsplit(":", 1)[-1]
        stack.append(local)
        begin = parser.CurrentByteIndex
        if depth == 1 and local in ("sheetData", "dimension"):
            tag_end, empty = start_tag_end(data, begin)
            if local == "dimension":
                scan.dimension = (begin, tag_end)
            else:
                scan.prefix = name[: -len(local)]
                scan.sheet_data = _RowSpan(name, 0, begin, tag_end, tag_end, empty)
        elif depth == 2 and local == "row" and stack[1] == "sheetData":
            number = _row_number(attrs.get("r"), state["last_row"])
            state["last_row"], state["last_column"] = number, -1
            while state["next"] < len(pending) and pending[state["next"]] < number:
                scan.insert_at[pending[state["next"]]] = begin
                state["next"] += 1
            current[0] = None
            if state["next"] < len(pending) and pending[state["next"]] == number:
                state["next"] += 1
                tag_end, empty = start_tag_end(data, begin)
                current[0] = scan.rows[number] = _RowSpan(name, number, begin, tag_end, tag_end, empty)
        elif depth == 3 and local == "c" and isinstance(current[0], _RowSpan):
            column = _column_number(attrs.get("r"), state["last_column"])
            state["last_column"] = column
            tag_end, empty = start_tag_end(data, begin)
            cell = _CellSpan(column, begin, tag_end, attrs.get("s"), empty)
            current[0].cells.append(cell)
            current[1] = cell
        elif depth == 4 and local == "f" and isinstance(current[1], _CellSpan):
            current[1].formula = ""
            formula.clear()

    def end(name: str) -> None:
        local = stack.pop()
        depth = len(stack)
        at = parser.CurrentByteIndex
        if depth == 1 and local == "sheetData" and scan.sheet_data is not None:
            span = scan.sheet_data
            if not span.empty:
                span.end = data.index(b">", at) + 1
            for number in pending[state["next"] :]:
                scan.insert_at[number] = -1  # after the last row
            state["next"] = len(pending)
        elif depth == 2 and local == "row" and isinstance(current[0], _RowSpan):
            if not current[0].empty:
                current[0].end = data.index(b">", at) + 1
            current[0] = None
        elif depth == 3 and local == "c" and isinstance(current[1], _CellSpan):
            if not current[1].empty:
                current[1].end = data.index(b">", at) + 1
            current[1] = None
        elif depth == 4 and local == "f" and isinstance(current[1], _CellSpan):
            current[1].formula = "".join(formula)

    def characters(text: str) -> None:
        if stack and stack[-1] == "f" and isinstance(current[1], _CellSpan) and current[1].formula is not None:
            formula.append(text)

    parser.StartElementHandler = start
    parser.EndElementHandler = end
    parser.CharacterDataHandler = characters
    try:
        parser.Parse(data, True)
    except expat.ExpatError as exc:
        raise BadXmlError(str(exc)) from exc
    return scan


def _row_number(r: str | None, last: int) -> int:
    number = int(r) if r is not None and r.strip().isdigit() else last + 1
    if number <= last or number > MAX_ROW:
        raise BadXmlError(f"row {number} comes after row {last}")
    return number


def _column_number(r: str | None, last: int) -> int:
    if r is None:
        return last + 1
    found = re.match(r"\$?([A-Z]{1,3})", r.strip())
    if found is None:
        raise BadXmlError(f"the cell reference '{r}' does not parse")
    return column_index(found.group(1))
