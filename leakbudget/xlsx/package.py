"""Write result sheets into a user's .xlsx without re-saving the workbook through a library.

The new sheets' frames (header, formats, widths, frozen pane, chart) are written with XlsxWriter into a scratch
package; their worksheet parts (and, for a chart, the drawing and chart parts, renamed so they cannot collide with
the user's) are grafted into the user's package, the rows generated into each sheet part as it is deflated by
zlib-ng (:mod:`leakbudget.xlsx.rows`, fifteen times faster than XlsxWriter's cell-by-cell calls;
:mod:`leakbudget.xlsx.zipped`).
Only what registering them needs is edited, by byte splices (:mod:`leakbudget.xlsx.xml_text`): ``xl/workbook.xml``
(a ``<sheet>`` entry), ``xl/_rels/workbook.xml.rels``, ``[Content_Types].xml`` and additive entries in
``xl/styles.xml`` (:mod:`leakbudget.xlsx.styles`). Every other part is copied with the same decompressed bytes in
the same entry order, so formulas, comments, charts, images and extensions we do not understand survive untouched;
a stored or deflated part is copied compressed as it is, after its CRC-32 has been checked (:func:`_copy_entry`).
Package structure follows ECMA-376 Part 2 (Open Packaging Conventions): part names compare case-insensitively
and relationship targets resolve against the source part's folder.

A sheet whose name already exists (from a previous run) is replaced in place: same ``<sheet>`` entry, position and
relationship id, so ``localSheetId`` indices of defined names keep pointing at the same sheets.

The file itself is replaced by :mod:`leakbudget.xlsx.files` (atomic rename, backup of the previous version).
"""

from __future__ import annotations

import posixpath
import re
import shutil
import struct
import time
import zipfile
import zlib
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from io import BytesIO
from pathlib import Path
from typing import IO
from urllib.parse import unquote

from leakbudget.errors import WriteBackError
from leakbudget.progress import Progress
from leakbudget.xlsx.files import COPY_CHUNK_BYTES, rewrite

# The zip-bomb limits are shared with the reader; Python's zipfile never inflates an entry past its declared size.
from leakbudget.xlsx.guard import (  # noqa: F401 (the limits are part of this module's documented API)
    MAX_COMPRESSION_RATIO,
    MAX_UNCOMPRESSED_BYTES,
    MAX_ZIP_ENTRIES,
    decoded,
    zip_problem,
)
from leakbudget.xlsx.rows import QUOTE_ROW, SAMPLE_ROW, SheetXml, rows_width, with_rows
from leakbudget.xlsx.styles import merge_styles, remap_cell_styles
from leakbudget.xlsx.xml_text import BadXmlError, Span, UnsafeXmlError, XmlPart, local_name, parse, quoteattr
from leakbudget.xlsx.zipped import append_compressed, can_append, write_deflated

# zipfile must know before streaming an entry whether it may pass 2 GiB (ZIP64); a sheet of more rows than this
# could, at 10 KB a row, so it gets ZIP64 sizes (APPNOTE.TXT 4.5.3; Excel, LibreOffice and calamine read them).
ZIP64_ROWS = 200_000

OUR_PART_PREFIX = "leakbudget_"  # parts we add are named xl/<folder>/leakbudget_<kind><n>.xml

# Namespaces, relationship and content types of ECMA-376 Parts 1 and 2 (transitional conformance).
MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
DOC_REL_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
REL_TYPE_WORKSHEET = DOC_REL_NS + "/worksheet"
REL_TYPE_STYLES = DOC_REL_NS + "/styles"
# Parts of these kinds hang off a result sheet only to show its chart; they go when the sheet is replaced, even
# after a spreadsheet program re-saved the file under its own part names.
REMOVABLE_REL_TYPES = frozenset(
    {
        DOC_REL_NS + "/drawing",
        DOC_REL_NS + "/chart",
        "http://schemas.microsoft.com/office/2011/relationships/chartStyle",
        "http://schemas.microsoft.com/office/2011/relationships/chartColorStyle",
    }
)
CT_RELATIONSHIPS = "application/vnd.openxmlformats-package.relationships+xml"
CONTENT_TYPES = "[Content_Types].xml"
WORKBOOK = "xl/workbook.xml"
WORKBOOK_RELS = "xl/_rels/workbook.xml.rels"

_FORMULA = re.compile(rb"<(?:[A-Za-z_][\w.-]*:)?f[\s/>]")


@dataclass(frozen=True)
class ChartSpec:
    """A native clustered column (vertical bar) chart of some columns of a sheet, placed on that sheet."""

    title: str
    category_column: int  # 0-based column of the categories (e.g. circuit ids)
    value_columns: tuple[int, ...]  # 0-based columns plotted as series (e.g. leakage_ma, budget_ma)
    y_axis_title: str = "mA"
    anchor: str = "B2"  # top-left cell of the chart
    data_rows: int | None = None  # how many rows below the header to plot (default: all rows of the sheet)
    width_px: int = 720
    height_px: int = 360
    colours: tuple[str, ...] = ()  # "#rrggbb" fill of each series in turn; empty = the spreadsheet's own palette


