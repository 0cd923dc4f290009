"""Before python-calamine reads a workbook: what the file is, and whether it is safe and fit to read.

python-calamine is fast and evaluates nothing, but it trusts the package. It gives one slot to every cell of a
sheet's used rectangle, so a single value at XFD1048576 asks for about 550 GB and aborts the process; it reads
a formula that has no saved result, and an error value such as ``#DIV/0!``, as an empty cell; and it reports a
CSV file, an .xls or an encrypted workbook as "invalid Zip archive". So the reader first:

1. tells what the file is from its first bytes (zip package, OLE compound file, text) and names anything that is
   not an .xlsx workbook in words the user can act on;
2. applies the zip-bomb limits shared with the writer (:func:`zip_problem`), checked on the declared sizes, which
   both Python's zipfile and calamine's zip reader enforce while inflating;
3. refuses a DTD in any XML part calamine parses (an .xlsx never has one; calamine's XML reader does not expand
   entities either, it stops at the first unknown one, so this only makes the message clear), and limits the
   size of each of those parts;
4. scans each sheet the reader needs once, streaming, for the rectangle its value cells span (refused beyond
   :data:`MAX_SHEET_CELLS`) and for the cells calamine would read as empty although they are not (formulas
   without a saved result, error values); the reader reports those by cell when it needs their value.

The scan has a fast path over the raw bytes for packages written the usual way (every cell start tag
``<c r="A1" …>`` with its reference first), and parses the part with defusedxml's SAX reader otherwise.
"""

from __future__ import annotations

import functools
import html
import mmap
import posixpath
import re
import struct
import xml.etree.ElementTree as ET
import zipfile
import zlib
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import cast
from xml.sax import SAXException
from xml.sax.handler import ContentHandler

import defusedxml
import defusedxml.ElementTree as DET

from leakbudget.errors import WorkbookError
from leakbudget.xlsx.cells import column_index, column_letter
from leakbudget.xlsx.xml_text import BadXmlError, UnsafeXmlError, local_name, parse

# Zip-bomb guard, checked on the central directory before any entry is inflated (common practice; a workbook of
# a few thousand circuits is a few MB). Shared by the reader and the writer (leakbudget.xlsx.package).
MAX_ZIP_ENTRIES = 10_000
MAX_UNCOMPRESSED_BYTES = 1 << 30  # 1 GiB in total
MAX_COMPRESSION_RATIO = 200  # uncompressed / compressed, checked on entries above RATIO_CHECK_MIN_BYTES
RATIO_CHECK_MIN_BYTES = 1 << 20

# Read-side limits (design limits of leakbudget, sized from what calamine and the Python grid hold while a sheet
# is read: about 100 bytes per cell of the rectangle from A1, measured as 210 MB peak for 2 097 152 cells).
MAX_SHEET_CELLS = 16_000_000  # about 1.6 GB while read: a million load rows x 16 columns, near the row limit of .xlsx
MAX_SHEET_PART_BYTES = 512 << 20  # a sheet's XML: 1 000 000 formatted empty rows of 11 cells is about 300 MB
MAX_PART_BYTES = 256 << 20  # shared strings and styles, which calamine holds in memory
MAX_INDEX_PART_BYTES = 16 << 20  # xl/workbook.xml and its relationships, parsed here as a tree
MAX_IRREGULAR_SHEET_BYTES = 64 << 20  # sheets the fast scan cannot vouch for are parsed; about 10 s at this size
SCAN_CHUNK_BYTES = 4 << 20

# File signatures.
ZIP_SIGNATURES = (b"PK\x03\x04", b"PK\x05\x06")  # local file header, empty archive (PKWARE APPNOTE 4.3.7, 4.3.16)
CFB_SIGNATURE = bytes.fromhex("D0CF11E0A1B11AE1")  # OLE compound file header signature ([MS-CFB] 2.2)
# Stream names in a compound file's directory are UTF-16LE. An encrypted OOXML package is stored in the stream
# "EncryptedPackage" ([MS-OFFCRYPTO] 2.3.4.4); an Excel 97-2003 workbook in "Workbook" ([MS-XLS] 2.1.2), or
# "Book" for Excel 5.0/95 files.
ENCRYPTED_PACKAGE_STREAM = "EncryptedPackage".encode("utf-16-le")
XLS_STREAMS = tuple(name.encode("utf-16-le") for name in ("Workbook", "Book"))
ODS_MIMETYPE = b"application/vnd.oasis.opendocument.spreadsheet"  # the "mimetype" entry (ODF 1.2 Part 3, 3.3)

