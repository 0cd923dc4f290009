"""Tests of leakbudget.xlsx.package: results written into real LibreOffice and Gnumeric workbooks.

The fixtures in tests/data/ are the programs' own output (tests/data/make_fixtures.py says how they were made).
Independent references: python-calamine reads the cells back, Gnumeric's ssconvert re-opens the written files
(cells and charts), zipfile/difflib compare the parts byte by byte, and ECMA-376 Part 1 §18.8 (styles) is followed by
hand to check that a cell's style index leads to the intended number format and font.
"""

from __future__ import annotations

import csv
import difflib
import gzip
import math
import os
import random
import re
import shutil
import signal
import stat
import struct
import subprocess
import sys
import time
import zipfile
from io import BytesIO
from pathlib import Path

import defusedxml.ElementTree as DET
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from python_calamine import CalamineWorkbook

from leakbudget.errors import WriteBackError
from leakbudget.xlsx import files
from leakbudget.xlsx import package as xlsx_package
from leakbudget.xlsx.package import (
    MAX_COMPRESSION_RATIO,
    MAX_UNCOMPRESSED_BYTES,
    MAX_ZIP_ENTRIES,
    ChartSpec,
    SheetData,
    write_sheets,
)
from leakbudget.xlsx.rows import EXCEL_MAX_NUMBER

DATA = Path(__file__).parent / "data"
FIXTURES = ["libreoffice", "gnumeric", "libreoffice_extension"]
REGISTRATION = {"[Content_Types].xml", "xl/workbook.xml", "xl/_rels/workbook.xml.rels", "xl/styles.xml"}
MAIN = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
GNUMERIC = "{http://www.gnumeric.org/v10.dtd}"
CIRCUIT_ROWS = [
    ["K1", 0.85, 1.8, "within budget"],
    ["K2", 1.4, 1.8, "=1+2"],
    ["B1", 2.25, 1.8, "over budget"],
]


def circuit_sheet(rows=CIRCUIT_ROWS, chart: bool = True, name: str = "Circuit results") -> SheetData:
    return SheetData(
        name,
        ["circuit", "leakage_ma", "budget_ma", "note"],
        rows,
        number_formats={1: "0.000", 2: "0.00"},
        column_widths={0: 14, 3: 30},
        chart=ChartSpec("Standing leakage per circuit", 0, (1, 2), anchor="F2") if chart else None,
    )


def load_sheet() -> SheetData:
    rows = [["Dishwasher", 0.75, True], ["Kettle", 0.1, False]]
    return SheetData("Load results", ["load", "leakage_ma", "fixed"], rows)


def copy_fixture(tmp_path: Path, name: str) -> Path:
    target = tmp_path / f"{name}.xlsx"
    shutil.copyfile(DATA / f"{name}.xlsx", target)
    return target