@dataclass(frozen=True)
class SheetData:
    """One result sheet: a bold, frozen header row, then the rows; numbers keep the units their header names."""

    name: str
    header: Sequence[str]
    rows: Sequence[Sequence[str | float | int | bool | None]]
    number_formats: Mapping[int, str] = field(default_factory=dict)  # column -> Excel format code, e.g. "0.000"
    column_widths: Mapping[int, float] = field(default_factory=dict)  # column -> width in characters
    chart: ChartSpec | None = None


@dataclass(frozen=True)
class WriteResult:
    path: Path  # the file written
    backup: Path | None  # where the previous version was kept (None with out=)
    replaced: tuple[str, ...]  # sheet names replaced in place (as named in the file)
    added: tuple[str, ...]  # sheet names appended


def write_sheets(
    source: Path,
    sheets: Sequence[SheetData],
    out: Path | None = None,
    progress: Progress | None = None,
    force: bool = False,
) -> WriteResult:
    """Write ``sheets`` into the workbook ``source`` (or into a copy at ``out``), keeping everything else.

    Text is always written as text (a cell reading ``=1+2`` is not a formula); None and NaN give empty cells;
    ±inf and numbers beyond ``EXCEL_MAX_NUMBER`` are written as text (``inf``, ``-inf``, ``1.5e+308``).
    With ``out=None`` the file is replaced atomically and its previous version kept as
    ``<stem>.before-leakbudget<suffix>`` (the first time; later ones numbered, see
    :func:`leakbudget.xlsx.files.next_backup_path`); with ``out`` the source is only read, and an existing ``out``
    is replaced only with ``force``. A symbolic link is followed.

    Raises :class:`WriteBackError` (nothing changed) when the destination is open in a spreadsheet program, the
    source is not a readable .xlsx package, it exceeds the zip limits above, an XML part it needs declares a DTD
    or entities, or the folder cannot be written. ``progress`` hears of the rows written, sheet by sheet.
    """
    keys = [sheet.name.casefold() for sheet in sheets]
    if len(set(keys)) != len(keys):
        raise ValueError(f"sheet names must differ (ignoring case): {[s.name for s in sheets]}")
    source = Path(source)

    def build(original: IO[bytes], dest: IO[bytes]) -> tuple[tuple[str, ...], tuple[str, ...]]:
        try:
            package = zipfile.ZipFile(original)
        except (zipfile.BadZipFile, OSError, ValueError) as exc:
            raise WriteBackError(
                f"{source.name}: not an .xlsx workbook ({exc}); save it as an Excel .xlsx workbook (a password-"
                "protected file must be saved without its password) and run again."
            ) from None
        with package:  # closing the ZipFile leaves ``original`` open
            return _graft(package, sheets, dest, source, progress)

    written = rewrite(source, Path(out) if out is not None else None, build, force)
    replaced, added = written.value
    return WriteResult(written.path, written.backup, replaced, added)


# --------------------------------------------------------------------------------------------- the package graft


@dataclass(frozen=True)
class _Rel:
    id: str
    type: str
    target: str | None  # resolved part name, None for an external target


class _Package:
    """Read access to one zip package: guarded entry list, case-insensitive part names, relationships."""

    def __init__(self, archive: zipfile.ZipFile, path: Path) -> None:
        self.archive, self.path = archive, path
        self.infos = _guarded_entries(archive, path)
        self._names = {info.filename.casefold(): info.filename for info in self.infos}

    def actual(self, name: str) -> str | None:
        """The entry's name as stored, for a part name (case-insensitive; a percent-encoded target decoded)."""
        found = self._names.get(name.casefold())
        return found if found is not None or "%" not in name else self._names.get(decoded(name).casefold())

    def read(self, name: str) -> bytes:
        actual = self.actual(name)
        if actual is None:
            raise KeyError(name)
        return self.archive.read(actual)

    def xml(self, name: str, max_depth: int = 2) -> XmlPart:
        try:
            return XmlPart(self.read(name), max_depth)
        except UnsafeXmlError:
            raise WriteBackError(
                f"{self.path.name}: part {name} declares a DTD or entities, which an .xlsx never needs (it may be "
                "an entity-expansion attack); nothing was written; re-save the workbook in a spreadsheet program."
            ) from None
        except BadXmlError as exc:
            raise WriteBackError(
                f"{self.path.name}: part {name} is not well-formed UTF-8 XML ({exc}); nothing was written; "
                "re-save the workbook in a spreadsheet program and run again."
            ) from None

    def rels(self, part: str) -> tuple[XmlPart | None, list[tuple[_Rel, Span]]]:
        """The relationships part of ``part`` (None if absent) and its relationships with their spans."""
        rels_name = _rels_name(part)
        if self.actual(rels_name) is None:
            return None, []
        xml = self.xml(rels_name, 1)
        return xml, [(_relationship(part, span.attrs), span) for span in xml.find("Relationship", 1)]


