"""Write result sheets into a user's .ods without re-saving the spreadsheet through a library.

The result tables (:mod:`leakbudget.ods.tables`) go into ``content.xml`` as new ``<table:table>`` elements after the
user's tables, and the styles they use as new automatic styles, by byte splices at the offsets
:mod:`leakbudget.ods.content` finds. A table leakbudget wrote before (recognised by its first cell's note, which
LibreOffice keeps when it saves, or by exactly the result sheet's header and no formula) is replaced in place,
keeping its position; any other table of that name is the user's and is never touched (the write is refused).
Automatic styles leakbudget added before and no longer used are removed.

Before anything is written, the new ``content.xml`` is parsed again and compared with the old one: every user
table must be byte-identical and in the same order, and everything outside the result tables and their styles
must be too; otherwise nothing is written. Every other entry of the package is copied with the same bytes in the
same order; ``mimetype`` goes first and stored, as ODF 1.2 Part 3 §3.3 requires. The file is replaced by
:mod:`leakbudget.xlsx.files` (atomic rename, backup of the previous version).

A digitally signed document (``META-INF/documentsignatures.xml``, ODF 1.2 Part 3 §5) is refused: any change to
``content.xml`` breaks its signature.
"""

from __future__ import annotations

import re
import shutil
import time
import zipfile
import zlib
from collections.abc import Sequence
from pathlib import Path
from typing import IO

from leakbudget.errors import WriteBackError
from leakbudget.ods.content import Element, Layout, Table, layout
from leakbudget.ods.guard import CONTENT, MANIFEST, MAX_CONTENT_BYTES, MIMETYPE, READER_PREFIXES, name_problem
from leakbudget.ods.tables import OUR_STYLE_PREFIX, Styles, TableWriter, declarations
from leakbudget.progress import Progress
from leakbudget.xlsx.files import COPY_CHUNK_BYTES, rewrite
from leakbudget.xlsx.guard import MAX_INDEX_PART_BYTES, ODS_MIMETYPE, zip_problem
from leakbudget.xlsx.package import SheetData, WriteResult
from leakbudget.xlsx.xml_text import BadXmlError, UnsafeXmlError, parse, quoteattr
from leakbudget.xlsx.zipped import write_deflated

ODS_SUFFIX = ".ods"
SIGNATURES = "META-INF/documentsignatures.xml"
STYLES = "styles.xml"


def write_ods(
    source: Path,
    sheets: Sequence[SheetData],
    out: Path | None = None,
    progress: Progress | None = None,
    force: bool = False,
) -> WriteResult:
    """Write ``sheets`` into the .ods ``source`` (or into a copy at ``out``, a name ending in .ods), keeping
    every user table and every other entry byte for byte.

    Text is always written as text; None and NaN give empty cells; ±inf and numbers beyond ``EXCEL_MAX_NUMBER``
    are written as text. With ``out=None`` the file is replaced atomically and its previous version kept as
    ``<stem>.before-leakbudget.ods``; with ``out`` the source is only read. A symbolic link is followed.

    Raises :class:`WriteBackError` (nothing changed) when the destination is open in a spreadsheet program, the
    source is not a readable .ods package, it exceeds the zip limits, is signed or password-protected, its
    ``content.xml`` declares a DTD or is damaged, a table named like a result sheet is the user's, or the folder
    cannot be written. ``progress`` hears of the rows written, sheet by sheet.
    """
    keys = [sheet.name.casefold() for sheet in sheets]
    if len(set(keys)) != len(keys):
        raise ValueError(f"sheet names must differ (ignoring case): {[s.name for s in sheets]}")
    source = Path(source)
    if out is not None and Path(out).suffix.lower() != ODS_SUFFIX:
        raise WriteBackError(
            f"{out}: results from an .ods spreadsheet are written as an .ods; give --out a name ending in .ods."
        )

    def build(original: IO[bytes], dest: IO[bytes]) -> tuple[tuple[str, ...], tuple[str, ...]]:
        try:
            package = zipfile.ZipFile(original)
        except (zipfile.BadZipFile, OSError, ValueError) as exc:
            raise WriteBackError(
                f"{source.name}: not an OpenDocument spreadsheet ({exc}); save it as an .ods in a spreadsheet "
                "program and run again."
            ) from None
        with package:
            try:
                return _write(package, sheets, dest, source, progress)
            except (zipfile.BadZipFile, zlib.error, EOFError, NotImplementedError, RuntimeError) as exc:
                raise WriteBackError(
                    f"{source.name}: the spreadsheet's zip package is damaged or uses an unsupported feature "
                    f"({exc}); re-save it in a spreadsheet program and run again."
                ) from None

    written = rewrite(source, Path(out) if out is not None else None, build, force)
    replaced, added = written.value
    return WriteResult(written.path, written.backup, replaced, added)