# The package's index parts (ECMA-376 Part 1 8.1 and Part 2 9.3).
WORKBOOK = "xl/workbook.xml"
WORKBOOK_RELS = "xl/_rels/workbook.xml.rels"

# What Python's zipfile raises for a damaged package or entry (bad headers, versions, CRCs, deflate data).
ZIP_DAMAGE = (
    zipfile.BadZipFile,
    zlib.error,
    struct.error,
    EOFError,
    ValueError,
    NotImplementedError,
    RuntimeError,
    OSError,
)

RESAVE = "open it in your spreadsheet program and save it as an Excel workbook (.xlsx)"


def zip_problem(infos: list[zipfile.ZipInfo]) -> str | None:
    """Why a package must not be opened (zip-bomb and sanity limits on the declared sizes), or None."""
    if len(infos) > MAX_ZIP_ENTRIES:
        return f"it has {len(infos)} zip entries (limit {MAX_ZIP_ENTRIES})"
    if sum(i.file_size for i in infos) > MAX_UNCOMPRESSED_BYTES:
        return f"it unpacks to more than {MAX_UNCOMPRESSED_BYTES >> 20} MiB"
    for info in infos:
        if info.file_size > RATIO_CHECK_MIN_BYTES and info.file_size > MAX_COMPRESSION_RATIO * max(
            info.compress_size, 1
        ):
            return f"entry {info.filename} is compressed more than {MAX_COMPRESSION_RATIO}:1 (a zip bomb?)"
        if info.flag_bits & 0x1:
            return f"entry {info.filename} is encrypted"
    if len({i.filename.casefold() for i in infos}) != len(infos):
        return "two zip entries share one part name"
    for info in infos:
        if unsafe_entry_name(info.filename):
            return f"entry {info.filename!r} has an absolute name or a '..' segment, which no workbook part has"
    return None


def unsafe_entry_name(name: str) -> bool:
    """A zip entry name no package part has: absolute (``/x``, ``\\x``, ``C:x``) or with a ``..`` segment
    (ECMA-376 Part 2 §6.2.2.2: part names are relative, with no ``.`` or ``..`` segments)."""
    if name.startswith(("/", "\\")) or (len(name) > 1 and name[1] == ":"):
        return True
    return any(segment == ".." for segment in name.replace("\\", "/").split("/"))


def decoded(part: str) -> str:
    """A relationship target's part name with its percent-encoding decoded (``sheet%201.xml`` → ``sheet 1.xml``;
    ECMA-376 Part 2 §6.2.2.1: part names are IRIs, stored percent-encoded in relationship targets)."""
    from urllib.parse import unquote

    return unquote(part) if "%" in part else part


def xml_part_error(path: Path, part: str, exc: Exception, suffix: str, noun: str) -> WorkbookError:
    """The error for an XML part of a package (``suffix`` .xlsx or .ods, ``noun`` workbook or spreadsheet) that
    declares a DTD or entities, or is damaged."""
    if isinstance(exc, UnsafeXmlError):
        return WorkbookError(
            f"its part {part} declares a DTD or entities, which an {suffix} never needs (it may be an "
            "entity-expansion attack), so it was not read",
            path=path,
            hint=f"re-save the {noun} in a spreadsheet program, or ask whoever sent it",
        )
    return WorkbookError(
        f"its part {part} is damaged ({exc})",
        path=path,
        hint=f"re-save the {noun} in a spreadsheet program and run again",
    )


def quoteattr_value(text: str) -> bytes:
    """``text`` escaped for a double-quoted XML attribute value, UTF-8."""
    return text.replace("&", "&amp;").replace("<", "&lt;").replace('"', "&quot;").encode("utf-8")


def _size(n_bytes: int) -> str:
    return f"{n_bytes / (1 << 20):,.0f} MiB" if n_bytes >= 1 << 20 else f"{n_bytes:,} bytes"


# --------------------------------------------------------------------------------------------- what the file is


