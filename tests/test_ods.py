"""Tests of .ods workbooks: the read guard (leakbudget.ods.guard, .scan) and the write-back (leakbudget.ods.package).

The fixtures are LibreOffice's own output (tests/data/make_fixtures.py, ``ods``): ``alder-quay.ods`` is LibreOffice's
conversion of ``alder-quay.xlsx`` (the demo job), ``libreoffice.ods`` of the panel ``libreoffice.xlsx`` (formulas,
comments, merged cells, a chart and an image). Independent references: the .xlsx results of the same workbook
(LibreOffice's conversion keeps every cell: python-calamine reads the same grids from both), python-calamine's own
grids, LibreOffice itself (``soffice --headless --convert-to``, the slow tests) re-opening what was written,
zipfile and byte comparison of the entries and of every user ``<table:table>``, and XlsxWriter's own column-width
conversion.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
import shutil
import subprocess
import zipfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from python_calamine import CalamineWorkbook
from typer.testing import CliRunner

from leakbudget import api
from leakbudget.cli.app import app
from leakbudget.errors import WorkbookError, WriteBackError
from leakbudget.ods import package as ods_package
from leakbudget.ods.content import layout
from leakbudget.ods.guard import MAX_BOOK_CELLS, GuardedOds
from leakbudget.ods.package import write_ods
from leakbudget.ods.scan import fast_scan, parsed_scan
from leakbudget.ods.tables import number_format, width_inches
from leakbudget.xlsx.guard import MAX_COMPRESSION_RATIO, MAX_ZIP_ENTRIES
from leakbudget.xlsx.package import SheetData
from tests.robustness_cases import judge, run_child

DATA = Path(__file__).parent / "data"
TABLE_NS = "urn:oasis:names:tc:opendocument:xmlns:table:1.0"
NAMESPACES = (
    'xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" '
    f'xmlns:table="{TABLE_NS}" '
    'xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0" '
    'xmlns:calcext="urn:org:documentfoundation:names:experimental:calc:xmlns:calcext:1.0"'
)


def copy(tmp_path: Path, fixture: str, name: str | None = None) -> Path:
    return Path(shutil.copyfile(DATA / fixture, tmp_path / (name or fixture)))


def entries(path: Path) -> list[tuple[str, bytes]]:
    with zipfile.ZipFile(path) as archive:
        return [(info.filename, archive.read(info)) for info in archive.infolist()]


def user_tables(path: Path, ours: set[str] = frozenset()) -> list[tuple[str, bytes]]:
    """Every ``<table:table>`` of content.xml not named in ``ours``, as bytes, in order."""
    data = dict(entries(path))["content.xml"]
    return [(t.name, data[t.element.start : t.element.end]) for t in layout(data).tables if t.name not in set(ours)]


def with_content(source: Path, target: Path, edit, extra: dict[str, bytes] | None = None) -> Path:  # noqa: ANN001
    """Copy the .ods ``source`` to ``target`` with content.xml passed through ``edit`` (and entries added)."""
    with zipfile.ZipFile(source) as zin, zipfile.ZipFile(target, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            zout.writestr(info, edit(data) if info.filename == "content.xml" else data)
        for name, data in (extra or {}).items():
            zout.writestr(name, data)
    return target


def ods_bytes(
    tables: str, manifest: bool = True, media: str = "application/vnd.oasis.opendocument.spreadsheet"
) -> bytes:
    """A minimal .ods package holding ``tables`` (table:table elements), as a program other than LibreOffice
    might write it (ODF 1.2 Part 3: mimetype first and stored, a manifest, content.xml)."""
    content = (
        f'<?xml version="1.0" encoding="UTF-8"?><office:document-content {NAMESPACES} office:version="1.3">'
        f"<office:body><office:spreadsheet>{tables}</office:spreadsheet></office:body></office:document-content>"
    )
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr(zipfile.ZipInfo("mimetype"), media)
        if manifest:
            archive.writestr(
                "META-INF/manifest.xml",
                '<?xml version="1.0" encoding="UTF-8"?><manifest:manifest '
                'xmlns:manifest="urn:oasis:names:tc:opendocument:xmlns:manifest:1.0" manifest:version="1.3">'
                '<manifest:file-entry manifest:full-path="/" '
                'manifest:media-type="application/vnd.oasis.opendocument.spreadsheet"/></manifest:manifest>',
            )
        archive.writestr("content.xml", content)
    return buffer.getvalue()


def same_document(a: dict, b: dict, names: tuple[str, str]) -> None:
    """Two --json documents are equal once the workbooks' names, where results went and run times are taken out."""

    def clean(value):  # noqa: ANN001, ANN202
        if isinstance(value, dict):
            return {
                k: clean(v) for k, v in value.items() if k not in ("written_to", "backup") and not k.endswith("time_s")
            }
        return [clean(v) for v in value] if isinstance(value, list) else value

    assert json.dumps(clean(a)).replace(names[0], "WORKBOOK") == json.dumps(clean(b)).replace(names[1], "WORKBOOK")


# ------------------------------------------------------------------------------------------- reading


def test_the_fixture_is_libreoffices_conversion_of_the_demo() -> None:
    """LibreOffice's conversion keeps every cell: python-calamine reads the same grids from both files."""
    xlsx = CalamineWorkbook.from_path(str(DATA / "alder-quay.xlsx"))
    ods = CalamineWorkbook.from_path(str(DATA / "alder-quay.ods"))
    assert xlsx.sheet_names == ods.sheet_names
    for name in xlsx.sheet_names:
        assert xlsx.get_sheet_by_name(name).to_python() == ods.get_sheet_by_name(name).to_python()
    assert b"LibreOffice" in dict(entries(DATA / "alder-quay.ods"))["meta.xml"]