def entries(path: Path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as archive:
        return {info.filename: archive.read(info) for info in archive.infolist()}


def cells(path: Path) -> dict[str, list[list]]:
    book = CalamineWorkbook.from_path(str(path))
    return {name: book.get_sheet_by_name(name).to_python() for name in book.sheet_names}


def assert_only_additions(old: bytes, new: bytes) -> None:
    """``new`` is ``old`` with text inserted, plus count attributes changed to other numbers."""
    matcher = difflib.SequenceMatcher(None, old, new, autojunk=False)
    for op, a0, a1, b0, b1 in matcher.get_opcodes():
        if op == "insert" or op == "equal":
            continue
        assert op == "replace" and old[a0:a1].isdigit() and new[b0:b1].isdigit(), (op, old[a0 - 40 : a1 + 40])


def real_program_csv(path: Path, sheet: str) -> list[list[str]]:
    """Gnumeric's ssconvert exports every sheet of ``path``; return the rows of ``sheet`` (blank rows dropped)."""
    outdir = path.parent / f"{path.stem}-csv"
    outdir.mkdir(exist_ok=True)
    subprocess.run(
        ["ssconvert", "-S", str(path), str(outdir / "out.%s.csv")], check=True, capture_output=True, timeout=60
    )
    with open(outdir / f"out.{sheet}.csv", newline="", encoding="utf-8") as handle:
        rows = [row for row in csv.reader(handle) if any(row)]
    width = max(len(row) - next((i for i, c in enumerate(reversed(row)) if c), len(row)) for row in rows)
    return [row[:width] for row in rows]


@pytest.fixture(params=FIXTURES)
def workbook(request, tmp_path: Path) -> Path:
    return copy_fixture(tmp_path, request.param)


# ------------------------------------------------------------------------------------------- the user's data


def test_every_other_part_is_byte_identical_and_in_order(workbook: Path) -> None:
    before = entries(workbook)
    result = write_sheets(workbook, [circuit_sheet(), load_sheet()])
    after = entries(workbook)
    assert result.added == ("Circuit results", "Load results") and result.replaced == ()
    for name, data in before.items():
        if name not in REGISTRATION:
            assert after[name] == data, name
    assert [n for n in after if n in before] == list(before)  # same entry order
    added = [n for n in after if n not in before]
    assert added and all(Path(n).name.startswith("leakbudget_") for n in added), added
    for name in REGISTRATION:  # registration parts: insertions (and new counts) only, never a re-serialisation
        assert_only_additions(before[name], after[name])


def test_original_cells_formulas_and_names_survive(workbook: Path) -> None:
    before = cells(workbook)
    workbook_xml = entries(workbook)["xl/workbook.xml"]
    write_sheets(workbook, [circuit_sheet(), load_sheet()])
    after = cells(workbook)
    assert {k: after[k] for k in before} == before
    # The fixture's totals row holds formulas; their cached values must still equal the sums of the rows above
    # (arithmetic done here, independently of the spreadsheet program that cached them).
    circuits = after["Circuits"]
    data_rows = circuits[2:7]
    assert circuits[7][3] == pytest.approx(sum(r[3] for r in data_rows))
    assert circuits[7][4] == pytest.approx(sum(r[4] for r in data_rows))
    assert circuits[7][2] == sum(1 for r in data_rows if r[2] > 16)
    names = re.search(rb"<definedNames>.*</definedNames>", workbook_xml, re.S)
    assert names is not None and b"localSheetId" in names.group(0)
    # every name of the user's stays byte for byte (the result sheets' print titles are added after them)
    user_names = re.findall(rb"<definedName .*?</definedName>", names.group(0), re.S)
    written = entries(workbook)["xl/workbook.xml"]
    assert user_names and all(n in written for n in user_names)
    assert written.index(user_names[-1]) < written.index(b"_xlnm.Print_Titles")


def test_unknown_extension_parts_survive(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "libreoffice_extension")
    before = entries(path)
    write_sheets(path, [circuit_sheet()])
    after = entries(path)
    assert after["customXml/item1.xml"] == before["customXml/item1.xml"]
    assert b"urn:example:leakbudget-fixture" in after["xl/worksheets/sheet1.xml"]
    assert b'PartName="/customXml/itemProps1.xml"' in after["[Content_Types].xml"]


# ------------------------------------------------------------------------------------------- the result sheets


def test_result_sheets_read_back_with_calamine(workbook: Path) -> None:
    rows = CIRCUIT_ROWS + [["G1", float("nan"), float("inf"), None]]
    write_sheets(workbook, [circuit_sheet(rows), load_sheet()])
    got = cells(workbook)
    assert list(got)[-2:] == ["Circuit results", "Load results"]
    assert got["Circuit results"] == [
        ["circuit", "leakage_ma", "budget_ma", "note"],
        *CIRCUIT_ROWS,
        ["G1", "", "inf", ""],  # NaN is left blank, inf written as text (both are invalid as XML numbers)
    ]
    assert got["Load results"] == [["load", "leakage_ma", "fixed"], ["Dishwasher", 0.75, True], ["Kettle", 0.1, False]]


def test_cell_style_indices_lead_to_the_intended_formats(workbook: Path) -> None:
    """Follow ECMA-376 Part 1 §18.8: c/@s -> cellXfs/xf -> numFmtId -> numFmts/numFmt/@formatCode, and -> fonts."""
    write_sheets(workbook, [circuit_sheet()])
    parts = entries(workbook)
    styles = DET.fromstring(parts["xl/styles.xml"])
    xfs = styles.find(f"{MAIN}cellXfs").findall(f"{MAIN}xf")
    fonts = styles.find(f"{MAIN}fonts").findall(f"{MAIN}font")
    codes = {int(f.get("numFmtId")): f.get("formatCode") for f in styles.iter(f"{MAIN}numFmt")}
    sheet = DET.fromstring(parts["xl/worksheets/leakbudget_sheet1.xml"])
    by_ref = {c.get("r"): c for c in sheet.iter(f"{MAIN}c")}

    def xf(ref: str):
        return xfs[int(by_ref[ref].get("s", "0"))]

    assert codes[int(xf("B2").get("numFmtId"))] == "0.000"
    assert codes.get(int(xf("C2").get("numFmtId")), "0.00") == "0.00"  # custom, or built-in id 2 (§18.8, numFmt)
    assert fonts[int(xf("A1").get("fontId"))].find(f"{MAIN}b") is not None  # bold header
    assert sheet.find(f"{MAIN}sheetViews/{MAIN}sheetView/{MAIN}pane").get("state") == "frozen"
    assert sheet.find(f"{MAIN}sheetViews/{MAIN}sheetView").get("tabSelected") is None  # no tab grouping


INJECTION = [
    "=1+2",
    "+A1",
    "-2+3",
    "@SUM(A1:A2)",
    '=HYPERLINK("http://example.invalid","x")',
    "<r>x</r>",
    "<r></t></is></c></row></r>",
    "=cmd|' /C calc'!A0",
]


def test_formula_injection_text_stays_text(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "gnumeric")
    write_sheets(path, [SheetData("Notes", ["note"], [[t] for t in INJECTION])])
    assert [r[0] for r in cells(path)["Notes"][1:]] == INJECTION
    sheet_xml = entries(path)["xl/worksheets/leakbudget_sheet1.xml"]
    assert b"<f>" not in sheet_xml and b"<f " not in sheet_xml
    assert [r[0] for r in real_program_csv(path, "Notes")[1:]] == INJECTION


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    texts=st.lists(st.text(max_size=40), min_size=1, max_size=12),
    numbers=st.lists(st.floats(allow_nan=True, allow_infinity=True), min_size=1, max_size=12),
)
def test_any_text_and_float_round_trips(tmp_path: Path, texts: list[str], numbers: list[float]) -> None:
    path = tmp_path / "prop.xlsx"
    shutil.copyfile(DATA / "gnumeric.xlsx", path)
    out = tmp_path / "prop-out.xlsx"
    out.unlink(missing_ok=True)  # hypothesis runs this body many times in one folder
    write_sheets(
        path,
        [SheetData("P", ["text"], [[t] for t in texts]), SheetData("Q", ["number"], [[x] for x in numbers])],
        out=out,
    )
    got = cells(out)
    # XML 1.0 §2.2 excludes the noncharacters U+FFFE and U+FFFF: they are written as U+FFFD
    expected_texts = [t.replace("\ufffe", "\ufffd").replace("\uffff", "\ufffd") for t in texts]
    assert [r[0] for r in got["P"][1:]] + [""] * (len(texts) + 1 - len(got["P"])) == expected_texts
    # XlsxWriter writes numbers with 16 significant digits (format ".16G"), hence rel=1e-15
    expected = [
        "" if math.isnan(x) else (repr(x) if abs(x) > EXCEL_MAX_NUMBER else pytest.approx(x, rel=1e-15))
        for x in numbers
    ]
    column = [r[0] for r in got["Q"][1:]]
    assert column + [""] * (len(expected) - len(column)) == expected