def _graft(
    archive: zipfile.ZipFile, sheets: Sequence[SheetData], dest: IO[bytes], path: Path, progress: Progress | None
) -> tuple:
    """Write to ``dest`` the user's package with ``sheets`` grafted in; return (replaced, added) names."""
    try:
        return _graft_checked(archive, sheets, dest, path, progress)
    except (zipfile.BadZipFile, zlib.error, EOFError, NotImplementedError, RuntimeError) as exc:
        raise WriteBackError(
            f"{path.name}: the workbook's zip package is damaged or uses an unsupported feature ({exc}); "
            "re-save it in a spreadsheet program and run again."
        ) from None


def _graft_checked(
    archive: zipfile.ZipFile, sheets: Sequence[SheetData], dest: IO[bytes], path: Path, progress: Progress | None
) -> tuple:
    user = _Package(archive, path)
    for required in (CONTENT_TYPES, WORKBOOK, WORKBOOK_RELS):
        if user.actual(required) is None:
            raise WriteBackError(
                f"{path.name}: not an .xlsx workbook (it has no {required}); save it as an Excel .xlsx workbook "
                "and run again."
            )
    graft = _Graft(user, _Package(zipfile.ZipFile(BytesIO(_render(sheets))), Path("scratch.xlsx")))
    destinations = [graft.make_room(sheet.name, sheet.header) for sheet in sheets]
    graft.merge_styles()
    # the scratch package's first sheet is the placeholder that holds the tab selection
    for sheet, scratch_part, destination in zip(sheets, _worksheet_parts(graft.scratch)[1:], destinations):
        graft.add_sheet(sheet, scratch_part, destination)
    graft.register()
    _write_package(user, dest, graft.writes, graft.removed, progress)
    return tuple(graft.replaced), tuple(graft.added)