def test_check_review_and_split_of_the_ods_equal_those_of_the_xlsx(tmp_path: Path) -> None:
    """The same job read from LibreOffice's .ods and from the .xlsx it came from gives the same documents."""
    xlsx, ods = copy(tmp_path, "alder-quay.xlsx"), copy(tmp_path, "alder-quay.ods")
    names = (xlsx.name, ods.name)
    same_document(api.check(xlsx).document(), api.check(ods).document(), names)
    same_document(api.review(xlsx).document(), api.review(ods).document(), names)
    same_document(api.split(xlsx).document(), api.split(ods).document(), names)


def test_the_commands_accept_an_ods(tmp_path: Path) -> None:
    """check, review and split write their sheets into the .ods; report reads it; exit codes as for the .xlsx."""
    ods = copy(tmp_path, "alder-quay.ods", "job.ods")
    runner = CliRunner()
    expected = {
        "check": ("Circuit results", 1),  # the demo has circuits over budget (README, demo session)
        "review": ("Review findings", 0),  # warnings only, no error finding
        "split": ("Split plan", 0),
    }
    for command, (sheet, code) in expected.items():
        result = runner.invoke(app, [command, str(ods)])
        assert result.exit_code == code, result.output
        assert "written to" in result.output and re.sub(r"\s+", "", str(ods)) in re.sub(r"\s+", "", result.output)
        assert sheet in CalamineWorkbook.from_path(str(ods)).sheet_names
    report = tmp_path / "job.html"
    result = runner.invoke(app, ["report", str(ods), "--html", str(report)])
    assert result.exit_code == 0, result.output
    assert "K-CTR1" in report.read_text(encoding="utf-8")


@pytest.mark.parametrize(
    ("build", "message"),
    [
        (
            lambda p: p.write_bytes(b"Circuit,Device\nK1,gfci-a\n"),
            "this is a text file (comma-separated values, CSV), "
            "not an OpenDocument spreadsheet (.ods); open it in your spreadsheet program and save it as an OpenDocument "
            "spreadsheet (.ods).",
        ),
        (
            lambda p: shutil.copyfile(DATA / "alder-quay.xlsx", p),
            "this is an .xlsx workbook, not an OpenDocument spreadsheet (.ods); rename it to end in .xlsx",
        ),
        (
            lambda p: shutil.copyfile(DATA / "legacy.xls", p),
            "this is an Excel 97-2003 workbook (.xls), not an OpenDocument spreadsheet (.ods)",
        ),
        (lambda p: p.write_bytes(ods_bytes("")[:300]), "the file is cut short or damaged"),
        (lambda p: p.write_bytes(ods_bytes("", manifest=False)), "the package has no META-INF/manifest.xml"),
    ],
    ids=["csv", "xlsx", "xls", "truncated", "no-manifest"],
)
def test_what_is_not_an_ods_is_named(tmp_path: Path, build, message: str) -> None:  # noqa: ANN001
    path = tmp_path / "plan.ods"
    build(path)
    with pytest.raises(WorkbookError) as caught:
        GuardedOds(path)
    assert str(caught.value).startswith("plan.ods: " + message)


def test_an_ods_under_an_xlsx_name_is_told_to_be_renamed(tmp_path: Path) -> None:
    path = copy(tmp_path, "alder-quay.ods", "plan.xlsx")
    verdict = judge(
        path,
        expected="plan.xlsx: this is an OpenDocument spreadsheet (.ods), not an .xlsx workbook; "
        "rename it to end in .ods",
    )
    assert verdict.exit_code == 2 and verdict.problems == []


def _dtd(data: bytes) -> bytes:
    body = data.split(b"?>", 1)[1]
    lol = b'<!ENTITY lol0 "lol">' + b"".join(
        b'<!ENTITY lol%d "%s">' % (i, (b"&lol%d;" % (i - 1)) * 10) for i in range(1, 10)
    )
    body = body.replace(b"<text:p>Refrigerator</text:p>", b"<text:p>&lol9;</text:p>", 1)
    return b'<?xml version="1.0"?><!DOCTYPE office:document-content [' + lol + b"]>" + body


def _repeat_bomb(data: bytes) -> bytes:
    """A value cell repeated across 16384 columns in a row repeated 1 048 576 times, after the last Loads row:
    2^34 cells for calamine to allocate (about 550 GB)."""
    bomb = (
        b'<table:table-row table:number-rows-repeated="1048576"><table:table-cell table:number-columns-repeated='
        b'"16384" office:value-type="float" office:value="1"/></table:table-row>'
    )
    start = data.index(b'table:name="Loads"')
    end = data.index(b"</table:table>", start)
    return data[:end] + bomb + data[end:]


def _prefixed(data: bytes) -> bytes:
    """Every table element and attribute under the prefix t: (still the ODF table namespace)."""
    return re.sub(rb"(?<=[<\s/])table:", b"t:", data).replace(b"xmlns:table=", b"xmlns:t=")


def _encrypted_manifest(path: Path) -> None:
    def edit(data: bytes) -> bytes:
        return data

    with zipfile.ZipFile(DATA / "alder-quay.ods") as zin, zipfile.ZipFile(path, "w") as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == "META-INF/manifest.xml":
                data = data.replace(
                    b'manifest:full-path="content.xml" manifest:media-type="text/xml"/>',
                    b'manifest:full-path="content.xml" manifest:media-type="text/xml"><manifest:encryption-data '
                    b'manifest:checksum-type="SHA1/1K" manifest:checksum="AAAA"/></manifest:file-entry>',
                )
            zout.writestr(info, edit(data))


def _utf16(data: bytes) -> bytes:
    """content.xml re-encoded as UTF-16 (python-calamine then finds no sheet at all)."""
    return data.replace(b'encoding="UTF-8"', b'encoding="UTF-16"', 1).decode("utf-8").encode("utf-16")