def test_real_program_reads_the_result_sheets(workbook: Path) -> None:
    write_sheets(workbook, [circuit_sheet(), load_sheet()])
    rows = real_program_csv(workbook, "Circuit results")
    assert rows[0] == ["circuit", "leakage_ma", "budget_ma", "note"]
    assert [[r[0], float(r[1]), float(r[2]), r[3]] for r in rows[1:]] == CIRCUIT_ROWS
    assert real_program_csv(workbook, "Circuits")[1][:2] == ["Circuit", "Room"]  # and the user's sheet still reads


def test_real_program_opens_the_file_and_finds_both_charts(tmp_path: Path) -> None:
    """Gnumeric converts the written file to its own format; both charts must be there, with their ranges."""
    path = copy_fixture(tmp_path, "libreoffice_extension")
    write_sheets(path, [circuit_sheet(), load_sheet()])
    chart = entries(path)["xl/charts/leakbudget_chart1.xml"]
    assert b"<c:barChart>" in chart and b"'Circuit results'!$B$2:$B$4" in chart
    native = tmp_path / "resaved.gnumeric"
    subprocess.run(["ssconvert", str(path), str(native)], check=True, capture_output=True, timeout=60)
    ranges: dict[str, set[str]] = {}  # sheet -> cell ranges its charts plot, as Gnumeric understood them
    for sheet in DET.fromstring(gzip.decompress(native.read_bytes())).iter(f"{GNUMERIC}Sheet"):
        name = sheet.find(f"{GNUMERIC}Name").text
        for graph in sheet.iter(f"{GNUMERIC}SheetObjectGraph"):
            ranges.setdefault(name, set()).update(e.text for e in graph.iter() if e.tag.endswith("dimension"))
    assert {"'Circuit results'!$A$2:$A$4", "'Circuit results'!$B$2:$B$4", "'Circuit results'!$C$2:$C$4"} <= (
        ranges["Circuit results"]
    )
    assert "Circuits!$E$3:$E$7" in ranges["Circuits"]  # the user's chart is still there