def identify(path: Path, expected: str = "an .xlsx workbook", resave: str = RESAVE) -> None:
    """Raise :class:`WorkbookError` saying what ``path`` is when it is not a zip package (so not ``expected``:
    an .xlsx workbook, or an OpenDocument spreadsheet for :mod:`leakbudget.ods.guard`); ``resave`` is the hint."""
    with open(path, "rb") as handle:
        head = handle.read(4096)
    if not head:
        raise WorkbookError(
            "the file is empty (0 bytes)",
            path=path,
            hint="it was cut off while being copied or saved; use a copy saved by your spreadsheet program",
        )
    if head.startswith(ZIP_SIGNATURES):
        return
    if head.startswith(CFB_SIGNATURE):
        raise _compound_file_error(path, expected, resave)
    kind = _text_kind(head)
    if kind is not None:
        raise WorkbookError(f"this is a text file ({kind}), not {expected}", path=path, hint=resave)
    raise WorkbookError(f"this is not {expected} (it does not start like a zip package)", path=path, hint=resave)


def _compound_file_error(path: Path, expected: str, resave: str) -> WorkbookError:
    with open(path, "rb") as handle, mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ) as data:
        if data.find(ENCRYPTED_PACKAGE_STREAM) >= 0:
            return WorkbookError(
                "the workbook is password-protected (encrypted), so its cells cannot be read",
                path=path,
                hint="open it in your spreadsheet program, remove the password or save an unprotected copy as "
                ".xlsx, and check that copy",
            )
        if any(data.find(name) >= 0 for name in XLS_STREAMS):
            return WorkbookError(
                f"this is an Excel 97-2003 workbook (.xls), not {expected}",
                path=path,
                hint=resave + " (it will ask for the password if the file has one)",
            )
    return WorkbookError(f"this is an older Office compound file, not {expected}", path=path, hint=resave)


def _text_kind(head: bytes) -> str | None:
    """A short description when ``head`` looks like text (UTF-8, UTF-16 with a byte-order mark), else None."""
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        text = head[2:].decode("utf-16-le" if head[0] == 0xFF else "utf-16-be", errors="replace")
    elif b"\0" in head:
        return None
    else:
        try:
            text = head.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            if exc.start < len(head) - 4:  # not just a character cut by the 4 KiB window
                return None
            text = head[: exc.start].decode("utf-8-sig")
    first = text.lstrip().split("\n", 1)[0]
    if first.startswith("<"):
        return "XML or HTML"
    if "\t" in first:
        return "tab-separated values"
    if "," in first or ";" in first:
        return "comma-separated values, CSV"
    return "plain text"


# --------------------------------------------------------------------------------------------- the package


@dataclass(frozen=True)
class CellNote:
    """A cell calamine reads as empty although it is not: a formula with no saved result, or an error value."""

    row: int  # 0-based
    column: int  # 0-based
    error: str | None  # the error value shown ("#DIV/0!"), or None for a formula with no saved result
    formula: str | None  # the formula text, when the cell has one


@dataclass
class SheetScan:
    """What one sheet part holds, as far as the reader needs to know before calamine reads it."""

    rows: int = 0  # 1 + the largest 0-based row of a cell with content (0 for an empty sheet)
    columns: int = 0  # 1 + the largest 0-based column of a cell with content
    notes: dict[tuple[int, int], CellNote] = field(default_factory=dict)  # (row, column) -> note
    # merged ranges ((first row, first column), (last row, last column)), 0-based, where the reader must find them
    # itself (calamine lists none for an .ods); empty for an .xlsx, whose merges calamine reports
    merged: list[tuple[tuple[int, int], tuple[int, int]]] = field(default_factory=list)

    @property
    def cells(self) -> int:
        """Cells of the grid calamine builds from A1 to the last row and column [count]."""
        return self.rows * self.columns