def _zip_with(path: Path, names: dict[str, bytes]) -> None:
    with zipfile.ZipFile(DATA / "alder-quay.ods") as zin, zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            zout.writestr(info, zin.read(info))
        for name, data in names.items():
            zout.writestr(name, data)


def _declared_size(path: Path) -> None:
    """content.xml's central directory entry declares 2 GiB uncompressed (PKWARE APPNOTE 4.3.12)."""
    import struct

    shutil.copyfile(DATA / "alder-quay.ods", path)
    data = bytearray(path.read_bytes())
    header = data.rindex(b"PK\x01\x02", 0, data.rindex(b"content.xml"))
    struct.pack_into("<I", data, header + 24, 2**31)
    path.write_bytes(bytes(data))


BAD_ODS = [
    (
        "dtd",
        lambda p: with_content(DATA / "alder-quay.ods", p, _dtd),
        "its part content.xml declares a DTD or entities, which an .ods never needs",
    ),
    (
        "unusual-prefixes",
        lambda p: with_content(DATA / "alder-quay.ods", p, _prefixed),
        "its content.xml writes the OpenDocument table elements with the prefix 't:' instead of 'table:'",
    ),
    ("encrypted", _encrypted_manifest, "the spreadsheet is password-protected (encrypted)"),
    (
        "dotdot-name",
        lambda p: _zip_with(p, {"../../evil.txt": b"x"}),
        "refused to open the spreadsheet because entry '../../evil.txt' has an absolute name or a '..' segment",
    ),
    (
        "absolute-name",
        lambda p: _zip_with(p, {"/etc/evil": b"x"}),
        "refused to open the spreadsheet because entry '/etc/evil' has an absolute name or a '..' segment",
    ),
    (
        "ratio-bomb",
        lambda p: _zip_with(p, {"Pictures/pad.bin": bytes(20 << 20)}),
        "refused to open the spreadsheet "
        f"because entry Pictures/pad.bin is compressed more than {MAX_COMPRESSION_RATIO}:1",
    ),
    ("declared-size", _declared_size, "refused to open the spreadsheet because it unpacks to more than 1024 MiB"),
    (
        "many-entries",
        lambda p: _zip_with(p, {f"Pictures/{i}.png": b"" for i in range(MAX_ZIP_ENTRIES)}),
        f"refused to open the spreadsheet because it has {MAX_ZIP_ENTRIES + 15} zip entries (limit {MAX_ZIP_ENTRIES})",
    ),
    (
        "text-document",
        lambda p: p.write_bytes(ods_bytes("", media="application/vnd.oasis.opendocument.text")),
        "this is not an OpenDocument spreadsheet (its mimetype entry says 'application/vnd.oasis.opendocument.text')",
    ),
    (
        "bad-repeat",
        lambda p: p.write_bytes(
            ods_bytes(
                '<table:table table:name="Loads"><table:table-row table:number-rows-repeated="many"><table:table-cell/>'
                "</table:table-row></table:table>"
            )
        ),
        "its part content.xml is damaged",
    ),
    (
        "utf-16",
        lambda p: with_content(DATA / "alder-quay.ods", p, _utf16),
        "its part content.xml is damaged (it is not UTF-8 encoded)",
    ),
]


@pytest.mark.parametrize(("case", "build", "message"), BAD_ODS, ids=[c[0] for c in BAD_ODS])
def test_a_damaged_or_hostile_ods_is_refused_in_one_sentence(tmp_path: Path, case: str, build, message: str) -> None:  # noqa: ANN001
    """`check` answers exit code 2, one sentence naming the file, and leaves the file as it was (judge())."""
    path = tmp_path / "plan.ods"
    build(path)
    verdict = judge(path, expected=f"plan.ods: {message}")
    assert verdict.exit_code == 2, verdict.output
    assert verdict.problems == [], verdict.output


def test_a_repeat_bomb_is_refused_before_calamine_allocates_it(tmp_path: Path) -> None:
    """Run in a child process: were the guard to let it through, calamine would abort the process (no exception).
    The refusal comes quickly and with little memory."""
    path = with_content(DATA / "alder-quay.ods", tmp_path / "bomb.ods", _repeat_bomb)
    code, out, err, memory_kb = run_child("check", str(path))
    assert code == 2, out + err
    line = next(line for line in (out + err).splitlines() if line.startswith("Error:"))
    assert line.startswith("Error: bomb.ods, sheet 'Loads': its tables hold more than the 16,000,000 cells"), line
    assert memory_kb < 400_000


def _cut_after_a_row(data: bytes) -> bytes:
    return data[: data.index(b"</table:table-row>", data.index(b'table:name="Loads"')) + len(b"</table:table-row>")]


def _table_end_removed(data: bytes) -> bytes:
    at = data.rindex(b"</table:table>")
    return data[:at] + data[at + len(b"</table:table>") :]


@pytest.mark.parametrize(
    "damage",
    [_cut_after_a_row, lambda data: _cut_after_a_row(data) + b"\n  \n", _table_end_removed],
    ids=["cut after a row", "cut after a row, then blanks", "a table's end tag gone"],
)
def test_a_table_left_open_is_refused_before_calamine_reads_it(tmp_path: Path, damage) -> None:  # noqa: ANN001
    """python-calamine 0.9.1 reads a table until its end tag and loops for ever when the part ends first (found by
    the random-damage test: a content.xml cut short after a row end). The guard hands such a part to the XML
    parser, which names where it breaks. Run in a child process with a timeout, since a regression would hang."""
    path = with_content(DATA / "alder-quay.ods", tmp_path / "cut.ods", damage)
    code, out, err, _ = run_child("check", str(path), "--out", str(tmp_path / "out.ods"), timeout=60)
    assert code == 2, out + err
    line = next(line for line in (out + err).splitlines() if line.startswith("Error:"))
    assert line.startswith("Error: cut.ods: its part content.xml is damaged (content.xml:"), line
    assert not (tmp_path / "out.ods").exists()


