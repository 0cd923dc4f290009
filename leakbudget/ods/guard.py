"""Before python-calamine reads an OpenDocument spreadsheet (.ods): what the file is, and whether it is safe to read.

The same guards as for an .xlsx (:mod:`leakbudget.xlsx.guard`), in the shape of an ODF package (ODF 1.2 Part 3):

1. what the file is, from its first bytes, and from its ``mimetype`` entry (the package's media type, ODF 1.2
   Part 3 §3.3): an .xlsx, a text document or a flat XML file under an .ods name is named as such;
2. the zip limits shared with the .xlsx reader and writer (:func:`leakbudget.xlsx.guard.zip_problem`), and no
   entry whose name is absolute or climbs out of the package with ``..`` (:func:`name_problem`);
3. ``META-INF/manifest.xml`` (which calamine needs) parsed with defusedxml, and a password-protected package (an
   ``encryption-data`` element in the manifest, ODF 1.2 Part 3 §4.8) named as such;
4. ``content.xml``, the one part calamine parses: size-limited, no DTD (checked with defusedxml before anything
   else reads it), the usual namespace prefixes (calamine matches names as written), and counted by
   :mod:`leakbudget.ods.scan` for the cells calamine will build from it, all tables together, since calamine
   builds every table when it opens the file.

Every refusal is one sentence saying what to do (:class:`~leakbudget.errors.WorkbookError`).
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
import zipfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import defusedxml
import defusedxml.ElementTree as DET

from leakbudget.errors import WorkbookError
from leakbudget.ods.scan import (
    MAX_LISTED_CELLS,
    CellLimitReached,
    ListLimitReached,
    TableScan,
    check_utf8,
    fast_scan,
    parsed_scan,
)
from leakbudget.xlsx.guard import (
    MAX_INDEX_PART_BYTES,
    MAX_IRREGULAR_SHEET_BYTES,
    MAX_SHEET_CELLS,
    MAX_SHEET_PART_BYTES,
    ODS_MIMETYPE,
    ZIP_DAMAGE,
    SheetScan,
    identify,
    xml_part_error,
    zip_problem,
)
from leakbudget.xlsx.xml_text import BadXmlError, UnsafeXmlError, local_name, parse

# The one part that holds every table, and the package's index (ODF 1.2 Part 3 §3.2: META-INF/manifest.xml).
CONTENT = "content.xml"
MANIFEST = "META-INF/manifest.xml"
MIMETYPE = "mimetype"
# Namespaces of ODF 1.2 Part 1 (§1.5 Namespaces), with the prefixes calamine expects (it matches names as written).
OFFICE_NS = "urn:oasis:names:tc:opendocument:xmlns:office:1.0"
TABLE_NS = "urn:oasis:names:tc:opendocument:xmlns:table:1.0"
TEXT_NS = "urn:oasis:names:tc:opendocument:xmlns:text:1.0"
READER_PREFIXES = {"office": OFFICE_NS, "table": TABLE_NS, "text": TEXT_NS}

# Limits: content.xml holds every table, so it gets what one .xlsx sheet part gets; calamine builds every table
# when it opens the file, so the cells of all tables together get what one .xlsx sheet gets.
MAX_CONTENT_BYTES = MAX_SHEET_PART_BYTES
MAX_BOOK_CELLS = MAX_SHEET_CELLS
MAX_IRREGULAR_CONTENT_BYTES = MAX_IRREGULAR_SHEET_BYTES  # parsed when the fast scan cannot vouch for it

RESAVE_ODS = "open it in your spreadsheet program and save it as an OpenDocument spreadsheet (.ods)"
WHAT = "an OpenDocument spreadsheet (.ods)"
_DRIVE = re.compile(r"^[A-Za-z]:")


def name_problem(infos: list[zipfile.ZipInfo]) -> str | None:
    """Why an entry name is unsafe (absolute, a drive, ``..``, a NUL), or None. Nothing is ever unpacked to disk,
    but a package that holds such a name was not written by a spreadsheet program."""
    for info in infos:
        name = info.filename
        parts = name.replace("\\", "/").split("/")
        if name.startswith(("/", "\\")) or _DRIVE.match(name) or ".." in parts or "\0" in name:
            return f"entry {name!r} has an unsafe name (absolute, or climbing out with '..')"
    return None


def _size(n_bytes: int) -> str:
    return f"{n_bytes / (1 << 20):,.0f} MiB" if n_bytes >= 1 << 20 else f"{n_bytes:,} bytes"


class GuardedOds:
    """An .ods package that passed every check above; :meth:`scan_sheet` gives what calamine would miss."""

    def __init__(self, path: Path) -> None:
        self.path = path
        identify(path, WHAT, RESAVE_ODS)
        try:
            self.archive = zipfile.ZipFile(path)
            self.infos = self.archive.infolist()
        except ZIP_DAMAGE as exc:
            raise WorkbookError(
                f"the file is cut short or damaged (its zip package cannot be opened: {exc})",
                path=path,
                hint="use a copy saved by your spreadsheet program, or a backup",
            ) from None
        try:
            problem = zip_problem(self.infos) or name_problem(self.infos)
            if problem is not None:
                raise WorkbookError(
                    f"refused to open the spreadsheet because {problem}",
                    path=path,
                    hint="check it is the file you meant and re-save it in a spreadsheet program",
                )
            self._names = {info.filename: info for info in self.infos}
            with self._damage():
                self._check_kind()
                self._check_manifest()
                self.tables = self._scan_content()
        except BaseException:
            self.close()
            raise

    def close(self) -> None:
        self.archive.close()

    @contextmanager
    def _damage(self) -> Iterator[None]:
        """Turn the zip reader's complaints about a damaged entry into one sentence for the user."""
        try:
            yield
        except ZIP_DAMAGE as exc:
            raise WorkbookError(
                f"the file is damaged ({type(exc).__name__}: {str(exc)[:160]})",
                path=self.path,
                hint="use a copy saved by your spreadsheet program, or a backup",
            ) from None

    def _check_kind(self) -> None:
        if MIMETYPE not in self._names:
            folded = {name.casefold() for name in self._names}
            if "xl/workbook.xml" in folded or "[content_types].xml" in folded:
                raise WorkbookError(
                    "this is an .xlsx workbook, not an OpenDocument spreadsheet (.ods)",
                    path=self.path,
                    hint="rename it to end in .xlsx, which leakbudget reads as an Excel workbook",
                )
            raise WorkbookError(
                f"this zip file is not an OpenDocument spreadsheet (it has no {MIMETYPE} entry)",
                path=self.path,
                hint=RESAVE_ODS,
            )
        info = self._names[MIMETYPE]
        media = self.archive.read(info).strip() if info.file_size <= 200 else b"(too long)"
        if media != ODS_MIMETYPE:
            shown = media.decode("ascii", "replace")[:80]
            raise WorkbookError(
                f"this is not an OpenDocument spreadsheet (its {MIMETYPE} entry says '{shown}')",
                path=self.path,
                hint=RESAVE_ODS,
            )

    def _limited(self, part: str, limit: int) -> zipfile.ZipInfo:
        info = self._names.get(part)
        if info is None:
            raise WorkbookError(
                f"the package has no {part}, which every OpenDocument spreadsheet holds",
                path=self.path,
                hint=RESAVE_ODS,
            )
        if info.file_size > limit:
            raise WorkbookError(
                f"refused to read the spreadsheet because its part {part} unpacks to {_size(info.file_size)} "
                f"(limit {_size(limit)})",
                path=self.path,
                hint="check it is the file you meant; delete what you do not need and save it again",
            )
        return info

    def _xml_error(self, part: str, exc: Exception) -> WorkbookError:
        return xml_part_error(self.path, part, exc, ".ods", "spreadsheet")

    def _check_manifest(self) -> None:
        info = self._limited(MANIFEST, MAX_INDEX_PART_BYTES)
        try:
            manifest = parse(self.archive.read(info))
        except (UnsafeXmlError, BadXmlError) as exc:
            raise self._xml_error(MANIFEST, exc) from None
        if any(local_name(element.tag) == "encryption-data" for element in manifest.iter()):
            raise WorkbookError(
                "the spreadsheet is password-protected (encrypted), so its cells cannot be read",
                path=self.path,
                hint="open it in your spreadsheet program, save a copy without the password, and check that copy",
            )

    def _scan_content(self) -> dict[str, TableScan]:
        info = self._limited(CONTENT, MAX_CONTENT_BYTES)
        try:
            self._check_prolog(info)
            with self.archive.open(info) as stream:
                tables = fast_scan(stream, MAX_BOOK_CELLS)
            if tables is None:
                if info.file_size > MAX_IRREGULAR_CONTENT_BYTES:
                    raise WorkbookError(
                        f"its {CONTENT} is written in an unusual way and is too large to check "
                        f"({_size(info.file_size)})",
                        path=self.path,
                        hint="re-save the spreadsheet in a spreadsheet program and run again",
                    )
                with self.archive.open(info) as stream:
                    tables = parsed_scan(stream, MAX_BOOK_CELLS)
        except (UnsafeXmlError, BadXmlError) as exc:
            raise self._xml_error(CONTENT, exc) from None
        except CellLimitReached as exc:
            raise WorkbookError(
                f"its tables hold more than the {MAX_BOOK_CELLS:,} cells leakbudget reads from an .ods (all "
                f"sheets together, since every sheet is read when the file is opened; this one spans {exc.cells:,})",
                path=self.path,
                sheet=exc.table,
                hint="delete stray values far below or right of the tables (Ctrl+End shows the last cell) and "
                "save again",
            ) from None
        except ListLimitReached as exc:
            raise WorkbookError(
                f"it has more than {MAX_LISTED_CELLS:,} {exc.what}",
                path=self.path,
                sheet=exc.table,
                hint="correct or clear those cells in your spreadsheet program and save",
            ) from None
        by_name: dict[str, TableScan] = {}
        for table in tables:
            old = by_name.get(table.name)
            if old is None or table.cells > old.cells:  # calamine keeps the last of two equal names; be safe
                by_name[table.name] = table
        return by_name

    def _check_prolog(self, info: zipfile.ZipInfo) -> None:
        """Refuse a DTD before the root element, and namespace prefixes calamine would not follow."""
        declared: dict[str, str] = {}
        try:
            with self.archive.open(info) as stream:
                check_utf8(stream.read(512))
            with self.archive.open(info) as stream:
                for event, item in DET.iterparse(stream, events=("start-ns", "start"), forbid_dtd=True):
                    if event == "start":
                        break
                    prefix, uri = item  # start-ns gives (prefix, uri)
                    declared.setdefault(prefix, uri)
        except defusedxml.DefusedXmlException as exc:
            raise UnsafeXmlError(type(exc).__name__) from None
        except ET.ParseError as exc:
            raise BadXmlError(str(exc)) from None
        for prefix, uri in READER_PREFIXES.items():
            if declared.get(prefix) != uri:
                used = next((p for p, u in declared.items() if u == uri), None)
                how = f"the prefix '{used}:'" if used is not None else "no declared prefix"
                raise WorkbookError(
                    f"its {CONTENT} writes the OpenDocument {prefix} elements with {how} instead of '{prefix}:', "
                    "which leakbudget's reader does not follow",
                    path=self.path,
                    hint=RESAVE_ODS,
                )

    @property
    def sheet_names(self) -> list[str]:
        return list(self.tables)

    def scan_sheet(self, name: str) -> SheetScan:
        """What calamine would miss in table ``name``: cells with an error or a formula without a saved result,
        and the merged ranges (the rectangle was checked when the file was opened)."""
        table = self.tables.get(name)
        if table is None:
            raise WorkbookError(
                f"the table that holds sheet '{name}' cannot be found in {CONTENT}",
                path=self.path,
                sheet=name,
                hint="re-save the spreadsheet in a spreadsheet program and run again",
            )
        return SheetScan(table.rows, table.columns, table.notes(), list(table.merged))