def rewrite_parts(source: Path, target: Path, edit) -> None:  # noqa: ANN001
    """Copy a package entry by entry, passing each (name, bytes) through ``edit`` (None drops the entry)."""
    with zipfile.ZipFile(source) as zin, zipfile.ZipFile(target, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = edit(info.filename, zin.read(info))
            if data is not None:
                zout.writestr(info, data)


def test_a_prefixed_main_namespace_is_followed(tmp_path: Path) -> None:
    """Some generators write <x:workbook xmlns:x="…main">; appended elements must carry the same prefix."""
    main = MAIN.strip("{}").encode()

    def prefixed(name: str, data: bytes) -> bytes:
        if name not in ("xl/workbook.xml", "xl/styles.xml"):
            return data
        data = data.replace(b'xmlns="' + main + b'"', b'xmlns:x="' + main + b'"')
        return re.sub(rb"<(/?)([A-Za-z][\w.-]*)(?=[\s/>])", rb"<\1x:\2", data)

    path = tmp_path / "prefixed.xlsx"
    rewrite_parts(DATA / "gnumeric.xlsx", path, prefixed)
    write_sheets(path, [circuit_sheet()])
    parts = entries(path)
    assert b'<x:sheet name="Circuit results"' in parts["xl/workbook.xml"]
    assert b'<x:numFmt numFmtId="164" formatCode="0.00"/>' in parts["xl/styles.xml"]  # Gnumeric's ids end at 102
    assert re.search(rb"<x:xf [^>]*numFmtId=", parts["xl/styles.xml"].split(b"<x:cellXfs")[1])
    assert not re.search(rb"<(font|xf|numFmt|border)\b", parts["xl/styles.xml"])  # nothing unprefixed appended
    assert cells(path)["Circuit results"][1:] == CIRCUIT_ROWS
    assert real_program_csv(path, "Circuit results")[1][0] == "K1"


def test_a_workbook_without_a_styles_part_gets_one(tmp_path: Path) -> None:
    def without_styles(name: str, data: bytes) -> bytes | None:
        if name == "xl/styles.xml":
            return None
        if name in ("xl/_rels/workbook.xml.rels", "[Content_Types].xml"):
            return re.sub(rb"<(Relationship|Override)[^>]*styles[^>]*/>", b"", data)
        return data

    path = tmp_path / "plain.xlsx"
    rewrite_parts(DATA / "gnumeric.xlsx", path, without_styles)
    write_sheets(path, [circuit_sheet()])
    parts = entries(path)
    assert "xl/leakbudget_styles1.xml" in parts and b"leakbudget_styles1.xml" in parts["xl/_rels/workbook.xml.rels"]
    assert cells(path)["Circuit results"][1:] == CIRCUIT_ROWS
    assert real_program_csv(path, "Circuit results")[3][:2] == ["B1", "2.25"]


# ------------------------------------------------------------------------------------------- repeated runs


def test_second_and_third_runs_replace_in_place(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "libreoffice")
    write_sheets(path, [circuit_sheet(), load_sheet()])
    first = entries(path)
    second_result = write_sheets(path, [circuit_sheet(), load_sheet()])
    second = entries(path)
    write_sheets(path, [circuit_sheet(), load_sheet()])
    third = entries(path)
    assert second_result.replaced == ("Circuit results", "Load results") and second_result.added == ()
    assert list(cells(path)) == ["Circuits", "Loads", "Circuit results", "Load results"]
    for name in REGISTRATION:  # identical entries are re-used: nothing grows
        assert first[name] == second[name] == third[name], name
    assert list(first) == list(second) == list(third)
    for name in first:
        assert first[name] == second[name] == third[name], name


def test_replacing_keeps_entry_position_and_relationship_id(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "gnumeric")
    write_sheets(path, [circuit_sheet()])
    write_sheets(path, [SheetData("Later sheet", ["x"], [[1]])])  # something after the result sheet
    entry = re.search(rb"<sheet name=\"Circuit results\"[^>]*/>", entries(path)["xl/workbook.xml"]).group(0)
    result = write_sheets(path, [circuit_sheet(CIRCUIT_ROWS[:1], chart=False, name="CIRCUIT RESULTS")])
    assert result.replaced == ("Circuit results",)  # matched ignoring case; the file's name is kept
    assert list(cells(path)) == ["Circuits", "Loads", "Circuit results", "Later sheet"]
    parts = entries(path)
    assert entry in parts["xl/workbook.xml"]
    assert cells(path)["Circuit results"] == [["circuit", "leakage_ma", "budget_ma", "note"], CIRCUIT_ROWS[0]]
    # the chart of the previous run went with it, parts and content types alike
    assert not [n for n in parts if "leakbudget_chart" in n or "leakbudget_drawing" in n]
    assert b"leakbudget_chart" not in parts["[Content_Types].xml"]
    write_sheets(path, [circuit_sheet()])
    assert "xl/charts/leakbudget_chart1.xml" in entries(path)  # freed names are used again


def test_a_users_sheet_with_formulas_is_not_replaced(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "libreoffice")
    before = path.read_bytes()
    with pytest.raises(WriteBackError, match=r"libreoffice.xlsx: sheet 'Circuits' holds formulas"):
        write_sheets(path, [circuit_sheet(name="circuits")])
    assert path.read_bytes() == before


# ------------------------------------------------------------------------------------------- files and safety


def test_out_leaves_the_source_untouched(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "libreoffice")
    os.utime(path, ns=(1_600_000_000_000_000_000, 1_600_000_000_000_000_000))
    before, before_stat = path.read_bytes(), path.stat()
    out = tmp_path / "copy.xlsx"
    result = write_sheets(path, [circuit_sheet()], out=out)
    assert result.path == out and result.backup is None
    assert path.read_bytes() == before and path.stat().st_mtime_ns == before_stat.st_mtime_ns
    assert not list(tmp_path.glob("*before-leakbudget*"))
    assert "Circuit results" in cells(out)


def test_backup_keeps_the_previous_version_and_mode_is_kept(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "gnumeric")
    path.chmod(0o640)
    original = path.read_bytes()
    result = write_sheets(path, [circuit_sheet()])
    assert result.backup == tmp_path / "gnumeric.before-leakbudget.xlsx"
    assert result.backup.read_bytes() == original
    first = path.read_bytes()
    second = write_sheets(path, [circuit_sheet(CIRCUIT_ROWS[:2])])
    # the version before the first write is never replaced; the next ones are numbered
    assert result.backup.read_bytes() == original
    assert second.backup == tmp_path / "gnumeric.before-leakbudget-2.xlsx" and second.backup.read_bytes() == first
    assert stat.S_IMODE(path.stat().st_mode) == 0o640
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "gnumeric.before-leakbudget-2.xlsx",
        "gnumeric.before-leakbudget.xlsx",
        "gnumeric.xlsx",
    ]
    # at most BACKUP_GENERATIONS numbered ones: no version between the newest of them and now is lost
    versions = [path.read_bytes()]
    for k in range(files.BACKUP_GENERATIONS + 2):
        write_sheets(path, [circuit_sheet(CIRCUIT_ROWS[: 1 + k % 3])])
        versions.append(path.read_bytes())
    numbered = sorted(tmp_path.glob("gnumeric.before-leakbudget-*.xlsx"), key=lambda q: int(q.stem.rsplit("-", 1)[1]))
    assert len(numbered) == files.BACKUP_GENERATIONS
    assert [q.read_bytes() for q in numbered] == versions[-files.BACKUP_GENERATIONS - 1 : -1]
    assert result.backup.read_bytes() == original