def test_error_cells_and_formulas_without_results_are_reported_by_cell(tmp_path: Path) -> None:
    """A cell LibreOffice marks as an error (calcext:value-type="error", which calamine reads as empty text) and a
    formula with no saved result are named by cell, as for an .xlsx."""
    xlsx_job = CalamineWorkbook.from_path(str(DATA / "alder-quay.ods")).get_sheet_by_name("Loads").to_python()
    assert xlsx_job[1][0] == "Refrigerator" and xlsx_job[0][3] == "Quantity"

    def error_in_d2(data: bytes) -> bytes:
        start = data.index(b"<text:p>Refrigerator</text:p>")
        cell = data.index(b"<table:table-cell", data.index(b"<table:table-cell", start) + 1)
        cell = data.index(b"<table:table-cell", cell + 1)  # D2, Quantity
        end = data.index(b"</table:table-cell>", cell) + len(b"</table:table-cell>")
        return (
            data[:cell]
            + b'<table:table-cell table:formula="of:=1/0" office:value-type="string" office:string-value="" '
            b'calcext:value-type="error"><text:p>#DIV/0!</text:p></table:table-cell>' + data[end:]
        )

    path = with_content(DATA / "alder-quay.ods", tmp_path / "plan.ods", error_in_d2)
    with pytest.raises(WorkbookError) as caught:
        api.check(path)
    assert str(caught.value) == (
        "plan.ods, sheet 'Loads', row 2, column 'Quantity', cell D2: the cell shows the error #DIV/0!; correct the "
        "formula or the value it uses in your spreadsheet program and save."
    )
    path = with_content(
        DATA / "alder-quay.ods",
        tmp_path / "script.ods",
        lambda d: error_in_d2(d).replace(
            b'table:formula="of:=1/0" office:value-type="string" office:string-value="" calcext:value-type="error">'
            b"<text:p>#DIV/0!</text:p>",
            b'table:formula="of:=[.B7]*2">',
        ),
    )
    with pytest.raises(WorkbookError, match=re.escape("cell D2: the formula =B7*2 has no saved result")):
        api.check(path)


def test_a_number_merged_over_two_loads_is_refused(tmp_path: Path) -> None:
    """calamine lists no merged ranges for an .ods; the scan finds them, so the .xlsx rule applies."""

    def merge_d2_d3(data: bytes) -> bytes:
        start = data.index(b"<text:p>Refrigerator</text:p>")
        cell = data.index(b"<table:table-cell", start)
        cell = data.index(b"<table:table-cell", cell + 1)
        cell = data.index(b"<table:table-cell", cell + 1)  # D2
        return (
            data[: cell + len(b"<table:table-cell")]
            + b' table:number-rows-spanned="2"'
            + data[cell + len(b"<table:table-cell") :]
        )

    path = with_content(DATA / "alder-quay.ods", tmp_path / "plan.ods", merge_d2_d3)
    with pytest.raises(WorkbookError, match=re.escape("cell D2: the cells D2:D3 are merged")):
        api.check(path)


# Cell forms for the scan property: what a spreadsheet program or a script may write in one row.
CELL_FORMS = [
    '<table:table-cell office:value-type="float" office:value="1"><text:p>1</text:p></table:table-cell>',
    "<table:table-cell/>",
    '<table:table-cell table:number-columns-repeated="{n}"/>',
    '<table:table-cell table:number-columns-repeated="{n}" office:value-type="float" office:value="2"/>',
    '<table:table-cell office:value-type="string"><text:p>x y</text:p></table:table-cell>',
    '<table:table-cell table:formula="of:=1/0" office:value-type="string" office:string-value="" '
    'calcext:value-type="error"><text:p>#DIV/0!</text:p></table:table-cell>',
    '<table:table-cell table:formula="of:=1+{n}"/>',
    '<table:covered-table-cell table:number-columns-repeated="{n}"/>',
    '<table:table-cell table:number-columns-spanned="{n}" office:value-type="string"><text:p>m</text:p>'
    "</table:table-cell>",
    "<table:table-cell\n  office:value-type='float' office:value='3'/>",
]
ROW_FORMS = [
    "<table:table-row>{cells}</table:table-row>",
    '<table:table-row table:number-rows-repeated="{n}">{cells}</table:table-row>',
    '<table:table-row table:style-name="ro1">{cells}</table:table-row >',
]


@settings(max_examples=150, deadline=None)
@given(
    rows=st.lists(
        st.tuples(
            st.integers(0, len(ROW_FORMS) - 1),
            st.integers(1, 4),
            st.lists(st.tuples(st.integers(0, len(CELL_FORMS) - 1), st.integers(1, 5)), max_size=6),
        ),
        max_size=8,
    ),
    comment=st.booleans(),
)
def test_fast_and_parsed_scans_agree_with_calamines_grid(rows, comment: bool) -> None:  # noqa: ANN001
    """Both scans find the rectangle python-calamine builds (to_python(skip_empty_area=False), from A1) or a larger
    one, and the same noted cells; the fast scan declines (None) a part with a comment."""
    xml = "".join(
        ROW_FORMS[form].format(n=n, cells="".join(CELL_FORMS[c].format(n=k) for c, k in cells) or "<table:table-cell/>")
        for form, n, cells in rows
    )
    tables = f'<table:table table:name="S">{xml}</table:table>' + ("<!-- a note -->" if comment else "")
    data = ods_bytes(tables)
    with zipfile.ZipFile(io.BytesIO(data)) as archive:
        fast = fast_scan(archive.open("content.xml"), MAX_BOOK_CELLS)
        parsed = parsed_scan(archive.open("content.xml"), MAX_BOOK_CELLS)
    assert (fast is None) == comment
    grid = CalamineWorkbook.from_filelike(io.BytesIO(data)).get_sheet_by_name("S").to_python(skip_empty_area=False)
    width = max((len(row) for row in grid), default=0)
    for scan in [parsed[0]] + ([fast[0]] if fast else []):
        if any(value != "" for row in grid for value in row):
            assert scan.rows >= len(grid) and scan.columns >= width
        assert scan.notes() == parsed[0].notes() and scan.merged == parsed[0].merged
    for (r, c), note in parsed[0].notes().items():
        if r < len(grid) and c < len(grid[r]):
            assert grid[r][c] in ("", 0.0), note  # what calamine makes of those cells, and why they are noted