class _Graft:
    """The edits that graft the scratch package's sheets into the user's package, collected before writing."""

    def __init__(self, user: _Package, scratch: _Package) -> None:
        self.user, self.scratch = user, scratch
        self.content_types = user.xml(CONTENT_TYPES, 1)
        self.workbook = user.xml(WORKBOOK, 2)
        sheets_span = next(iter(self.workbook.find("sheets", 1)), None)
        if self.workbook.root.tag != f"{{{MAIN_NS}}}workbook" or sheets_span is None:
            raise WriteBackError(
                f"{user.path.name}: the workbook part is of a kind leakbudget does not edit "
                f"({self.workbook.root.tag}); save it as a regular Excel .xlsx workbook (not 'Strict Open XML') "
                "and run again."
            )
        self.sheets_span = sheets_span
        workbook_rels, self.rel_list = user.rels(WORKBOOK)
        assert workbook_rels is not None  # its presence was checked
        self.workbook_rels = workbook_rels
        rels_by_id = {rel.id: rel for rel, _ in self.rel_list}
        self.existing: dict[str, tuple[str, _Rel]] = {}  # casefolded sheet name -> (name in file, relationship)
        for element in self.workbook.root.iter(f"{{{MAIN_NS}}}sheet"):
            rel = rels_by_id.get(element.get(f"{{{DOC_REL_NS}}}id", ""))
            if rel is not None:
                self.existing[element.get("name", "").casefold()] = (element.get("name", ""), rel)
        self.graph = _reference_graph(user)
        self.removed: set[str] = set()  # actual part names
        self.writes: dict[str, bytes | SheetXml] = {}  # part name -> new content (a sheet's rows made on writing)
        self.content_type_of: dict[str, str] = {}  # parts we write -> content type
        self.new_rels: list[tuple[str, str]] = []  # (type, part) to add to the workbook's relationships
        self.new_sheets: list[str] = []  # their names, in the order of the worksheet relationships
        self.xf_map: dict[int, int] | None = None
        self.replaced: list[str] = []
        self.added: list[str] = []

    @property
    def taken(self) -> set[str]:
        """Casefolded part names that a new part must not use."""
        kept = {info.filename.casefold() for info in self.user.infos if info.filename not in self.removed}
        return kept | {name.casefold() for name in self.writes}

    def make_room(self, name: str, header: Sequence[str] = ()) -> str | None:
        """For a sheet that exists already: mark what of the old one goes, return its part. None for a new one.

        A same-named sheet is replaced only when it is one leakbudget wrote: its first row starts with the first
        ``OWNED_HEADER_CELLS`` names of ``header`` (the sheet's own header, which a spreadsheet program keeps when
        it re-saves the file); any other is the user's, and the write is refused naming it."""
        found = self.existing.get(name.casefold())
        if found is None:
            return None
        name_in_file, rel = found
        part = self.user.actual(rel.target or "")
        if rel.type != REL_TYPE_WORKSHEET or part is None:
            raise WriteBackError(
                f"{self.user.path.name}: sheet '{name_in_file}' is not a worksheet leakbudget wrote (it is a chart "
                "sheet or is missing); rename or delete that sheet and run again."
            )
        content = self.user.read(part)
        if not _is_ours(part) and _FORMULA.search(content):
            raise WriteBackError(
                f"{self.user.path.name}: sheet '{name_in_file}' holds formulas typed by hand, and leakbudget "
                "replaces that sheet on every run; rename it and run again."
            )
        first = _first_row_texts(self.user, content)
        if (
            first is not None
            and header
            and [t.strip().casefold() for t in first[:OWNED_HEADER_CELLS]]
            != [str(h).casefold() for h in header[:OWNED_HEADER_CELLS]]
        ):
            raise WriteBackError(
                f"{self.user.path.name}: sheet '{name_in_file}' is a sheet of yours, not one leakbudget wrote (its "
                f"first row starts {', '.join(repr(t) for t in first[:OWNED_HEADER_CELLS]) or 'empty'}, not "
                f"{', '.join(repr(str(h)) for h in header[:OWNED_HEADER_CELLS])}); nothing was written; rename your "
                "sheet and run again."
            )
        gone = _parts_only_used_by(part, self.graph)
        self.removed |= {actual for p in gone if (actual := self.user.actual(p)) is not None}
        self.replaced.append(name_in_file)
        return part

    def merge_styles(self) -> None:
        """Append the formats the new sheets use to the user's styles part (or add XlsxWriter's if it has none)."""
        ours = self.scratch.read("xl/styles.xml")
        rel = next((rel for rel, _ in self.rel_list if rel.type == REL_TYPE_STYLES and rel.target), None)
        part = self.user.actual(rel.target) if rel and rel.target else None
        if part is None:
            part = _allocate("xl/styles.xml", self.taken)
            self.writes[part] = ours
            self.content_type_of[part] = _content_type(self.scratch, "xl/styles.xml")
            self.new_rels.append((REL_TYPE_STYLES, part))
            return
        merged = merge_styles(self.user.xml(part, 2), ours)
        self.xf_map = merged.xf_map
        if merged.changed:
            self.writes[part] = merged.styles

    def add_sheet(self, sheet: SheetData, scratch_part: str, destination: str | None) -> None:
        if destination is None:
            destination = _allocate(scratch_part, self.taken)
            self.new_rels.append((REL_TYPE_WORKSHEET, destination))
            self.new_sheets.append(sheet.name)
            self.added.append(sheet.name)
        frame = self.scratch.read(scratch_part)
        frame = remap_cell_styles(frame, self.xf_map) if self.xf_map else frame
        self._add_part(scratch_part, destination, with_rows(frame, sheet.name, sheet.header, sheet.rows))

    def _add_part(self, scratch_part: str, part: str, content: bytes | SheetXml) -> None:
        """Add ``content`` as ``part``, with the parts its relationships reach under fresh names."""
        self.writes[part] = content
        self.content_type_of[part] = _content_type(self.scratch, scratch_part)
        rels_xml, rels = self.scratch.rels(scratch_part)
        if rels_xml is None:
            return
        for rel, span in rels:
            if rel.target is not None:
                new_target = _allocate(rel.target, self.taken)
                rels_xml.set_attribute(span, "Target", posixpath.relpath(new_target, posixpath.dirname(part)))
                self._add_part(rel.target, new_target, self.scratch.read(rel.target))
        self.writes[_rels_name(part)] = rels_xml.result()

    def register(self) -> None:
        """Splice the new relationships, sheet entries and content types into the registration parts."""
        rel_ids = _register_relationships(self.workbook_rels, self.rel_list, self.new_rels)
        sheet_ids = [rid for rid, (kind, _) in zip(rel_ids, self.new_rels) if kind == REL_TYPE_WORKSHEET]
        _register_sheets(self.workbook, self.sheets_span, list(zip(self.new_sheets, sheet_ids)))
        _register_print_titles(self.workbook, self.sheets_span, self.replaced, self.new_sheets)
        _register_content_types(self.content_types, self.content_type_of, self.removed - set(self.writes))
        for name, xml in (
            (CONTENT_TYPES, self.content_types),
            (WORKBOOK, self.workbook),
            (WORKBOOK_RELS, self.workbook_rels),
        ):
            if xml.changed:
                self.writes[self.user.actual(name)] = xml.result()  # type: ignore[index]


def _write_package(
    user: _Package,
    dest: IO[bytes],
    writes: dict[str, bytes | SheetXml],
    removed: set[str],
    progress: Progress | None = None,
) -> None:
    """Copy the user's entries in order (new content where written, skipping removed), then append new parts."""
    pending = dict(writes)
    with zipfile.ZipFile(dest, "w", zipfile.ZIP_DEFLATED) as out:
        for info in user.infos:
            if info.filename in pending:
                _write_entry(out, _entry_like(info, info.filename), pending.pop(info.filename), progress)
            elif info.filename not in removed:
                _copy_entry(user.archive, out, info)
        for name, data in pending.items():
            _write_entry(out, _entry_like(None, name), data, progress)