class GuardedPackage:
    """A workbook package that passed :func:`identify`, the zip limits and the checks of its index parts."""

    def __init__(self, path: Path) -> None:
        self.path = path
        identify(path)
        try:
            self.archive = zipfile.ZipFile(path)
            self.infos = self.archive.infolist()
        except ZIP_DAMAGE as exc:
            raise WorkbookError(
                f"the file is cut short or damaged (its zip package cannot be opened: {exc})",
                path=path,
                hint="use a copy saved by your spreadsheet program, or a backup",
            ) from None
        problem = zip_problem(self.infos)
        if problem is not None:
            self.close()
            raise WorkbookError(
                f"refused to open the workbook because {problem}",
                path=path,
                hint="check it is the workbook you meant and re-save it in a spreadsheet program",
            )
        self._names = {info.filename.casefold(): info for info in self.infos}
        self.encoded_targets = False  # a worksheet is reached through a percent-encoded relationship target
        try:
            with self._damage():
                self._check_kind()
                self.sheet_parts = self._sheet_parts()
                for part in ("xl/sharedStrings.xml", "xl/styles.xml"):
                    if part.casefold() in self._names:
                        self._check_prolog(part, MAX_PART_BYTES)
        except BaseException:
            self.close()
            raise

    @contextmanager
    def _damage(self, sheet: str | None = None) -> Iterator[None]:
        """Turn the zip reader's complaints about a damaged entry into one sentence for the user."""
        try:
            yield
        except ZIP_DAMAGE as exc:
            raise WorkbookError(
                f"the file is damaged ({type(exc).__name__}: {str(exc)[:160]})",
                path=self.path,
                sheet=sheet,
                hint="use a copy saved by your spreadsheet program, or a backup",
            ) from None

    def close(self) -> None:
        self.archive.close()

    def _check_kind(self) -> None:
        if "mimetype" in self._names and self.archive.read(self._names["mimetype"]).strip() == ODS_MIMETYPE:
            raise WorkbookError(
                "this is an OpenDocument spreadsheet (.ods), not an .xlsx workbook",
                path=self.path,
                hint="rename it to end in .ods, which leakbudget reads as an OpenDocument spreadsheet",
            )
        if "xl/workbook.bin" in self._names:
            raise WorkbookError(
                "this is an Excel binary workbook (.xlsb), not an .xlsx workbook", path=self.path, hint=RESAVE
            )
        if WORKBOOK.casefold() not in self._names:
            raise WorkbookError(
                f"this zip file is not an .xlsx workbook (it has no {WORKBOOK})", path=self.path, hint=RESAVE
            )

    def _info(self, part: str, limit: int) -> zipfile.ZipInfo:
        info = self._names[part.casefold()]
        if info.file_size > limit:
            raise WorkbookError(
                f"refused to read the workbook because its part {info.filename} unpacks to "
                f"{_size(info.file_size)} (limit {_size(limit)})",
                path=self.path,
                hint="check it is the workbook you meant; delete what you do not need and save it again",
            )
        return info

    def _xml_error(self, part: str, exc: Exception) -> WorkbookError:
        return xml_part_error(self.path, part, exc, ".xlsx", "workbook")

    def _read_xml(self, part: str) -> ET.Element:
        try:
            return parse(self.archive.read(self._info(part, MAX_INDEX_PART_BYTES)))
        except (UnsafeXmlError, BadXmlError) as exc:
            raise self._xml_error(part, exc) from None

    def _check_prolog(self, part: str, limit: int) -> None:
        """Refuse a DTD before the root element (the only place XML allows one); read no further."""
        try:
            with self.archive.open(self._info(part, limit)) as stream:
                for _ in DET.iterparse(stream, events=("start",), forbid_dtd=True):
                    break
        except defusedxml.DefusedXmlException as exc:
            raise self._xml_error(part, UnsafeXmlError(type(exc).__name__)) from None
        except ET.ParseError as exc:
            raise self._xml_error(part, BadXmlError(str(exc))) from None

    def _sheet_parts(self) -> dict[str, str]:
        """Sheet name as typed -> its part name (ECMA-376 Part 2 9.3: targets resolve against ``xl/``)."""
        workbook = self._read_xml(WORKBOOK)
        targets: dict[str, str] = {}
        if WORKBOOK_RELS.casefold() in self._names:
            for rel in self._read_xml(WORKBOOK_RELS):
                if local_name(rel.tag) == "Relationship" and rel.get("TargetMode") != "External":
                    target = rel.get("Target", "")
                    joined = target.lstrip("/") if target.startswith("/") else posixpath.join("xl", target)
                    targets[rel.get("Id", "")] = posixpath.normpath(joined)
        parts: dict[str, str] = {}
        for sheet in workbook.iter():
            if local_name(sheet.tag) != "sheet":
                continue  # matched by local name: transitional and strict ECMA-376 namespaces alike
            rel_id = next((v for k, v in sheet.attrib.items() if k.endswith("}id") and "relationships" in k), "")
            part = targets.get(rel_id)
            if part is not None and part.casefold() not in self._names and decoded(part).casefold() in self._names:
                part = decoded(part)
                self.encoded_targets = True
            if part is not None and part.casefold() in self._names:
                parts[sheet.get("name", "")] = self._names[part.casefold()].filename
        return parts

    def decoded_copy(self) -> bytes:
        """The package with its workbook relationships' percent-encoded targets written decoded, for a reader that
        looks parts up by the literal target (python-calamine): every other entry copied as it is."""
        import io
        import re

        buffer = io.BytesIO()
        rels = self._names[WORKBOOK_RELS.casefold()].filename if WORKBOOK_RELS.casefold() in self._names else None
        with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as out:
            for info in self.infos:
                data = self.archive.read(info)
                if info.filename == rels:
                    data = re.sub(
                        rb'Target="([^"]*%[^"]*)"',
                        lambda m: b'Target="%s"' % quoteattr_value(decoded(m.group(1).decode("utf-8"))),
                        data,
                    )
                entry = zipfile.ZipInfo(info.filename, info.date_time)  # writestr changes the ZipInfo it is given
                entry.compress_type, entry.external_attr = info.compress_type, info.external_attr
                out.writestr(entry, data)
        return buffer.getvalue()

    def scan_sheet(self, name: str) -> SheetScan:
        """Check the part of sheet ``name`` (size, DTD, cell rectangle) and return what calamine would miss."""
        part = self.sheet_parts.get(name)
        if part is None:
            raise WorkbookError(
                f"the part that holds sheet '{name}' cannot be found in the package",
                path=self.path,
                sheet=name,
                hint="re-save the workbook in a spreadsheet program and run again",
            )
        info = self._info(part, MAX_SHEET_PART_BYTES)
        try:
            with self._damage(name):
                scan = self._scan(name, info)
        except (UnsafeXmlError, BadXmlError) as exc:
            raise self._xml_error(part, exc) from None
        if scan.cells > MAX_SHEET_CELLS:
            raise WorkbookError(
                f"its cells reach row {scan.rows:,} and column {column_letter(scan.columns - 1)}, more than the "
                f"{MAX_SHEET_CELLS:,} cells leakbudget reads",
                path=self.path,
                sheet=name,
                hint="delete stray values far below or right of the table (Ctrl+End shows the last cell) and "
                "save again",
            )
        return scan

    def _scan(self, name: str, info: zipfile.ZipInfo) -> SheetScan:
        """The fast scan, or the parsed one when the fast scan cannot vouch for the part."""
        scan = _fast_scan(self.archive, info, MAX_SHEET_CELLS)
        if scan is not None:
            return scan
        if info.file_size > MAX_IRREGULAR_SHEET_BYTES:
            raise WorkbookError(
                f"the sheet is written in an unusual way and is too large to check ({_size(info.file_size)})",
                path=self.path,
                sheet=name,
                hint="re-save the workbook in a spreadsheet program and run again",
            )
        return _parsed_scan(self.archive, info, MAX_SHEET_CELLS)