def test_scans_of_libreoffices_files_match_calamines_grids() -> None:
    """For every table of both fixtures, the fast scan counts exactly calamine's grid (LibreOffice writes no
    stray values) and the parsed scan agrees."""
    for fixture in ("alder-quay.ods", "libreoffice.ods"):
        book = CalamineWorkbook.from_path(str(DATA / fixture))
        with zipfile.ZipFile(DATA / fixture) as archive:
            fast = fast_scan(archive.open("content.xml"), MAX_BOOK_CELLS)
            parsed = parsed_scan(archive.open("content.xml"), MAX_BOOK_CELLS)
        assert fast is not None
        for a, b in zip(fast, parsed):
            grid = book.get_sheet_by_name(a.name).to_python(skip_empty_area=False)
            assert (a.rows, a.columns) == (len(grid), max(map(len, grid))) == (b.rows, b.columns), a.name
            assert a.merged == b.merged
    with zipfile.ZipFile(DATA / "libreoffice.ods") as archive:
        merged = {t.name: t.merged for t in fast_scan(archive.open("content.xml"), MAX_BOOK_CELLS) or []}
    assert merged["Circuits"] == [((0, 0), (0, 4))]  # "Panel P1, 14 Alder Row" over A1:E1 (make_fixtures.py)


# ------------------------------------------------------------------------------------------- writing


def result_sheets() -> list[SheetData]:
    rows = [
        ["K1", 0.85, 1.8, 0.4722, True, "within budget"],
        ["K2", 1.4, 1.8, 0.7778, False, "=1+2"],
        ["B1", 2.25, None, float("nan"), None, "  two  spaces\tand a tab"],
        ["B2", float("inf"), 12, 1.0, True, "line one\nline two"],
    ]
    return [
        SheetData(
            "Circuit results",
            ["circuit", "leakage_ma", "budget_ma", "share", "fixed", "note"],
            rows,
            number_formats={1: "0.000", 2: "0.00", 3: "0.0%"},
            column_widths={0: 14, 5: 30},
        ),
        SheetData("Load results", ["load", "leakage_ma"], [["Dishwasher", 0.75], ["Kettle", 3]]),
    ]


def test_every_user_table_and_every_other_entry_is_kept_byte_for_byte(tmp_path: Path) -> None:
    """LibreOffice's panel (formulas, comments, merged cells, a chart object, an image): after the write every
    user table is byte-identical and in order, every other entry too; mimetype is first and stored."""
    path = copy(tmp_path, "libreoffice.ods")
    before = entries(path)
    tables_before = user_tables(path)
    written = write_ods(path, result_sheets())
    assert written.added == ("Circuit results", "Load results") and written.replaced == ()
    after = entries(path)
    assert user_tables(path, {"Circuit results", "Load results"}) == tables_before
    assert [n for n, _ in after] == [n for n, _ in before]
    assert [(n, d) for n, d in after if n != "content.xml"] == [(n, d) for n, d in before if n != "content.xml"]
    with zipfile.ZipFile(path) as archive:
        first = archive.infolist()[0]
        assert first.filename == "mimetype" and first.compress_type == zipfile.ZIP_STORED and first.extra == b""
    assert written.backup is not None and written.backup.read_bytes() == (DATA / "libreoffice.ods").read_bytes()
    book = CalamineWorkbook.from_path(str(path))
    assert book.sheet_names == ["Circuits", "Loads", "Circuit results", "Load results"]
    grid = book.get_sheet_by_name("Circuit results").to_python()
    assert grid[0] == ["circuit", "leakage_ma", "budget_ma", "share", "fixed", "note"]
    assert grid[1] == ["K1", 0.85, 1.8, 0.4722, True, "within budget"]
    assert grid[2][5] == "=1+2"  # text stays text
    assert grid[3][:4] == ["B1", 2.25, "", ""]  # None and NaN: empty cells
    assert grid[4][1] == "inf"  # as the .xlsx writer writes it
    assert grid[4][5] == "line one\nline two"
    old = dict(before)["content.xml"]
    new = dict(after)["content.xml"]
    assert new.startswith(old[: old.index(b"<office:automatic-styles>")])  # only additions before the styles


def test_a_second_run_replaces_its_tables_in_place_and_writes_the_same_bytes(tmp_path: Path) -> None:
    path = copy(tmp_path, "libreoffice.ods")
    write_ods(path, result_sheets())
    first = dict(entries(path))["content.xml"]
    again = write_ods(path, result_sheets())
    assert again.replaced == ("Circuit results", "Load results") and again.added == ()
    assert dict(entries(path))["content.xml"] == first  # old styles removed, the same names given again
    fewer = write_ods(path, result_sheets()[:1])
    assert fewer.replaced == ("Circuit results",)
    assert CalamineWorkbook.from_path(str(path)).sheet_names == ["Circuits", "Loads", "Circuit results", "Load results"]