def _refuse(path: Path, problem: str, fix: str = "re-save it in a spreadsheet program and run again") -> WriteBackError:
    return WriteBackError(f"{path.name}: {problem}; nothing was written; {fix}.")


def _checked_entries(archive: zipfile.ZipFile, path: Path) -> dict[str, zipfile.ZipInfo]:
    """The package's entries by name, after the zip limits and the checks of its kind."""
    infos = archive.infolist()
    problem = zip_problem(infos) or name_problem(infos)
    if problem:
        raise _refuse(path, f"refused to open the spreadsheet because {problem}")
    entries = {info.filename: info for info in infos}
    mimetype = entries.get(MIMETYPE)
    if mimetype is None or mimetype.file_size > 200 or archive.read(mimetype).strip() != ODS_MIMETYPE:
        raise _refuse(path, "this is not an OpenDocument spreadsheet (its mimetype entry is missing or different)")
    if SIGNATURES in entries:
        raise _refuse(
            path,
            "the document is digitally signed, and writing results into it would break the signature",
            "check it with --no-write, or save an unsigned copy and check that",
        )
    if CONTENT not in entries or entries[CONTENT].file_size > MAX_CONTENT_BYTES:
        raise _refuse(path, f"its {CONTENT} is missing or larger than {MAX_CONTENT_BYTES >> 20} MiB")
    manifest = entries.get(MANIFEST)
    if manifest is not None and manifest.file_size <= MAX_INDEX_PART_BYTES:
        try:
            encrypted = b"encryption-data" in archive.read(manifest) and any(
                element.tag.endswith("}encryption-data") for element in parse(archive.read(manifest)).iter()
            )
        except (UnsafeXmlError, BadXmlError):
            raise _refuse(path, f"its {MANIFEST} declares a DTD or is damaged") from None
        if encrypted:
            raise _refuse(path, "the spreadsheet is password-protected", "save a copy without the password")
    return entries


def _layout(data: bytes, path: Path) -> Layout:
    try:
        found = layout(data)
    except UnsafeXmlError:
        raise _refuse(
            path, f"its {CONTENT} declares a DTD or entities, which an .ods never needs (an entity-expansion attack?)"
        ) from None
    except BadXmlError as exc:
        raise _refuse(path, f"its {CONTENT} is not well-formed XML ({exc})") from None
    return found


def _write(
    archive: zipfile.ZipFile, sheets: Sequence[SheetData], dest: IO[bytes], path: Path, progress: Progress | None
) -> tuple[tuple[str, ...], tuple[str, ...]]:
    entries = _checked_entries(archive, path)
    old = archive.read(entries[CONTENT])
    before = _layout(old, path)
    for prefix, uri in READER_PREFIXES.items():
        if before.namespaces.get(prefix) != uri:
            raise _refuse(path, f"its {CONTENT} does not write the OpenDocument {prefix} elements as '{prefix}:'")
    if before.spreadsheet is None or not before.tables:
        raise _refuse(path, f"its {CONTENT} holds no spreadsheet tables")
    plan = _Plan(before, old, sheets, path, _style_names(archive, entries))
    new = plan.content(old, progress)
    _verify(old, before, new, plan, path)
    _write_package(archive, entries, dest, new)
    return tuple(plan.replaced), tuple(plan.added)


def _style_names(archive: zipfile.ZipFile, entries: dict[str, zipfile.ZipInfo]) -> set[str]:
    """Style names used in styles.xml, which new automatic style names must not repeat."""
    info = entries.get(STYLES)
    if info is None or info.file_size > MAX_INDEX_PART_BYTES:
        return set()
    return {m.decode("utf-8", "replace") for m in re.findall(rb'style:name="([^"]*)"', archive.read(info))}