# --------------------------------------------------------------------------------------------- sheet scans

_PREFIX = rb"(?:[A-Za-z_][\w.-]*:)?"
# one space before it, double quotes (possessive, and \w spelt out: fast)
_ATTRIBUTE = rb' [A-Za-z_][A-Za-z0-9_:.-]*+="[^"<>]*+"'
_REF = rb'([A-Z]{1,3})([1-9][0-9]{0,6})"'  # after 'c r="': the reference of a strict start tag
_OPEN_TAIL = rb"(?:(?! r=)" + _ATTRIBUTE + rb")*+ ?>"  # its other attributes (no second r) and its end


class _CellPatterns:
    """The fast scan's patterns, for unprefixed cell tags (``<c …>``) or prefixed ones too (``<x:c …>``)."""

    def __init__(self, prefix: bytes) -> None:
        self.any = re.compile(rb"<" + prefix + rb"c[\s/>]")
        # a cell start tag that may have children: its reference first, no second r attribute
        self.open = re.compile(rb"<" + prefix + rb'c r="' + _REF + _OPEN_TAIL)
        self.empty = re.compile(rb"<" + prefix + rb"c(?:" + _ATTRIBUTE + rb")*+ ?/>")
        self.odd = re.compile(rb"<" + prefix + rb'c(?=[\s/>])(?! r="' + _REF + _OPEN_TAIL + rb")")  # not open
        formula = rb"<" + prefix + rb"f(?:\s[^<>]*)?(?:/>|>([^<]*)</" + prefix + rb"f>)"
        value = rb"(<" + prefix + rb"v\s*/>|<" + prefix + rb"v>([^<]*)</" + prefix + rb"v>)?"
        self.formula_cell = re.compile(
            rb"<" + prefix + rb'c r="([A-Z]{1,3})([0-9]{1,7})"([^<>]*)>\s*' + formula + rb"\s*" + value
        )
        self.error_cell = re.compile(
            rb"<" + prefix + rb'c r="([A-Z]{1,3})([0-9]{1,7})"[^<>]*\st="e"[^<>]*>\s*<' + prefix + rb"v>([^<]*)<"
        )