# APPNOTE.TXT (PKWARE, version 6.3.10) 4.3.7: a local file header is these 30 bytes (signature, versions, flags,
# method, time, date, CRC-32, sizes, name length, extra field length), then the name and the extra field; the
# compressed data follows.
_LOCAL_HEADER = struct.Struct("<4s2B4HL2L2H")
_LOCAL_SIGNATURE = b"PK\x03\x04"
# General purpose bits (APPNOTE.TXT 4.4.4) an entry copied as it is may carry: deflate's speed options (1, 2),
# sizes in a data descriptor (3: the copy writes them in its local header instead) and UTF-8 names (11).
_RAW_COPY_FLAGS = 0x0002 | 0x0004 | 0x0008 | 0x0800


def _copy_entry(archive: zipfile.ZipFile, out: zipfile.ZipFile, info: zipfile.ZipInfo) -> None:
    """Copy an entry the write leaves unchanged: its compressed bytes as they are (same method, CRC-32 and sizes),
    once inflating them has checked their CRC-32 as a copy through zipfile does; an entry with anything unusual
    (:func:`_compressed_start`) is inflated and deflated again."""
    entry = _entry_like(info, info.filename, keep_time=True)
    entry.file_size = info.file_size
    start = _compressed_start(archive, info, out)
    with archive.open(info) as src:
        if start is None:
            with out.open(entry, "w") as dst:
                shutil.copyfileobj(src, dst, COPY_CHUNK_BYTES)
            return
        while src.read(COPY_CHUNK_BYTES):  # a damaged entry is refused, as before, and never copied
            pass
    _append_compressed(out, entry, info, archive.fp, start)  # type: ignore[arg-type]


def _compressed_start(archive: zipfile.ZipFile, info: zipfile.ZipInfo, out: zipfile.ZipFile) -> int | None:
    """Where the entry's compressed bytes start in ``archive``'s file (after its local header, which
    ``archive.open`` checks), or None when they are not to be copied as they are: a method other than stored and
    deflated, a flag beyond :data:`_RAW_COPY_FLAGS`, no local header there, or files that are not seekable."""
    source = getattr(archive, "fp", None)
    if (
        info.compress_type not in (zipfile.ZIP_STORED, zipfile.ZIP_DEFLATED)
        or info.flag_bits & ~_RAW_COPY_FLAGS
        or source is None
        or not source.seekable()
        or not can_append(out)
    ):
        return None
    source.seek(info.header_offset)
    header = source.read(_LOCAL_HEADER.size)
    if len(header) != _LOCAL_HEADER.size or not header.startswith(_LOCAL_SIGNATURE):
        return None
    name_length, extra_length = _LOCAL_HEADER.unpack(header)[-2:]
    return info.header_offset + _LOCAL_HEADER.size + name_length + extra_length


def _append_compressed(
    out: zipfile.ZipFile, entry: zipfile.ZipInfo, info: zipfile.ZipInfo, source: IO[bytes], start: int
) -> None:
    """Append ``entry`` to ``out`` with ``info``'s compressed bytes, read from ``source`` at ``start``
    (:func:`leakbudget.xlsx.zipped.append_compressed`)."""
    entry.compress_type, entry.CRC, entry.compress_size = info.compress_type, info.CRC, info.compress_size

    def chunks() -> Iterator[bytes]:
        source.seek(start)
        left = info.compress_size
        while left > 0:
            chunk = source.read(min(left, COPY_CHUNK_BYTES))
            if not chunk:
                raise EOFError(f"entry {info.filename} ends early")
            yield chunk
            left -= len(chunk)

    append_compressed(out, entry, chunks())


def _write_entry(
    out: zipfile.ZipFile, entry: zipfile.ZipInfo, data: bytes | SheetXml, progress: Progress | None
) -> None:
    """One entry: bytes as they are, a sheet's rows deflated by zlib-ng as they are made
    (:func:`leakbudget.xlsx.zipped.write_deflated`)."""
    if isinstance(data, bytes):
        out.writestr(entry, data)
        return
    stage = f"Writing '{data.name}'"
    report = None if progress is None else (lambda done, total: progress(stage, done, total))
    write_deflated(out, entry, data.chunks(report), force_zip64=len(data.rows) > ZIP64_ROWS)


def _entry_like(info: zipfile.ZipInfo | None, name: str, keep_time: bool = False) -> zipfile.ZipInfo:
    entry = zipfile.ZipInfo(name, info.date_time if keep_time and info else time.localtime()[:6])
    entry.compress_type = info.compress_type if keep_time and info else zipfile.ZIP_DEFLATED
    if info is not None:
        entry.external_attr, entry.create_system, entry.comment = info.external_attr, info.create_system, info.comment
    return entry


def _guarded_entries(archive: zipfile.ZipFile, path: Path) -> list[zipfile.ZipInfo]:
    """The entry list, after the zip-bomb and sanity checks (declared sizes only; nothing is decompressed)."""
    infos = archive.infolist()
    problem = zip_problem(infos)
    if problem:
        raise WriteBackError(
            f"{path.name}: refused to open the workbook because {problem}; check it is the workbook you meant "
            "and re-save it in a spreadsheet program."
        )
    return infos