def test_a_users_table_with_a_result_sheets_name_is_never_replaced(tmp_path: Path) -> None:
    path = copy(tmp_path, "libreoffice.ods")
    renamed = with_content(
        path, tmp_path / "mine.ods", lambda d: d.replace(b'table:name="Loads"', b'table:name="Load results"')
    )
    before = renamed.read_bytes()
    with pytest.raises(WriteBackError) as caught:
        write_ods(renamed, result_sheets())
    assert str(caught.value) == (
        "mine.ods: sheet 'Load results' has the name of a result sheet but is not one leakbudget wrote (its first "
        "cell has no note from leakbudget, and its first row is not that sheet's header or it holds formulas); "
        "nothing was written; rename that sheet and run again."
    )
    assert renamed.read_bytes() == before


def test_a_result_sheet_without_the_note_is_replaced_only_with_its_exact_header_and_no_formula(tmp_path: Path) -> None:
    """A result sheet the .xlsx writer made (no note), saved as .ods by a spreadsheet program: taken as the tool's
    when its first row is exactly the header and it holds no formula; with a formula typed into it, refused."""
    header = "".join(
        f'<table:table-cell office:value-type="string"><text:p>{h}</text:p></table:table-cell>'
        for h in ["load", "leakage_ma"]
    )
    row = (
        '<table:table-row><table:table-cell office:value-type="string"><text:p>Kettle</text:p></table:table-cell>'
        '<table:table-cell {formula}office:value-type="float" office:value="0.1"/></table:table-row>'
    )
    for formula, replaced in (("", True), ('table:formula="of:=0.05*2" ', False)):
        table = (
            f'<table:table table:name="Load results"><table:table-row>{header}<table:table-cell '
            f'table:number-columns-repeated="1000"/></table:table-row>{row.format(formula=formula)}</table:table>'
        )
        path = tmp_path / f"converted-{replaced}.ods"
        path.write_bytes(
            ods_bytes(
                '<table:table table:name="Notes"><table:table-row><table:table-cell/>'
                "</table:table-row></table:table>" + table
            )
        )
        if replaced:
            assert write_ods(path, result_sheets()[1:]).replaced == ("Load results",)
            grid = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("Load results").to_python()
            assert grid[1:] == [["Dishwasher", 0.75], ["Kettle", 3.0]]
        else:
            with pytest.raises(WriteBackError, match="is not one leakbudget wrote"):
                write_ods(path, result_sheets()[1:])


def test_the_check_before_writing_refuses_a_changed_user_table(tmp_path: Path, monkeypatch) -> None:  # noqa: ANN001
    """Were a splice to touch a user table (a bug), the runtime check refuses and nothing is written."""
    path = copy(tmp_path, "libreoffice.ods")
    before = path.read_bytes()
    original = ods_package._Plan.content

    def touching(self, old, progress):  # noqa: ANN001, ANN202
        return original(self, old, progress).replace(b"<text:p>Laundry</text:p>", b"<text:p>Laundr</text:p>", 1)

    monkeypatch.setattr(ods_package._Plan, "content", touching)
    with pytest.raises(WriteBackError, match="sheet 'Circuits' would change"):
        write_ods(path, result_sheets())
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["libreoffice.ods"]


def test_out_leaves_the_source_untouched_and_must_be_an_ods(tmp_path: Path) -> None:
    path = copy(tmp_path, "alder-quay.ods", "job.ods")
    before = path.read_bytes()
    job = api.check(path, out=tmp_path / "checked.ods")
    assert path.read_bytes() == before and job.written is not None and job.written.backup is None
    assert "Circuit results" in CalamineWorkbook.from_path(str(tmp_path / "checked.ods")).sheet_names
    with pytest.raises(WriteBackError, match=re.escape("give --out a name ending in .ods")):
        api.check(path, out=tmp_path / "checked.xlsx")
    with pytest.raises(WriteBackError, match=re.escape("give --out a name ending in .xlsx")):
        api.check(copy(tmp_path, "alder-quay.xlsx"), out=tmp_path / "checked2.ods")


def test_a_lock_file_stops_the_write(tmp_path: Path) -> None:
    path = copy(tmp_path, "alder-quay.ods", "job.ods")
    (tmp_path / ".~lock.job.ods#").write_text("someone,host")
    with pytest.raises(WriteBackError, match="the file is open in a spreadsheet program"):
        api.check(path, write=True)


def test_a_signed_document_is_not_written(tmp_path: Path) -> None:
    """Changing content.xml breaks a document signature (ODF 1.2 Part 3 §5), so the write is refused."""
    path = tmp_path / "signed.ods"
    _zip_with(path, {"META-INF/documentsignatures.xml": b"<document-signatures/>"})
    with pytest.raises(WriteBackError, match="the document is digitally signed"):
        write_ods(path, result_sheets())


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    texts=st.lists(st.text(st.characters(exclude_characters="\t"), max_size=30), min_size=1, max_size=8),
    numbers=st.lists(st.floats(allow_nan=False, allow_infinity=False, width=64), min_size=1, max_size=8),
)
def test_any_text_and_number_round_trips(tmp_path: Path, texts: list[str], numbers: list[float]) -> None:
    """python-calamine reads back what was written: text exactly (characters XML 1.0 cannot hold as U+FFFD;
    calamine drops <text:tab/>, so tabs are left to the LibreOffice test), numbers to the bit."""
    path = tmp_path / "round.ods"
    shutil.copyfile(DATA / "alder-quay.ods", path)
    rows = [[t, n] for t, n in zip(texts, numbers)]
    (tmp_path / "out.ods").unlink(missing_ok=True)  # hypothesis runs this body many times in one folder
    write_ods(path, [SheetData("Round", ["text", "number"], rows)], out=tmp_path / "out.ods")
    grid = CalamineWorkbook.from_path(str(tmp_path / "out.ods")).get_sheet_by_name("Round").to_python()
    invalid = re.compile("[\x00-\x08\x0b-\x1f\ud800-\udfff\ufffe\uffff]")  # XML 1.0 §2.2 Char, minus tab and LF
    for (text, number), row in zip(rows, grid[1:]):
        assert row[0] == invalid.sub("\ufffd", text)
        if abs(number) <= 9.99999999999999e307:
            assert row[1] == number and math.copysign(1, row[1]) == math.copysign(1, number)