_PLAIN = _CellPatterns(b"")
_PREFIXED = _CellPatterns(_PREFIX)
_TYPE = re.compile(rb'\st="([a-zA-Z]+)"')
# Cell types whose saved value may be empty text; a number, boolean or error with an empty <v/> has no saved
# result (openpyxl writes formulas so). ECMA-376 Part 1 18.18.11 ST_CellType.
_TEXT_TYPES = (b"str", b"s", b"inlineStr")


def _fast_scan(archive: zipfile.ZipFile, info: zipfile.ZipInfo, max_cells: int) -> SheetScan | None:
    """Scan the part's bytes in chunks cut at tag boundaries; None when a cell tag is not in the usual form.

    Safe because every cell element starts with ``<c`` or ``<prefix:c`` (XML allows ``<`` nowhere else but in
    comments and CDATA, which can only add look-alikes): if every such start tag is either a strict
    ``<c r="REF" …>`` or a strict empty-element tag, the strict ones give every cell that can hold a value, with
    its position. Anything else (a cell without its reference first, single quotes, character references) makes
    the caller parse the part instead. Stops early once the rectangle exceeds ``max_cells``.
    """
    scan = SheetScan()
    with archive.open(info) as stream:
        carry = b""
        first = True
        while True:
            block = stream.read(SCAN_CHUNK_BYTES)
            data = carry + block
            if block:
                end = _chunk_end(data)
                data, carry = data[:end], data[end:]
            if first:
                _refuse_doctype(data)
                first = False
            if not _scan_chunk(data, scan):
                return None
            if not block or scan.cells > max_cells:
                return scan


def _chunk_end(data: bytes) -> int:
    """Where to cut ``data`` so that the head holds whole rows when it can, and whole tags always."""
    cut = data.rfind(b"row>")
    if cut > 0 and data[cut - 1 : cut] in (b"/", b":"):
        return cut + 4
    cut = data.rfind(b"<")
    return cut if cut > 0 else len(data)


def _refuse_doctype(head: bytes) -> None:
    root = re.search(rb"<[^?!]", head)
    if b"<!DOCTYPE" in head[: root.start() if root else len(head)]:
        raise UnsafeXmlError("DTDForbidden")


def _scan_chunk(data: bytes, scan: SheetScan) -> bool:
    """Add one chunk's rectangle and notes to ``scan``; False when a cell tag is in neither strict form.

    An unprefixed chunk is checked by one search for a tag in neither form, and its rectangle grown by a search
    for the cells beyond it (:func:`_grow_rectangle`): no list of its cells is made. A prefixed chunk, or one
    whose cells are far out of order, has its cell tags listed."""
    patterns = _PREFIXED if b":c" in data else _PLAIN
    # most cells of a formatted but empty area are empty-element tags; without a "/>" the chunk has none
    rest = patterns.empty.sub(b"", data) if b"/>" in data else data
    listed = patterns is _PREFIXED
    if not listed:
        if _PLAIN.odd.search(rest) is not None:  # a cell tag in neither strict form
            return False
        listed = not _grow_rectangle(rest, scan)
    if listed:
        opened = patterns.open.findall(rest)
        if len(patterns.any.findall(rest)) != len(opened):  # a cell tag in neither strict form
            return False
        if opened:
            scan.rows = max(scan.rows, max(int(row) for _, row in opened))
            scan.columns = max(scan.columns, 1 + max(column_index(c.decode()) for c in {c for c, _ in opened}))
    _scan_notes(rest, patterns, scan)
    return True