class _Plan:
    """What changes in content.xml: tables replaced or added, styles removed or added."""

    def __init__(self, found: Layout, data: bytes, sheets: Sequence[SheetData], path: Path, taken: set[str]) -> None:
        self.found, self.sheets = found, sheets
        self.declarations = declarations(found.namespaces)
        by_name: dict[str, Table] = {}
        for existing in found.tables:
            by_name.setdefault(existing.name.casefold(), existing)
        self.targets: list[Table | None] = []  # per sheet: the table it replaces, or None
        self.replaced: list[str] = []
        self.added: list[str] = []
        for sheet in sheets:
            table: Table | None = by_name.get(sheet.name.casefold())
            if table is not None and not _ours(table, sheet):
                raise _refuse(
                    path,
                    f"sheet '{table.name}' has the name of a result sheet but is not one leakbudget wrote (its first "
                    "cell has no note from leakbudget, and its first row is not that sheet's header or it holds "
                    "formulas)",
                    "rename that sheet and run again",
                )
            self.targets.append(table)
            (self.replaced if table is not None else self.added).append(table.name if table else sheet.name)
        cut = [(t.element.start, t.element.end) for t in self.targets if t is not None]
        self.removed_styles = _unused_styles(found, data, cut)
        kept = {e.attrs.get("style:name", "") for e in found.styles if e not in self.removed_styles}
        self.styles = Styles(sheets, taken | kept)

    def content(self, old: bytes, progress: Progress | None) -> bytes:
        """The new content.xml: the splices applied to ``old``."""
        found = self.found
        edits: list[tuple[int, int, list[bytes]]] = []  # (start, end, pieces)
        for element in self.removed_styles:
            edits.append((element.start, element.end, []))
        styles = self.styles.xml(self.declarations)
        automatic = found.automatic_styles
        if automatic is None:
            assert found.body is not None  # a spreadsheet sits in a body
            edits.append((found.body.start, found.body.start, [_wrap("office:automatic-styles", styles)]))
        elif automatic.empty:
            edits.append((automatic.start, automatic.end, [_wrap(automatic.name, styles, automatic.attrs)]))
        else:
            edits.append((automatic.close, automatic.close, [styles]))
        new_tables: list[bytes] = []
        for sheet, target in zip(self.sheets, self.targets):
            pieces = self._table(sheet, progress)
            if target is not None:
                edits.append((target.element.start, target.element.end, pieces))
            else:
                new_tables += pieces
        anchor = found.tables[-1].element.end
        edits.append((anchor, anchor, new_tables))
        out: list[bytes] = []
        position = 0
        for start, end, pieces in sorted(edits, key=lambda e: (e[0], e[1])):
            if start < position:
                raise ValueError("overlapping content.xml splices")
            out.append(old[position:start])
            out += pieces
            position = end
        out.append(old[position:])
        return b"".join(out)

    def _table(self, sheet: SheetData, progress: Progress | None) -> list[bytes]:
        stage = f"Writing '{sheet.name}'"
        report = None if progress is None else (lambda done, total: progress(stage, done, total))
        return list(TableWriter(sheet, self.styles, self.declarations).chunks(report))


def _ours(table: Table, sheet: SheetData) -> bool:
    """A table leakbudget wrote: its note, or (a result sheet of the .xlsx writer, saved as .ods by a spreadsheet
    program) exactly the sheet's header and no formula."""
    return table.ours or (table.header == [str(h) for h in sheet.header] and not table.formulas)


def _unused_styles(found: Layout, data: bytes, cut: list[tuple[int, int]]) -> list[Element]:
    """Our earlier automatic styles that nothing left in the part refers to once ``cut`` spans (the tables being
    replaced) and these styles themselves are gone."""
    candidates = [e for e in found.styles if e.attrs.get("style:name", "").startswith(OUR_STYLE_PREFIX)]
    while candidates:
        spans = sorted(cut + [(e.start, e.end) for e in candidates])
        kept = b"".join(data[a:b] for a, b in _gaps(spans, len(data)))
        used = [e for e in candidates if b'"' + e.attrs["style:name"].encode() + b'"' in kept]
        if not used:
            break
        candidates = [e for e in candidates if e not in used]
    return candidates