def _rels_name(part: str) -> str:
    folder, name = posixpath.split(part)
    return posixpath.join(folder, "_rels", name + ".rels")


def _source_of_rels(rels_part: str) -> str | None:
    folder, name = posixpath.split(rels_part)
    if posixpath.basename(folder) != "_rels" or not name.endswith(".rels"):
        return None
    return posixpath.join(posixpath.dirname(folder), name[: -len(".rels")])


def _relationship(source: str, attrs: Mapping[str, str]) -> _Rel:
    target: str | None = None
    if attrs.get("TargetMode") != "External":
        raw = unquote(attrs.get("Target", ""))
        joined = raw.lstrip("/") if raw.startswith("/") else posixpath.join(posixpath.dirname(source), raw)
        target = posixpath.normpath(joined)
    return _Rel(attrs.get("Id", ""), attrs.get("Type", ""), target)


def _reference_graph(package: _Package) -> dict[str, set[tuple[str, str]]]:
    """Casefolded source part -> {(casefolded target part, relationship type)} for every relationships part."""
    children: dict[str, set[tuple[str, str]]] = {}
    for info in package.infos:
        source = _source_of_rels(info.filename)
        if source is None:
            continue
        for rel, _ in package.rels(source)[1]:
            if rel.target is not None:
                children.setdefault(source.casefold(), set()).add((rel.target.casefold(), rel.type))
    return children


def _parts_only_used_by(sheet_part: str, children: dict[str, set[tuple[str, str]]]) -> set[str]:
    """Casefolded names of what goes when a result sheet is replaced: its relationships part, and the drawings
    and charts (with their relationships parts) that only it reaches. Anything else it used stays in place."""
    sheet = sheet_part.casefold()
    reach: set[str] = set()
    stack = [sheet]
    while stack:
        for target, rel_type in children.get(stack.pop(), ()):
            if (_is_ours(target) or rel_type in REMOVABLE_REL_TYPES) and target not in reach:
                reach.add(target)
                stack.append(target)
    while True:  # keep anything that some part outside the sheet's own tree also references
        inside = reach | {sheet}
        shared = {t for s, edges in children.items() if s not in inside for t, _ in edges if t in reach}
        if not shared:
            return {_rels_name(p) for p in inside} | reach
        reach -= shared


OWNED_HEADER_CELLS = 2  # a result sheet is recognised by the first cells of its header row
_PREFIX = re.compile(rb"<(/?)[A-Za-z_][\w.-]*:")
_FIRST_ROW = re.compile(rb"<(?:[A-Za-z_][\w.-]*:)?row[\s>].*?</(?:[A-Za-z_][\w.-]*:)?row>", re.S)


def _first_row_texts(package: _Package, sheet_xml: bytes) -> list[str] | None:
    """The texts of a worksheet part's first row, in column order (shared strings resolved); None when the sheet
    has no row (an empty sheet holds nothing to lose)."""
    match = _FIRST_ROW.search(sheet_xml)
    if match is None:
        return None
    snippet = _PREFIX.sub(rb"<\1", match.group(0))  # x:row, x:c … : the prefix is declared on the root, not here
    try:
        row = parse(snippet)
    except (BadXmlError, UnsafeXmlError):
        return []
    shared: list[str] | None = None
    texts = []
    for cell in row:
        if local_name(cell.tag) != "c":
            continue
        kind = cell.get("t", "")
        value = ""
        if kind == "inlineStr":
            value = "".join(t.text or "" for t in cell.iter() if local_name(t.tag) == "t")
        elif kind == "s":
            v = next((e.text for e in cell if local_name(e.tag) == "v"), None)
            if shared is None:
                shared = _shared_strings(package)
            if v is not None and v.strip().isdigit() and int(v) < len(shared):
                value = shared[int(v)]
        else:
            value = next((e.text or "" for e in cell if local_name(e.tag) == "v"), "")
        texts.append(value)
    return texts


def _shared_strings(package: _Package) -> list[str]:
    """The workbook's shared strings, in order (empty when it has none)."""
    part = package.actual("xl/sharedStrings.xml")
    if part is None:
        return []
    try:
        root = parse(package.read(part))
    except (BadXmlError, UnsafeXmlError):
        return []
    return [
        "".join(t.text or "" for t in item.iter() if local_name(t.tag) == "t")
        for item in root
        if local_name(item.tag) == "si"
    ]


def _is_ours(part: str) -> bool:
    return posixpath.basename(part).casefold().startswith(OUR_PART_PREFIX)


def _allocate(like: str, taken: set[str]) -> str:
    """A free part name in ``like``'s folder: ``<folder>/leakbudget_<kind><n><ext>`` (``taken`` is casefolded)."""
    folder, name = posixpath.split(like)
    stem, ext = posixpath.splitext(name)
    kind = stem.rstrip("0123456789") if not _is_ours(stem) else stem[len(OUR_PART_PREFIX) :].rstrip("0123456789")
    n = 1
    while (candidate := f"{folder}/{OUR_PART_PREFIX}{kind}{n}{ext}").casefold() in taken:
        n += 1
    taken.add(candidate.casefold())
    return candidate