def _scan_notes(rest: bytes, patterns: _CellPatterns, scan: SheetScan) -> None:
    """Note the formulas without a saved result and the error values in ``rest`` (a chunk without its strict
    empty-element cell tags). A formula element starts with ``<f`` or ``<prefix:f``; an error cell has ``t="e"``."""
    if b"<f" in rest or (patterns is _PREFIXED and b":f" in rest):
        for col, row, attrs, formula, value_tag, value in patterns.formula_cell.findall(rest):
            cell_type = _TYPE.search(attrs)
            kind = cell_type.group(1) if cell_type else b"n"
            if kind == b"e":
                _note(scan, col, row, formula, value)
            elif not value_tag or (not value and kind not in _TEXT_TYPES):
                _note(scan, col, row, formula, None)
    if b't="e"' in rest:
        for col, row, value in patterns.error_cell.findall(rest):
            _note(scan, col, row, None, value)


MAX_BEYOND_CELLS = 64  # cells found beyond a chunk's guessed rectangle before its cells are listed instead


def _grow_rectangle(rest: bytes, scan: SheetScan) -> bool:
    """Grow ``scan``'s rectangle to the cells of ``rest`` (an unprefixed chunk without its empty-element cell
    tags, every cell tag in it a strict start tag) without listing them: guess the rectangle from the chunk's
    last cell and its first row's last cell, then search for a cell beyond the guess and grow the guess by each
    one found. False (``scan`` unchanged) after :data:`MAX_BEYOND_CELLS` of them (the cells are far out of
    order), and the caller lists the cells instead."""
    bounds = (scan.rows, scan.columns)
    for start in (rest.rfind(b'<c r="'), rest.rfind(b'<c r="', 0, max(rest.find(b"</row>"), 0))):
        bounds = _with_cell(rest, start, bounds)
    at = 0
    for _ in range(MAX_BEYOND_CELLS):
        found = _beyond(*bounds).search(rest, at)
        if found is None:
            scan.rows, scan.columns = bounds
            return True
        at = found.start()
        bounds = _with_cell(rest, at, bounds)
        at += 1
    return False


def _with_cell(rest: bytes, start: int, bounds: tuple[int, int]) -> tuple[int, int]:
    """``bounds`` (rows, columns) grown to the strict cell start tag at ``start`` (none when ``start`` is -1)."""
    cell = _PLAIN.open.match(rest, start) if start >= 0 else None
    if cell is None:
        return bounds
    return max(bounds[0], int(cell.group(2))), max(bounds[1], 1 + column_index(cell.group(1).decode()))


@functools.lru_cache(maxsize=256)
def _beyond(rows: int, columns: int) -> re.Pattern[bytes]:
    """The start of a cell start tag whose reference lies below row ``rows`` or right of the first ``columns``
    columns."""
    letters = _greater(column_letter(columns - 1) if columns else "", "[A-Z]", "Z", "[A-Z]")
    digits = _greater(str(rows) if rows else "", "[1-9]", "9", "[0-9]")
    return re.compile(rb'<c r="(?:' + letters + rb"[0-9]|[A-Z]{1,3}" + digits + rb'")')


def _greater(text: str, lead: str, high: str, each: str) -> bytes:
    """A pattern for the words greater than ``text`` in the order of cell references (longer is greater, then
    letter by letter): column letters, and row numbers, which have no leading zero. ``each`` is the class of any
    character (``high`` the last), ``lead`` of a longer word's first one."""
    words = [f"{lead}{each}{{{len(text)},}}"]
    for i, char in enumerate(text):
        if char < high:
            after = chr(ord(char) + 1)
            words.append(f"{text[:i]}[{after}-{high}]{each}{{{len(text) - i - 1}}}")
    return ("(?:" + "|".join(words) + ")").encode()