def test_a_version_saved_meanwhile_is_neither_overwritten_nor_backed_up(tmp_path: Path, monkeypatch) -> None:
    path = copy_fixture(tmp_path, "gnumeric")
    render = xlsx_package._render

    def render_while_the_user_saves(sheets):  # noqa: ANN001, ANN202
        saved = tmp_path / "save.tmp"  # spreadsheet programs save to a new file and rename it over the old one
        shutil.copyfile(DATA / "libreoffice.xlsx", saved)
        os.replace(saved, path)
        return render(sheets)

    monkeypatch.setattr(xlsx_package, "_render", render_while_the_user_saves)
    with pytest.raises(WriteBackError, match=r"gnumeric.xlsx: the file changed while leakbudget was writing"):
        write_sheets(path, [circuit_sheet()])
    assert path.read_bytes() == (DATA / "libreoffice.xlsx").read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["gnumeric.xlsx"]


@pytest.mark.parametrize("lock", [".~lock.{name}#", "~${name}"])  # LibreOffice, Excel
def test_refuses_while_a_spreadsheet_program_has_the_file_open(tmp_path: Path, lock: str) -> None:
    path = copy_fixture(tmp_path, "libreoffice")
    (tmp_path / lock.format(name=path.name)).write_text("locked")
    before = path.read_bytes()
    with pytest.raises(WriteBackError, match=r"libreoffice.xlsx: the file is open in a spreadsheet program"):
        write_sheets(path, [circuit_sheet()])
    assert path.read_bytes() == before


def test_refuses_what_is_not_an_xlsx_workbook(tmp_path: Path) -> None:
    text = tmp_path / "notes.xlsx"
    text.write_text("circuit,leakage\nK1,0.5\n")
    with pytest.raises(WriteBackError, match=r"notes.xlsx: not an .xlsx workbook"):
        write_sheets(text, [circuit_sheet()])
    other = tmp_path / "other.xlsx"
    with zipfile.ZipFile(other, "w") as archive:
        archive.writestr("[Content_Types].xml", "<Types/>")
    with pytest.raises(WriteBackError, match=r"other.xlsx: not an .xlsx workbook \(it has no xl/workbook.xml\)"):
        write_sheets(other, [circuit_sheet()])


def test_refuses_an_unwritable_folder(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "gnumeric")
    # sysfs does not let anybody, root included, create files in it
    with pytest.raises(WriteBackError, match=r"/sys: cannot create a file in this folder"):
        write_sheets(path, [circuit_sheet()], out=Path("/sys/results.xlsx"))


def replace_part(path: Path, part: str, data: bytes) -> None:
    parts = entries(path)
    parts[part] = data
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, content in parts.items():
            archive.writestr(name, content)


def test_entity_expansion_bomb_is_refused_fast(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "libreoffice")
    lol = ['<!ENTITY lol0 "lol">'] + [f'<!ENTITY lol{i} "{("&lol" + str(i - 1) + ";") * 10}">' for i in range(1, 10)]
    bomb = (
        '<?xml version="1.0"?><!DOCTYPE workbook [' + "".join(lol) + "]><workbook "
        'xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheets>&lol9;</sheets></workbook>'
    )
    replace_part(path, "xl/workbook.xml", bomb.encode())
    before = path.read_bytes()
    start = time.perf_counter()
    with pytest.raises(WriteBackError, match=r"libreoffice.xlsx: part xl/workbook.xml declares a DTD or entities"):
        write_sheets(path, [circuit_sheet()])
    assert time.perf_counter() - start < 0.5  # 10**9 expansions were never attempted
    assert path.read_bytes() == before