def _gaps(spans: list[tuple[int, int]], length: int) -> list[tuple[int, int]]:
    """The ranges of ``[0, length)`` outside the sorted ``spans``."""
    gaps, position = [], 0
    for start, end in spans:
        if start > position:
            gaps.append((position, start))
        position = max(position, end)
    gaps.append((position, length))
    return gaps


def _wrap(name: str, inner: bytes, attrs: dict[str, str] | None = None) -> bytes:
    shown = "".join(f" {k}={quoteattr(v)}" for k, v in (attrs or {}).items())
    return f"<{name}{shown}>".encode() + inner + f"</{name}>".encode()


def _verify(old: bytes, before: Layout, new: bytes, plan: _Plan, path: Path) -> None:
    """Parse the new content.xml again; refuse unless every user table, and everything but the result tables and
    their styles, is byte for byte as it was."""
    after = _layout(new, path)
    ours = {sheet.name.casefold() for sheet in plan.sheets}

    def user_tables(found: Layout, data: bytes) -> list[tuple[str, bytes]]:
        return [(t.name, data[t.element.start : t.element.end]) for t in found.tables if t.name.casefold() not in ours]

    old_tables, new_tables = user_tables(before, old), user_tables(after, new)
    if old_tables != new_tables:
        changed = next((a[0] for a, b in zip(old_tables, new_tables) if a != b), "a table")
        raise _refuse(path, f"a check before writing found that sheet '{changed}' would change (a leakbudget bug)")
    written = [t.name for t in after.tables if t.name.casefold() in ours]
    if sorted(n.casefold() for n in written) != sorted(ours):
        raise _refuse(path, "a check before writing did not find every result sheet in the new file (a leakbudget bug)")

    def rest(found: Layout, data: bytes, styles: set[str]) -> bytes:
        spans = [(t.element.start, t.element.end) for t in found.tables if t.name.casefold() in ours]
        automatic = found.automatic_styles
        if automatic is not None and (before.automatic_styles is None or before.automatic_styles.empty):
            spans.append((automatic.start, automatic.end))
        spans += [(e.start, e.end) for e in found.styles if e.attrs.get("style:name") in styles]
        return b"".join(data[a:b] for a, b in _gaps(sorted(spans), len(data)))

    removed = {e.attrs.get("style:name", "") for e in plan.removed_styles}
    if rest(before, old, removed) != rest(after, new, set(plan.styles.names)):
        raise _refuse(path, f"a check before writing found a change outside the result sheets in {CONTENT} (a bug)")


def _write_package(archive: zipfile.ZipFile, entries: dict[str, zipfile.ZipInfo], dest: IO[bytes], new: bytes) -> None:
    """``mimetype`` first and stored, then every entry in order: content.xml new, the others as they were."""
    with zipfile.ZipFile(dest, "w", zipfile.ZIP_DEFLATED) as out:
        mimetype = entries[MIMETYPE]
        first = _entry_like(mimetype)
        first.compress_type = zipfile.ZIP_STORED
        out.writestr(first, archive.read(mimetype))
        for info in archive.infolist():
            if info.filename == MIMETYPE:
                continue
            if info.filename == CONTENT:
                write_deflated(out, _entry_like(info, keep_time=False), [new])
                continue
            copy = _entry_like(info)
            if info.is_dir():
                out.writestr(copy, b"")
                continue
            copy.file_size = info.file_size
            with archive.open(info) as src, out.open(copy, "w") as dst:
                shutil.copyfileobj(src, dst, COPY_CHUNK_BYTES)


def _entry_like(info: zipfile.ZipInfo, keep_time: bool = True) -> zipfile.ZipInfo:
    entry = zipfile.ZipInfo(info.filename, info.date_time if keep_time else time.localtime()[:6])
    entry.compress_type = info.compress_type
    entry.external_attr, entry.create_system, entry.comment = info.external_attr, info.create_system, info.comment
    return entry