def _note(scan: SheetScan, col: bytes, row: bytes, formula: bytes | None, error: bytes | None) -> None:
    key = (int(row) - 1, column_index(col.decode()))
    old = scan.notes.get(key)
    text = html.unescape(formula.decode("utf-8", "replace")) if formula else None  # XML's entities and char refs
    shown = html.unescape(error.decode("utf-8", "replace")) if error else None
    scan.notes[key] = CellNote(*key, shown or (old.error if old else None), text or (old.formula if old else None))


class _LimitReached(Exception):
    pass


class _CellHandler(ContentHandler):
    """SAX handler for the careful scan: cell positions as calamine finds them (explicit or counted)."""

    def __init__(self, scan: SheetScan, max_cells: int) -> None:
        super().__init__()
        self.scan = scan
        self.max_cells = max_cells
        self.row = -1
        self.column = -1
        self.in_cell = False
        self.at = (0, 0)  # (row, column) of the current cell, as calamine places it
        self.cell: dict[str, object] = {}
        self.text: list[str] | None = None

    def startElement(self, name: str, attrs) -> None:  # noqa: ANN001, N802 (SAX API)
        local = local_name(name)
        if local == "row" and not self.in_cell:
            ref = _attr(attrs, "r")
            self.row = int(ref) - 1 if ref and ref.isdigit() else self.row + 1
            self.column = -1
        elif local == "c" and not self.in_cell:
            ref = _attr(attrs, "r")
            match = re.fullmatch(r"([A-Z]{1,7})([0-9]{1,12})", ref or "")
            self.column += 1  # counted on from the previous cell
            self.at = (self.row, self.column)
            if match:  # the position as written; the extent counts the larger of the two, to be safe
                self.at = (int(match.group(2)) - 1, column_index(match.group(1)))
                self.column = max(self.at[1], self.column)
                self.row = max(self.at[0], self.row)
            self.in_cell = True
            self.cell = {"t": _attr(attrs, "t"), "children": False, "f": None, "v": None}
        elif self.in_cell:
            self.cell["children"] = True
            if local in ("f", "v"):
                self.cell[local] = ""
                self.text = []

    def characters(self, content: str) -> None:
        if self.text is not None:
            self.text.append(content)

    def endElement(self, name: str) -> None:  # noqa: N802 (SAX API)
        local = local_name(name)
        if self.in_cell and local in ("f", "v") and self.text is not None:
            self.cell[local] = "".join(self.text)
            self.text = None
        elif local == "c" and self.in_cell:
            self.in_cell = False
            if self.cell["children"]:
                self.scan.rows = max(self.scan.rows, self.row + 1)
                self.scan.columns = max(self.scan.columns, self.column + 1)
                if self.scan.cells > self.max_cells:
                    raise _LimitReached
            kind = self.cell["t"] or "n"
            error = kind == "e" and self.cell["v"] is not None
            no_result = not self.cell["v"] and kind not in ("str", "s", "inlineStr")
            if error or (self.cell["f"] is not None and (self.cell["v"] is None or no_result)):
                formula = cast("str | None", self.cell["f"])  # "f" and "v" hold text or None, "children" a bool
                self.scan.notes[self.at] = CellNote(*self.at, str(self.cell["v"]) if error else None, formula or None)


def _attr(attrs, name: str) -> str | None:  # noqa: ANN001
    """Attribute ``name`` of a SAX element, prefixed or not (the reader may not check prefixes)."""
    for key in attrs.getNames():
        if local_name(key) == name:
            return attrs.getValue(key)
    return None


def _parsed_scan(archive: zipfile.ZipFile, info: zipfile.ZipInfo, max_cells: int) -> SheetScan:
    """The careful scan: the part parsed by defusedxml's SAX reader (no DTD, no entities), streaming; stops
    once the rectangle exceeds ``max_cells``."""
    scan = SheetScan()
    try:
        with archive.open(info) as stream:
            import defusedxml.sax  # only for sheets the fast scan cannot vouch for (it imports urllib: 30-40 ms)

            defusedxml.sax.parse(stream, _CellHandler(scan, max_cells), forbid_dtd=True)
    except _LimitReached:
        pass
    except defusedxml.DefusedXmlException as exc:
        raise UnsafeXmlError(type(exc).__name__) from None
    except SAXException as exc:
        raise BadXmlError(str(exc)) from None
    return scan