def _content_type(package: _Package, part: str) -> str:
    xml = package.xml(CONTENT_TYPES, 1)
    for span in xml.find("Override", 1):
        if span.attrs.get("PartName", "").lstrip("/").casefold() == part.casefold():
            return span.attrs["ContentType"]
    extension = posixpath.splitext(part)[1].lstrip(".").casefold()
    for span in xml.find("Default", 1):
        if span.attrs.get("Extension", "").casefold() == extension:
            return span.attrs["ContentType"]
    raise KeyError(part)


def _worksheet_parts(package: _Package) -> list[str]:
    """Worksheet part names in workbook order."""
    workbook = package.xml(WORKBOOK)
    rels = {rel.id: rel.target for rel, _ in package.rels(WORKBOOK)[1]}
    sheets = workbook.root.find(f"{{{MAIN_NS}}}sheets")
    return [rels[e.get(f"{{{DOC_REL_NS}}}id", "")] for e in (sheets if sheets is not None else [])]  # type: ignore


def _register_relationships(xml: XmlPart, rels: list[tuple[_Rel, Span]], new: list[tuple[str, str]]) -> list[str]:
    """Append a relationship per (type, part) to the workbook's relationships part; return their ids."""
    used = {rel.id for rel, _ in rels}
    root = xml.spans[0]
    prefix = next((s.prefix for s in xml.find("Relationship", 1)), root.prefix)
    ids, fragments = [], []
    n = 1
    for rel_type, part in new:
        while f"rId{n}" in used:
            n += 1
        used.add(f"rId{n}")
        ids.append(f"rId{n}")
        target = posixpath.relpath(part, "xl")
        fragments.append(f'<{prefix}Relationship Id="rId{n}" Type={quoteattr(rel_type)} Target={quoteattr(target)}/>')
    if fragments:
        xml.append_children(root, "".join(fragments).encode())
    return ids


def _register_sheets(workbook: XmlPart, sheets_span: Span, entries: list[tuple[str, str]]) -> None:
    """Append ``<sheet name=… sheetId=… r:id=…/>`` entries at the end of the workbook's ``<sheets>``."""
    if not entries:
        return
    existing = workbook.find("sheet", 2, within=sheets_span)
    prefix = existing[0].prefix if existing else sheets_span.prefix
    rel_prefix = workbook.namespace_prefix(DOC_REL_NS, [workbook.spans[0], sheets_span])
    declare = "" if rel_prefix else f" xmlns:r={quoteattr(DOC_REL_NS)}"
    rel_prefix = rel_prefix or "r"
    next_id = max([int(s.attrs.get("sheetId", "0")) for s in existing] + [0]) + 1
    fragments = []
    for offset, (name, rid) in enumerate(entries):
        fragments.append(
            f'<{prefix}sheet{declare} name={quoteattr(name)} sheetId="{next_id + offset}" {rel_prefix}:id="{rid}"/>'
        )
    workbook.append_children(sheets_span, "".join(fragments).encode())


# CT_Workbook's children that come after definedNames (ECMA-376 Part 1 §18.2.27): a new definedNames goes before the
# first of them that is present.
_AFTER_DEFINED_NAMES = (
    "calcPr",
    "oleSize",
    "customWorkbookViews",
    "pivotCaches",
    "smartTagPr",
    "smartTagTypes",
    "webPublishing",
    "fileRecoveryPr",
    "webPublishObjects",
    "extLst",
)


def _register_print_titles(workbook: XmlPart, sheets_span: Span, replaced: list[str], added: list[str]) -> None:
    """Repeat the header row on every printed page of each result sheet: a ``_xlnm.Print_Titles`` defined name of
    row 1, scoped to the sheet (ECMA-376 Part 1 §18.2.5; built-in names §18.2.6), unless the sheet has one."""
    sheets = workbook.find("sheet", 2, within=sheets_span)
    names = [sp.attrs.get("name", "") for sp in sheets] + list(added)
    position = {n.casefold(): i for i, n in enumerate(names)}
    defined = workbook.find("definedNames", 1)
    have = set()
    if defined:
        for span in workbook.find("definedName", 2, within=defined[0]):
            if span.attrs.get("name") == "_xlnm.Print_Titles":
                have.add(span.attrs.get("localSheetId", ""))
    prefix = sheets_span.prefix
    entries = []
    for name in [*replaced, *added]:
        index = position.get(name.casefold())
        if index is None or str(index) in have:
            continue
        reference = "'" + name.replace("'", "''") + "'!$1:$1"
        entries.append(
            f'<{prefix}definedName name="_xlnm.Print_Titles" localSheetId="{index}">'
            f"{reference.replace('&', '&amp;').replace('<', '&lt;')}</{prefix}definedName>"
        )
    if not entries:
        return
    fragment = "".join(entries).encode()
    if defined:
        workbook.append_children(defined[0], fragment)
        return
    block = f"<{prefix}definedNames>".encode() + fragment + f"</{prefix}definedNames>".encode()
    later = [sp for local in _AFTER_DEFINED_NAMES for sp in workbook.find(local, 1)]
    if later:
        workbook.insert_before(min(later, key=lambda sp: sp.start), block)
    else:
        workbook.append_children(workbook.spans[0], block)