def test_every_number_format_of_the_result_sheets_is_translated(tmp_path: Path) -> None:
    """The codes the check, review and split sheets use all become ODF number styles (none falls back)."""
    from leakbudget.output.check import result_sheets as check_sheets
    from leakbudget.output.review import findings_sheet
    from leakbudget.output.split import split_sheet

    path = copy(tmp_path, "alder-quay.xlsx")
    sheets = [
        *check_sheets(api.check(path).result),
        findings_sheet(api.review(path).review),
        split_sheet(api.split(path).plan),
    ]
    codes = {code for sheet in sheets for code in sheet.number_formats.values()}
    assert codes and all(number_format(code) is not None for code in codes), codes
    assert number_format("0.000").shown(2.0803) == "2.080" and number_format("0.0%").shown(0.4722) == "47.2%"


@pytest.mark.parametrize("characters", [0.5, 1, 8.43, 14, 30, 75.5])
def test_column_widths_follow_xlsxwriters_conversion(characters: float) -> None:
    """XlsxWriter's own pixel width of a column (its reference conversion), at 96 px per inch."""
    import xlsxwriter

    book = xlsxwriter.Workbook(io.BytesIO(), {"in_memory": True})
    sheet = book.add_worksheet()
    sheet.set_column(0, 0, characters)
    pixels = sheet._size_col(0)
    book.close()
    assert width_inches(characters) * 96 == pytest.approx(pixels)


# ------------------------------------------------------------------------------------------- LibreOffice itself


@pytest.fixture(scope="module")
def soffice_profile(tmp_path_factory) -> Path:  # noqa: ANN001
    if shutil.which("soffice") is None:
        pytest.fail("LibreOffice (soffice) is needed: apt-get install libreoffice-calc-nogui (.ci/run does)")
    return tmp_path_factory.mktemp("soffice-profile")


def soffice(profile: Path, source: Path, kind: str, outdir: Path) -> None:
    outdir.mkdir(exist_ok=True, parents=True)
    subprocess.run(
        [
            "soffice",
            "--headless",
            f"-env:UserInstallation={profile.as_uri()}",
            "--convert-to",
            kind,
            "--outdir",
            str(outdir),
            str(source),
        ],
        check=True,
        capture_output=True,
        timeout=180,
    )


def libreoffice_csv(profile: Path, path: Path, sheet: str) -> list[list[str]]:
    """LibreOffice exports every sheet of ``path`` as CSV, cells as shown (CSV filter options: comma, quote,
    UTF-8, from line 1, ..., "save cell contents as shown" true, sheet -1 = all sheets, one file each)."""
    outdir = path.parent / f"{path.stem}-csv"
    soffice(profile, path, "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,true,false,false,-1", outdir)
    with open(outdir / f"{path.stem}-{sheet}.csv", newline="", encoding="utf-8") as handle:
        return list(csv.reader(handle))


@pytest.mark.slow
def test_libreoffice_reads_the_result_sheets_as_written(tmp_path: Path, soffice_profile: Path) -> None:
    """LibreOffice opens the written file and shows each cell in its format: 0.000, 0.00, 0.0 %, TRUE/FALSE, the
    spaces and the line break of the texts. A tab is written as <text:tab/>, as LibreOffice writes one itself, and
    LibreOffice shows it as nothing (its own .xlsx -> .ods -> CSV conversion of a cell holding a tab drops it too)."""
    path = copy(tmp_path, "libreoffice.ods", "panel.ods")
    write_ods(path, result_sheets())
    rows = libreoffice_csv(soffice_profile, path, "Circuit results")
    assert rows[0] == ["circuit", "leakage_ma", "budget_ma", "share", "fixed", "note"]
    assert rows[1] == ["K1", "0.850", "1.80", "47.2%", "TRUE", "within budget"]
    assert rows[2] == ["K2", "1.400", "1.80", "77.8%", "FALSE", "=1+2"]
    assert rows[3] == ["B1", "2.250", "", "", "", "  two  spacesand a tab"]
    assert rows[4] == ["B2", "inf", "12.00", "100.0%", "TRUE", "line one\nline two"]
    assert libreoffice_csv(soffice_profile, path, "Load results")[1:] == [["Dishwasher", "0.75"], ["Kettle", "3"]]
    assert libreoffice_csv(soffice_profile, path, "Circuits")[2][:2] == ["K1", "Kitchen, 14 Alder Row"]


@pytest.mark.slow
def test_after_libreoffice_saves_it_the_next_run_still_finds_its_tables(tmp_path: Path, soffice_profile: Path) -> None:
    """LibreOffice re-saves the checked file (renaming styles, rewriting every table); the next check recognises
    its result tables by their first cell's note and replaces them, and keeps every user table byte-identical."""
    path = copy(tmp_path, "alder-quay.ods", "job.ods")
    api.check(path, write=True)
    soffice(soffice_profile, path, "ods", tmp_path / "saved")
    saved = tmp_path / "saved" / "job.ods"
    ours = {"Circuit results", "Load results", "Reading results"}
    tables_before = user_tables(saved, ours)
    job = api.check(saved, write=True)
    assert job.written is not None and set(job.written.replaced) == ours and job.written.added == ()
    assert user_tables(saved, ours) == tables_before
    names = CalamineWorkbook.from_path(str(saved)).sheet_names
    assert names == [
        "About",
        "Circuits",
        "Loads",
        "Settings",
        "Readings",
        *sorted(ours, key=["Circuit results", "Load results", "Reading results"].index),
    ]