def test_compression_ratio_bomb_is_refused(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "gnumeric")
    with zipfile.ZipFile(path, "a", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("xl/media/padding.bin", bytes(20 << 20))  # 20 MiB of zeros deflate about 1000:1
    with pytest.raises(WriteBackError, match=rf"padding.bin is compressed more than {MAX_COMPRESSION_RATIO}:1"):
        write_sheets(path, [circuit_sheet()])


def test_declared_size_bomb_is_refused(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "gnumeric")
    data = bytearray(path.read_bytes())
    name = b"xl/styles.xml"
    header = data.rindex(b"PK\x01\x02", 0, data.rindex(name))  # its central directory record (APPNOTE 4.3.12)
    struct.pack_into("<I", data, header + 24, MAX_UNCOMPRESSED_BYTES + 1)  # "uncompressed size" field
    path.write_bytes(bytes(data))
    with pytest.raises(WriteBackError, match=r"gnumeric.xlsx: refused to open the workbook because it unpacks to"):
        write_sheets(path, [circuit_sheet()])


def test_too_many_entries_is_refused(tmp_path: Path) -> None:
    path = copy_fixture(tmp_path, "gnumeric")
    with zipfile.ZipFile(path, "a") as archive:
        for i in range(MAX_ZIP_ENTRIES):
            archive.writestr(f"x/{i}", b"")
    with pytest.raises(WriteBackError, match=rf"zip entries \(limit {MAX_ZIP_ENTRIES}\)"):
        write_sheets(path, [circuit_sheet()])


CHILD = """
import sys
from pathlib import Path
from leakbudget.xlsx.package import SheetData, write_sheets
rows = [[f"C{i}", i * 0.001, 1.8, "a note of some length", i] for i in range(int(sys.argv[2]))]
sheet = SheetData("Circuit results", ["circuit", "leakage_ma", "budget_ma", "note", "n"], rows, {1: "0.000"})
print("writing", flush=True)
write_sheets(Path(sys.argv[1]), [sheet])
print("done", flush=True)
"""


@pytest.mark.slow
def test_killed_or_interrupted_write_leaves_the_original(tmp_path: Path) -> None:
    """SIGKILL at three moments and SIGINT once, to parallel children each writing a 500 000-row sheet (seconds)."""
    plans = [(signal.SIGKILL, 0.05), (signal.SIGKILL, 0.4), (signal.SIGKILL, 0.8), (signal.SIGINT, 0.4)]
    original = (DATA / "libreoffice.xlsx").read_bytes()
    folders = []
    children = []
    for i, _ in enumerate(plans):
        folder = tmp_path / f"run{i}"
        folder.mkdir()
        shutil.copyfile(DATA / "libreoffice.xlsx", folder / "panel.xlsx")
        folders.append(folder)
        children.append(
            subprocess.Popen(
                [sys.executable, "-c", CHILD, str(folder / "panel.xlsx"), "500000"],
                stdout=subprocess.PIPE,
                stderr=subprocess.PIPE,
                cwd=Path(__file__).parent.parent,
            )
        )
    for child in children:
        assert child.stdout.readline() == b"writing\n"
    started = time.monotonic()
    for (sig, delay), child in sorted(zip(plans, children), key=lambda pc: pc[0][1]):
        time.sleep(max(0.0, started + delay - time.monotonic()))
        child.send_signal(sig)
    for (sig, _), child, folder in zip(plans, children, folders):
        out, _ = child.communicate(timeout=30)
        assert b"done" not in out, "the write finished before the signal; make the sheet larger"
        assert (folder / "panel.xlsx").read_bytes() == original
        leftovers = [p.name for p in folder.iterdir() if p.name != "panel.xlsx"]
        if sig == signal.SIGINT:
            assert leftovers == [], leftovers  # the interrupted run cleaned up after itself
        else:
            assert all(".leakbudget-" in name and name.endswith(".tmp") for name in leftovers), leftovers
    # the next run removes what a killed run left, and succeeds
    for folder in folders:
        write_sheets(folder / "panel.xlsx", [load_sheet()])
        assert sorted(p.name for p in folder.iterdir()) == ["panel.before-leakbudget.xlsx", "panel.xlsx"]
        assert (folder / "panel.before-leakbudget.xlsx").read_bytes() == original


def test_chart_plots_its_data_rows_in_the_colours_given(tmp_path: Path) -> None:
    """Notes under the table are not plotted; series fills follow ChartSpec.colours
    (ECMA-376 Part 1 §21.2.2: c:ser/c:spPr/a:solidFill/a:srgbClr)."""
    rows = [*CIRCUIT_ROWS, [None, None, None, None], ["Written by a test; replaced on every run.", None, None, None]]
    sheet = SheetData(
        "Circuit results",
        ["circuit", "leakage_ma", "budget_ma", "note"],
        rows,
        chart=ChartSpec("Leakage", 0, (1, 2), data_rows=3, colours=("#2f6f8f", "#e0a100")),
    )
    path = write_sheets(copy_fixture(tmp_path, "libreoffice"), [sheet]).path
    chart = DET.fromstring(entries(path)["xl/charts/leakbudget_chart1.xml"])
    ns = {
        "c": "http://schemas.openxmlformats.org/drawingml/2006/chart",
        "a": "http://schemas.openxmlformats.org/drawingml/2006/main",
    }
    refs = [f.text for f in chart.iter(f"{{{ns['c']}}}f")]
    assert refs == [
        "'Circuit results'!$B$1",
        "'Circuit results'!$A$2:$A$4",
        "'Circuit results'!$B$2:$B$4",
        "'Circuit results'!$C$1",
        "'Circuit results'!$A$2:$A$4",
        "'Circuit results'!$C$2:$C$4",
    ]
    fills = [c.get("val") for c in chart.iterfind(".//c:ser/c:spPr/a:solidFill/a:srgbClr", ns)]
    assert fills == ["2F6F8F", "E0A100"]


@pytest.mark.parametrize(
    "value", ["Circuit results", "a \"quoted\" & <tagged> 'name'", "tab\there\nnew\rline", "Küche ✓"]
)
def test_quoteattr_matches_the_standard_library(value):
    # Reference: xml.sax.saxutils.quoteattr (the standard library's attribute quoting).
    import xml.etree.ElementTree as ET
    from xml.sax.saxutils import quoteattr as reference

    from leakbudget.xlsx.xml_text import quoteattr

    ours = quoteattr(value)
    assert ET.fromstring(f"<a v={ours}/>").get("v") == ET.fromstring(f"<a v={reference(value)}/>").get("v") == value


def test_result_sheets_print_landscape_fitted_to_the_page_width(tmp_path: Path) -> None:
    # ECMA-376 Part 1 §18.3.1.63 pageSetup (orientation, fitToWidth/fitToHeight) and §18.3.1.65 pageSetUpPr
    # fitToPage: the sheet prints landscape, one page wide, as many pages long as needed, its header frozen
    path = copy_fixture(tmp_path, "gnumeric")
    write_sheets(path, [circuit_sheet()])
    with zipfile.ZipFile(path) as archive:
        workbook = archive.read("xl/workbook.xml").decode()
        rels = archive.read("xl/_rels/workbook.xml.rels").decode()
        rid = re.search(r'<sheet [^>]*name="Circuit results"[^>]*r:id="([^"]+)"', workbook)
        assert rid is not None
        rel = next(r for r in re.findall(r"<Relationship [^>]*>", rels) if f'Id="{rid.group(1)}"' in r)
        target = re.search(r'Target="([^"]+)"', rel)
        assert target is not None
        ours = archive.read("xl/" + target.group(1).lstrip("/").removeprefix("xl/"))
    assert b'orientation="landscape"' in ours and b'fitToHeight="0"' in ours and b'fitToPage="1"' in ours
    assert b'state="frozen"' in ours


def test_result_sheets_repeat_their_header_row_on_printed_pages(tmp_path: Path) -> None:
    # ECMA-376 Part 1 §18.2.6: the built-in name _xlnm.Print_Titles, scoped to the sheet (localSheetId), repeats
    # row 1 on every printed page; a second run adds no second one; Gnumeric still opens the file
    path = copy_fixture(tmp_path, "gnumeric")
    for _ in range(2):
        write_sheets(path, [circuit_sheet()])
    with zipfile.ZipFile(path) as archive:
        workbook = archive.read("xl/workbook.xml").decode()
    names = re.findall(r'<sheet [^>]*name="([^"]+)"', workbook)
    titles = re.findall(r'<definedName name="_xlnm.Print_Titles" localSheetId="(\d+)">([^<]*)</definedName>', workbook)
    assert titles == [(str(names.index("Circuit results")), "'Circuit results'!$1:$1")]
    done = subprocess.run(["ssconvert", str(path), str(tmp_path / "out.csv")], capture_output=True)
    assert done.returncode == 0


# ------------------------------------------------------------------------- unchanged entries, copied as they are


def _raw(path: Path, name: str) -> tuple[zipfile.ZipInfo, bytes]:
    """An entry's central directory record and its compressed bytes, found through its local header
    (APPNOTE.TXT 4.3.7: 30 bytes, the name and the extra field, then the data)."""
    with zipfile.ZipFile(path) as archive, open(path, "rb") as handle:
        info = archive.getinfo(name)
        handle.seek(info.header_offset)
        header = handle.read(30)
        assert header[:4] == b"PK\x03\x04"
        name_length, extra_length = struct.unpack("<HH", header[26:30])
        handle.seek(info.header_offset + 30 + name_length + extra_length)
        return info, handle.read(info.compress_size)


class _Unseekable:
    """A write-only stream: zipfile then puts sizes and CRC-32 in data descriptors (flag bit 3, APPNOTE 4.3.9)."""

    def __init__(self) -> None:
        self.data = bytearray()

    def write(self, b: bytes) -> int:
        self.data += b
        return len(b)

    def flush(self) -> None:
        pass


def _repacked(tmp_path: Path, shape: str) -> Path:
    """The Gnumeric fixture with three parts added (a few MB, one stored), packed in the given shape."""
    random_bytes = random.Random(7).randbytes(1 << 20)
    extra = {
        "xl/media/big.bin": random_bytes + bytes(range(256)) * 8192,  # 3 MiB, half incompressible
        "xl/media/stored.bin": random_bytes * 2,
        "customXml/item9.xml": b"<x>" + b"same words again " * 50_000 + b"</x>",
    }
    with zipfile.ZipFile(DATA / "gnumeric.xlsx") as source:
        parts = [(info, source.read(info)) for info in source.infolist()]
    parts += [(zipfile.ZipInfo(name, (2024, 5, 6, 7, 8, 10)), data) for name, data in extra.items()]
    target = tmp_path / f"{shape}.xlsx"
    sink: _Unseekable | BytesIO = _Unseekable() if shape == "descriptors" else BytesIO()
    # deflate level 1, where ours is 6: a part deflated again would not have the same compressed bytes
    with zipfile.ZipFile(sink, "w", zipfile.ZIP_DEFLATED, compresslevel=1) as archive:  # type: ignore[arg-type]
        for info, data in parts:
            if shape == "zip64":  # ZIP64 extra fields in the local headers (APPNOTE.TXT 4.5.3)
                with archive.open(info.filename, "w", force_zip64=True) as handle:
                    handle.write(data)
                continue
            entry = zipfile.ZipInfo(info.filename, info.date_time)
            entry.compress_type = zipfile.ZIP_STORED if info.filename.endswith("stored.bin") else zipfile.ZIP_DEFLATED
            if shape == "bzip2" and info.filename.endswith("item9.xml"):
                entry.compress_type = zipfile.ZIP_BZIP2  # a method copied the slow way (inflated, compressed again)
            archive.writestr(entry, data, compresslevel=1)
    data = bytes(sink.data) if isinstance(sink, _Unseekable) else sink.getvalue()
    target.write_bytes(b"MZ self-extractor stub " * 100 + data if shape == "prefixed" else data)
    return target


@pytest.mark.parametrize("shape", ["deflated", "descriptors", "zip64", "prefixed", "bzip2"])
def test_unchanged_entries_are_copied_compressed_as_they_are(tmp_path: Path, shape: str) -> None:
    """An entry the write leaves alone keeps its compressed bytes, method and CRC-32 (APPNOTE.TXT: its sizes now in
    the local header, no data descriptor); zipfile's own check and calamine read the result, cells unchanged."""
    path = _repacked(tmp_path, shape)
    before = entries(path)
    if shape == "descriptors":
        assert all(info.flag_bits & 0x08 for info in zipfile.ZipFile(path).infolist())
    old = {name: _raw(path, name) for name in before if name not in REGISTRATION}
    original_cells = cells(path)
    write_sheets(path, [circuit_sheet(), load_sheet()])
    with zipfile.ZipFile(path) as archive:
        assert archive.testzip() is None
    after = entries(path)
    for name, (info, raw) in old.items():
        assert after[name] == before[name], name
        new_info, new_raw = _raw(path, name)
        assert new_info.compress_type == info.compress_type and new_info.CRC == info.CRC, name
        assert not new_info.flag_bits & 0x08, name
        if info.compress_type != zipfile.ZIP_BZIP2:
            assert new_raw == raw, name  # copied, not compressed again
    got = cells(path)
    assert {name: got[name] for name in original_cells} == original_cells
    assert got["Circuit results"][1:] == CIRCUIT_ROWS


def test_a_real_program_opens_a_package_whose_entries_were_copied_as_they_are(tmp_path: Path) -> None:
    """Gnumeric reads the user's sheet and ours from a package written from data-descriptor entries."""
    path = _repacked(tmp_path, "descriptors")
    expected = real_program_csv(path, "Circuits")
    write_sheets(path, [circuit_sheet()])
    assert real_program_csv(path, "Circuits") == expected
    rows = real_program_csv(path, "Circuit results")
    assert [[r[0], float(r[1]), float(r[2]), r[3]] for r in rows[1:]] == CIRCUIT_ROWS


def test_a_damaged_unchanged_entry_is_refused_not_copied(tmp_path: Path) -> None:
    """A stored entry whose bytes no longer match its CRC-32 (APPNOTE.TXT 4.4.7): the write refuses, as zipfile
    refuses to read it, and the workbook stays as it was."""
    path = _repacked(tmp_path, "deflated")
    info, raw = _raw(path, "xl/media/stored.bin")
    data = bytearray(path.read_bytes())
    start = data.index(raw)
    data[start + 1000] ^= 0xFF
    path.write_bytes(bytes(data))
    with pytest.raises(WriteBackError, match=r"deflated.xlsx: the workbook's zip package is damaged .*Bad CRC-32"):
        write_sheets(path, [circuit_sheet()])
    assert path.read_bytes() == bytes(data)