def _register_content_types(xml: XmlPart, content_types: dict[str, str], removed: set[str]) -> None:
    """Add or correct Overrides for the parts we write, drop those of removed parts, and make sure .rels is known."""
    root = xml.spans[0]
    overrides = {s.attrs.get("PartName", "").lstrip("/").casefold(): s for s in xml.find("Override", 1)}
    gone = {r.casefold() for r in removed}
    for name, span in overrides.items():
        if name in gone:
            xml.remove(span)
    fragments = []
    if not any(s.attrs.get("Extension", "").casefold() == "rels" for s in xml.find("Default", 1)):
        fragments.append(f'<{root.prefix}Default Extension="rels" ContentType="{CT_RELATIONSHIPS}"/>')
    for part, content_type in content_types.items():
        override = overrides.get(part.casefold())
        if override is None or part.casefold() in gone:
            fragments.append(
                f"<{root.prefix}Override PartName={quoteattr('/' + part)} ContentType={quoteattr(content_type)}/>"
            )
        elif override.attrs.get("ContentType") != content_type:
            xml.set_attribute(override, "ContentType", content_type)
    if fragments:
        xml.append_children(root, "".join(fragments).encode())


# --------------------------------------------------------------------------------------- the new sheets (XlsxWriter)


def _render(sheets: Sequence[SheetData]) -> bytes:
    """The sheets' frames as an XlsxWriter package whose first sheet is a placeholder holding the tab selection.

    Each sheet gets its header row as bold sample cells (numbers, which :func:`leakbudget.xlsx.rows.with_rows`
    turns into the header's texts, as inline strings) and, if it has rows, a sample row
    (:data:`leakbudget.xlsx.rows.SAMPLE_ROW`) with a cell in every column's format, which ``with_rows`` replaces
    with the real rows. XlsxWriter writes no text at all, so its package has no shared strings to merge into the
    user's, and it is built in memory: no scratch files (creating and deleting them took a third of the time of a
    small workbook's check on a shared machine).
    """
    import xlsxwriter

    buffer = BytesIO()
    names = {s.name.casefold() for s in sheets}
    placeholder = next(f"placeholder{n}" for n in range(len(names) + 1) if f"placeholder{n}" not in names)
    book = xlsxwriter.Workbook(buffer, {"in_memory": True})
    book.add_worksheet(placeholder).activate()  # so no grafted sheet is tabSelected (Excel would group them)
    bold = book.add_format({"bold": True})
    quoted = book.add_format({"quote_prefix": True})
    for sheet in sheets:
        worksheet = book.add_worksheet(sheet.name)
        formats = {column: book.add_format({"num_format": code}) for column, code in sheet.number_formats.items()}
        for column, width in sheet.column_widths.items():
            worksheet.set_column(column, column, width)
        worksheet.freeze_panes(1, 0)
        worksheet.set_landscape()  # prints well: landscape, every column on the page's width, pages as long as needed
        worksheet.fit_to_pages(1, 0)
        for column in range(len(sheet.header)):
            worksheet.write_number(0, column, 0, bold)  # the header's cell, its text put in by with_rows
        if sheet.rows:
            width = max(len(sheet.header), rows_width(sheet.rows), *(c + 1 for c in sheet.number_formats))
            for column in range(width):
                worksheet.write_number(SAMPLE_ROW - 1, column, 0, formats.get(column))
            worksheet.write_number(QUOTE_ROW - 1, 0, 0, quoted)  # the quote-prefix style's sample cell
        if sheet.chart is not None and sheet.rows:
            _add_chart(book, worksheet, sheet)
    book.close()
    return buffer.getvalue()


def _add_chart(book, worksheet, sheet: SheetData) -> None:  # noqa: ANN001
    spec = sheet.chart
    assert spec is not None
    width = len(sheet.header)
    for column in (spec.category_column, *spec.value_columns):
        if not 0 <= column < width:
            raise ValueError(f"chart column {column} is outside sheet '{sheet.name}' ({width} columns)")
    last = len(sheet.rows) if spec.data_rows is None else min(spec.data_rows, len(sheet.rows))
    chart = book.add_chart({"type": "column"})
    for i, column in enumerate(spec.value_columns):
        series: dict[str, object] = {
            "name": [sheet.name, 0, column],
            "categories": [sheet.name, 1, spec.category_column, last, spec.category_column],
            "values": [sheet.name, 1, column, last, column],
        }
        if i < len(spec.colours):
            series["fill"] = {"color": spec.colours[i]}
            series["border"] = {"none": True}
        chart.add_series(series)
    chart.set_title({"name": spec.title})
    chart.set_y_axis({"name": spec.y_axis_title})
    chart.set_size({"width": spec.width_px, "height": spec.height_px})
    worksheet.insert_chart(spec.anchor, chart)