@pytest.mark.slow
def test_a_fresh_libreoffice_conversion_of_the_demo_checks_like_the_xlsx(tmp_path: Path, soffice_profile: Path) -> None:
    """Converting the shipped demo now (not the committed fixture) gives the same check as the demo itself."""
    demo = Path(shutil.copyfile(api.example_path(), tmp_path / "demo.xlsx"))
    soffice(soffice_profile, demo, "ods", tmp_path)
    same_document(api.check(demo).document(), api.check(tmp_path / "demo.ods").document(), ("demo.xlsx", "demo.ods"))


@pytest.mark.parametrize(
    "styles", ["", "<office:automatic-styles/>", "<office:automatic-styles></office:automatic-styles>"]
)
def test_a_package_from_another_program_gets_its_styles_part_and_namespaces(tmp_path: Path, styles: str) -> None:
    """A content.xml without automatic styles, or with an empty element, and without the style:, fo:, number: and
    dc: prefixes on its root (as a script might write it): the styles element is made or filled, the namespaces
    are declared on the new elements, the user table is kept byte for byte, and calamine reads the result."""
    user = (
        '<table:table table:name="Notes"><table:table-row><table:table-cell office:value-type="string">'
        "<text:p>kept as is</text:p></table:table-cell></table:table-row></table:table>"
    )
    data = ods_bytes(user).replace(b"<office:body>", styles.encode() + b"<office:body>")
    path = tmp_path / "script.ods"
    path.write_bytes(data)
    write_ods(path, result_sheets())
    assert user_tables(path, {"Circuit results", "Load results"}) == [("Notes", user.encode())]
    book = CalamineWorkbook.from_path(str(path))
    assert book.sheet_names == ["Notes", "Circuit results", "Load results"]
    assert book.get_sheet_by_name("Circuit results").to_python()[1][:2] == ["K1", 0.85]
    content = dict(entries(path))["content.xml"]
    assert content.count(b"<office:automatic-styles") == 1 and b'xmlns:number="' in content
    write_ods(path, result_sheets())  # and the next run recognises its tables there too
    assert CalamineWorkbook.from_path(str(path)).sheet_names == ["Notes", "Circuit results", "Load results"]


@pytest.mark.slow
def test_results_written_into_an_xlsx_then_saved_as_ods_are_replaced(tmp_path: Path, soffice_profile: Path) -> None:
    """The user checks the .xlsx, then saves it as .ods in LibreOffice: the next check of the .ods replaces the
    result sheets the .xlsx writer made (their first rows are exactly the headers) instead of refusing them."""
    xlsx = copy(tmp_path, "alder-quay.xlsx", "job.xlsx")
    api.check(xlsx, write=True)
    soffice(soffice_profile, xlsx, "ods", tmp_path / "saved")
    ods = tmp_path / "saved" / "job.ods"
    ours = {"Circuit results", "Load results", "Reading results"}
    tables_before = user_tables(ods, ours)
    job = api.check(ods, write=True)
    assert job.written is not None and set(job.written.replaced) == ours and job.written.added == ()
    assert user_tables(ods, ours) == tables_before
    assert len(CalamineWorkbook.from_path(str(ods)).sheet_names) == 8


@pytest.mark.slow
@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seed=st.integers(0, 2**32 - 1), damages=st.integers(1, 3))
def test_random_damage_to_content_xml_gets_exit_0_1_or_2_and_keeps_the_input(
    tmp_path: Path, seed: int, damages: int
) -> None:
    """content.xml of LibreOffice's demo .ods damaged at random (bytes flipped, cut, duplicated; a tag repeated):
    `check --out` exits 0, 1 or 2, prints no traceback, one sentence naming the file on 2, leaves the input as it
    was, and on 0 or 1 keeps every table of the input byte for byte in the output."""
    import random

    rng = random.Random(seed)

    def damage(data: bytes) -> bytes:
        for _ in range(damages):
            at = rng.randrange(len(data))
            kind = rng.randrange(4)
            if kind == 0:
                data = data[:at] + bytes([rng.randrange(256)]) + data[at + 1 :]
            elif kind == 1:
                data = data[:at]
            elif kind == 2:
                data = data[:at] + data[at : at + rng.randrange(1, 400)] + data[at:]
            else:
                tag = data.find(b"<table:table-cell", at)
                end = data.find(b">", tag) + 1
                data = data[:end] + data[tag:end] * rng.randrange(1, 4) + data[end:] if tag >= 0 else data
        return data

    import tempfile

    folder = Path(tempfile.mkdtemp(prefix=f"case-{seed}-{damages}-", dir=tmp_path))
    path = with_content(DATA / "alder-quay.ods", folder / "plan.ods", damage)
    before = path.read_bytes()
    result = CliRunner().invoke(app, ["check", str(path), "--out", str(folder / "out.ods")])
    assert result.exit_code in (0, 1, 2), result.output
    assert "Traceback" not in result.output and not isinstance(result.exception, (TypeError, KeyError, IndexError))
    assert path.read_bytes() == before
    if result.exit_code == 2:  # one sentence (a damaged cell's text may hold a line break), naming the file
        errors = [line for line in result.output.splitlines() if line.startswith("Error: ")]
        assert len(errors) == 1 and errors[0].startswith("Error: plan.ods"), result.output
    else:
        ours = {"Circuit results", "Load results", "Reading results"}
        assert user_tables(folder / "out.ods", ours) == user_tables(path, ours)
