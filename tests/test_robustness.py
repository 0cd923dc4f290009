"""Real, messy and hostile workbooks: each bad input gets one sentence naming file, sheet and cell, exit code 2,
no traceback, and the file untouched; odd but valid input is read as the user sees it; nothing from a cell is
ever opened; random damage never gets past the rules.

Independent references named beside each check: python-calamine (the reader's own library, used directly),
libmagic's `file` (compound-file classifier), openpyxl and XlsxWriter (independent writers), LibreOffice (the
.xls fixtures, tests/data/make_robustness_fixtures.py), ECMA-376 Part 1 18.3.1.4 and 18.18.11 (cell types),
[MS-CFB]/[MS-OFFCRYPTO] (encrypted packages), Python's audit hooks (PEP 578) for every file opened.
"""

from __future__ import annotations

import functools
import json
import os
import random
import re
import subprocess
import sys
import tempfile
import time
import unicodedata
import zipfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from python_calamine import CalamineWorkbook, PasswordError
from typer.testing import CliRunner

from leakbudget.cli.app import app
from leakbudget.errors import WorkbookError
from leakbudget.workbook.read import read_project
from leakbudget.xlsx import guard as package_guard
from leakbudget.xlsx.guard import MAX_SHEET_CELLS, GuardedPackage, _fast_scan, _parsed_scan
from tests.conftest import basic_sheets, write_workbook
from tests.robustness_cases import (
    BAD_INPUTS,
    DATA,
    damaged_workbook,
    entity_bomb,
    far_cell,
    judge,
    lock_file_cases,
    million_formatted_rows,
    parts,
    run_child,
    with_part,
)

runner = CliRunner()

# ------------------------------------------------------------------------------------------- every bad input


@pytest.mark.parametrize("case", BAD_INPUTS, ids=[c.id for c in BAD_INPUTS])
def test_bad_input_gets_one_sentence_exit_2_and_the_file_untouched(tmp_path: Path, case) -> None:  # noqa: ANN001
    path = case.build(tmp_path)
    verdict = judge(path, expected=case.message)  # written in place when accepted, so "untouched" is earned
    assert verdict.exit_code == 2, verdict.output
    assert verdict.problems == []


def test_the_xls_fixtures_are_what_they_claim() -> None:
    """python-calamine's BIFF reader opens legacy.xls with the rows it was made from and calls password.xls
    password-protected; libmagic classifies encrypted.xlsx as an encrypted compound file (its CDF parser reads the
    directory written by make_robustness_fixtures.py)."""
    legacy = CalamineWorkbook.from_path(str(DATA / "legacy.xls"))
    assert legacy.sheet_names == ["Circuits", "Loads"]
    assert legacy.get_sheet_by_name("Loads").to_python()[2] == ["Meter", "E1", "0.75 mA"]
    with pytest.raises(PasswordError):
        CalamineWorkbook.from_path(str(DATA / "password.xls"))
    kind = subprocess.run(["file", "-b", str(DATA / "encrypted.xlsx")], capture_output=True, text=True, check=True)
    assert kind.stdout.strip() == "CDFV2 Encrypted"


@pytest.mark.parametrize(
    ("head", "kind"),
    [
        ("\ufeffCircuit;Device\r\nK1;gfci-a\r\n".encode("utf-8"), "comma-separated values, CSV"),
        ("Circuit\tDevice\nK1\tgfci-a\n".encode("utf-16"), "tab-separated values"),
        (b'<?xml version="1.0"?><Workbook xmlns="urn:schemas-microsoft-com:office:spreadsheet"/>', "XML or HTML"),
        (b"<html><table><tr><td>K1</td></tr></table></html>", "XML or HTML"),
    ],
    ids=["csv-with-bom", "utf16-tsv", "spreadsheet-2003-xml", "html-table"],
)
def test_text_files_are_named_for_what_they_are(tmp_path: Path, head: bytes, kind: str) -> None:
    path = tmp_path / "plan.xlsx"
    path.write_bytes(head)
    with pytest.raises(WorkbookError, match=re.escape(f"plan.xlsx: this is a text file ({kind}), not an .xlsx")):
        read_project(path)


# ------------------------------------------------------------------------------------------- hostile packages


def test_entity_bomb_in_a_sheet_is_refused_fast_and_calamine_alone_would_not_expand_it(tmp_path: Path) -> None:
    path = with_part(entity_bomb(b"worksheet"))(tmp_path)
    start = time.perf_counter()
    with pytest.raises(WorkbookError, match="part xl/worksheets/sheet2.xml declares a DTD or entities"):
        read_project(path)
    assert time.perf_counter() - start < 1.0  # 10**9 expansions were never attempted
    # Without the guard: calamine's XML reader stops at the first entity it does not know, at once.
    book = CalamineWorkbook.from_path(str(path))
    start = time.perf_counter()
    with pytest.raises(Exception, match="unrecognized entity"):
        book.get_sheet_by_name("Loads").to_python()
    assert time.perf_counter() - start < 1.0


def test_a_far_cell_is_refused_before_calamine_allocates_it(tmp_path: Path) -> None:
    """A 6 kB file with one value at XFD1048576 would make calamine allocate 2**34 cells (about 550 GB) and abort
    the process. The child process must answer with one sentence and stay small."""
    path = with_part(far_cell())(tmp_path)
    assert path.stat().st_size < 10_000
    code, _out, err, memory_kb = run_child("check", str(path), "--no-write")
    assert code == 2
    assert err.startswith("Error: plan.xlsx, sheet 'Loads': its cells reach row 1,048,576 and column XFD")
    assert "Traceback" not in err and memory_kb < 300_000


def test_the_cell_limit_counts_the_grid_from_a1(tmp_path: Path, monkeypatch) -> None:  # noqa: ANN001
    """calamine's grid (to_python) runs from A1 to the last row and column holding a value; 25 rows x 9 columns
    of the Loads sheet below are 225 cells: allowed at a limit of 225, refused at 224."""
    path = with_part(lambda d: d.replace(b"</sheetData>", b'<row r="25"><c r="I25"><v>7</v></c></row></sheetData>'))(
        tmp_path
    )
    grid = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("Loads").to_python(skip_empty_area=False)
    assert (len(grid), len(grid[0])) == (25, 9)
    guard = GuardedPackage(path)
    try:
        monkeypatch.setattr(package_guard, "MAX_SHEET_CELLS", 225)
        assert guard.scan_sheet("Loads").cells == 225
        monkeypatch.setattr(package_guard, "MAX_SHEET_CELLS", 224)
        with pytest.raises(
            WorkbookError, match="sheet 'Loads': its cells reach row 25 and column I, more than the 224"
        ):
            guard.scan_sheet("Loads")
    finally:
        guard.close()


def test_a_value_hidden_beyond_the_declared_size_is_never_read(tmp_path: Path) -> None:
    """The central directory says the sheet ends before the far cell (with a matching CRC): both Python's zipfile
    (the guard) and calamine's zip reader stop at the declared size, so the guard sees what calamine sees."""
    import struct
    import zlib

    path = with_part(far_cell())(tmp_path)
    data = bytearray(path.read_bytes())
    sheet = parts(path)["xl/worksheets/sheet2.xml"]
    visible = sheet[: sheet.index(b'<row r="1048576">')]
    name = b"xl/worksheets/sheet2.xml"
    central = data.rindex(b"PK\x01\x02", 0, data.rindex(name))
    local = struct.unpack_from("<I", data, central + 42)[0]
    for offset in (central + 16, local + 14):  # CRC-32 then sizes (PKWARE APPNOTE 4.3.7, 4.3.12)
        struct.pack_into("<I", data, offset, zlib.crc32(visible))
    struct.pack_into("<I", data, central + 24, len(visible))
    struct.pack_into("<I", data, local + 22, len(visible))
    path.write_bytes(bytes(data))
    with pytest.raises(WorkbookError, match="sheet 'Loads' is damaged and cannot be read .*declared"):
        read_project(path)


def test_part_size_limit(tmp_path: Path, monkeypatch) -> None:  # noqa: ANN001
    path = with_part(lambda d: d)(tmp_path)
    monkeypatch.setattr(package_guard, "MAX_SHEET_PART_BYTES", 500)
    with pytest.raises(
        WorkbookError,
        match=r"plan.xlsx: refused to read the workbook because its part "
        r"xl/worksheets/sheet1.xml unpacks to [\d,]+ bytes \(limit 500 bytes\)",
    ):
        read_project(path)


def _sheet_xml(cells: list[bytes]) -> bytes:
    return (
        b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<worksheet xmlns="http://schemas.openxml'
        b'formats.org/spreadsheetml/2006/main"><sheetData>' + b"".join(cells) + b"</sheetData></worksheet>"
    )


# A cell in one of the forms writers use, or a hostile variant: (xml, position as calamine reads it or None).
CELL_FORMS = [
    lambda r, c, ref: b'<c r="%s"><v>1</v></c>' % ref,
    lambda r, c, ref: b'<c r="%s" s="1"/>' % ref,
    lambda r, c, ref: b'<c r="%s" t="inlineStr"><is><t>x</t></is></c>' % ref,
    lambda r, c, ref: b'<c r="%s"><f>A1*2</f><v>2</v></c>' % ref,
    lambda r, c, ref: b'<c r="%s"><f>A1*2</f><v /></c>' % ref,
    lambda r, c, ref: b'<c r="%s" t="e"><f>1/0</f><v>#DIV/0!</v></c>' % ref,
    lambda r, c, ref: b'<c r="%s" t="str"><f>""</f><v></v></c>' % ref,
    lambda r, c, ref: b"<c r='%s'><v>3</v></c>" % ref,
    lambda r, c, ref: b'<c s="0" r="%s"><v>4</v></c>' % ref,
    lambda r, c, ref: b'<c r="%s"\n t="n"><v>5</v></c>' % ref,
    lambda r, c, ref: b"<c><v>6</v></c>",
    lambda r, c, ref: b'<c r="%s"></c>' % ref,
    lambda r, c, ref: b'<c r="%s" t="s"/>' % ref,
]


@settings(max_examples=40, deadline=None)
@given(
    st.lists(
        st.tuples(st.integers(0, 40), st.integers(0, 30), st.integers(0, len(CELL_FORMS) - 1)), min_size=1, max_size=25
    )
)
def test_fast_and_parsed_scans_agree_and_cover_calamines_grid(cells: list[tuple[int, int, int]]) -> None:
    """The guard's fast byte scan either declines (None) or finds the same formula and error cells as the parsed
    scan, and the rectangle either scan counts is never smaller than the grid python-calamine builds from the
    same part (the parsed scan may count more: for a cell whose reference disagrees with its place it takes the
    larger)."""
    import io

    from leakbudget.xlsx.cells import column_letter

    rows: dict[int, list[bytes]] = {}
    for r, c, form in sorted(set(cells)):
        ref = f"{column_letter(c)}{r + 1}".encode()
        rows.setdefault(r, []).append(CELL_FORMS[form](r, c, ref))
    xml = _sheet_xml([b'<row r="%d">' % (r + 1) + b"".join(cs) + b"</row>" for r, cs in sorted(rows.items())])
    package, archive, info = _with_sheet(xml)
    parsed = _parsed_scan(archive, info, MAX_SHEET_CELLS)
    fast = _fast_scan(archive, info, MAX_SHEET_CELLS)
    assert fast is None or fast.notes == parsed.notes
    try:
        grid = (
            CalamineWorkbook.from_filelike(io.BytesIO(package)).get_sheet_by_name("S").to_python(skip_empty_area=False)
        )
    except Exception:  # calamine refuses some hostile forms outright; nothing to cover then
        return
    width = max((len(row) for row in grid), default=0)
    if any(v != "" for row in grid for v in row):
        for scan in (parsed, fast or parsed):
            assert scan.rows >= len(grid) and scan.columns >= width


@settings(max_examples=40, deadline=None)
@given(
    st.lists(st.tuples(st.integers(0, 300), st.integers(0, 40)), min_size=1, max_size=120, unique=True),
    st.randoms(use_true_random=False),
    st.sampled_from([64, 512, 4 << 20]),
    st.sampled_from([1, package_guard.MAX_BEYOND_CELLS]),
)
def test_the_fast_scan_finds_the_rectangle_whatever_the_order_of_rows_and_chunks(
    cells: list[tuple[int, int]], order: random.Random, chunk_bytes: int, beyond: int
) -> None:
    """Rows written in any order, some cells formatted but empty, and the part read in chunks of a few bytes to
    4 MiB, a chunk's cells listed after one cell beyond its first guess or after the usual number: the fast scan's
    rectangle is exactly the grid python-calamine builds from the part, and agrees with the parsed scan (its cells
    are where they are written, so the parsed scan counts the same)."""
    import io
    from unittest import mock

    from leakbudget.xlsx.cells import column_letter

    rows: dict[int, list[bytes]] = {}
    for r, c in sorted(cells):
        ref = b"%s%d" % (column_letter(c).encode(), r + 1)
        rows.setdefault(r, []).append(
            b'<c r="%s" s="1"/>' % ref if (r + c) % 5 == 0 else b'<c r="%s"><v>1</v></c>' % ref
        )
    written = list(rows.items())
    order.shuffle(written)
    xml = _sheet_xml([b'<row r="%d">' % (r + 1) + b"".join(cs) + b"</row>" for r, cs in written])
    package, archive, info = _with_sheet(xml)
    with (
        mock.patch.object(package_guard, "SCAN_CHUNK_BYTES", chunk_bytes),
        mock.patch.object(package_guard, "MAX_BEYOND_CELLS", beyond),
    ):
        fast = _fast_scan(archive, info, MAX_SHEET_CELLS)
    parsed = _parsed_scan(archive, info, MAX_SHEET_CELLS)
    grid = CalamineWorkbook.from_filelike(io.BytesIO(package)).get_sheet_by_name("S").to_python(skip_empty_area=False)
    valued = [(r, c) for r, c in cells if (r + c) % 5 != 0]
    expected = (1 + max(r for r, _ in valued), 1 + max(c for _, c in valued)) if valued else (0, 0)
    assert fast is not None
    assert (fast.rows, fast.columns) == (parsed.rows, parsed.columns) == expected
    if valued:  # calamine's grid from A1 to the last value
        assert (len(grid), max(len(row) for row in grid)) == expected


@functools.lru_cache(maxsize=1)
def _with_sheet(xml: bytes) -> tuple[bytes, zipfile.ZipFile, zipfile.ZipInfo]:
    """The one-sheet package with ``xml`` as its sheet: its bytes, the open archive and the sheet's entry."""
    import io

    buffer = io.BytesIO()
    with (
        zipfile.ZipFile(io.BytesIO(_one_sheet_package())) as base,
        zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as out,
    ):
        for info in base.infolist():
            out.writestr(info.filename, xml if info.filename == "xl/worksheets/sheet1.xml" else base.read(info))
    archive = zipfile.ZipFile(io.BytesIO(buffer.getvalue()))
    return buffer.getvalue(), archive, archive.getinfo("xl/worksheets/sheet1.xml")


def _one_sheet_package() -> bytes:
    """A one-sheet workbook (sheet 'S') whose sheet part the scan property test replaces."""
    with tempfile.TemporaryDirectory() as tmp:
        return write_workbook(Path(tmp) / "base.xlsx", {"S": [["x"]]}).read_bytes()


# ------------------------------------------------------------------------------------------- big but fine


@pytest.mark.slow
def test_a_million_formatted_empty_rows_stay_fast_and_small(tmp_path: Path) -> None:
    """1 000 000 rows of formatted empty cells below the loads (see robustness_cases.million_formatted_rows)."""
    path = million_formatted_rows(tmp_path)
    code, out, err, memory_kb = run_child("check", str(path), "--no-write", "--json")
    assert code == 0, err
    assert [load["load"] for load in json.loads(out)["loads"] if load["kind"] == "load"] == ["Filter", "Meter"]
    assert memory_kb < 250_000, memory_kb  # the 1 000 000 rows never became Python objects


# ------------------------------------------------------------------------------------------- odd but valid


def _book(tmp_path: Path, sheets: dict, name: str = "plan.xlsx") -> Path:
    return write_workbook(tmp_path / name, sheets)


def test_header_below_a_title_with_blank_columns_between(tmp_path: Path) -> None:
    sheets = basic_sheets()
    header, *rows = sheets["Loads"]
    spread = lambda row: [None, *row[:2], None, None, *row[2:]]  # noqa: E731
    sheets["Loads"] = [["Loads, 3 Wren Lane (invented)"], [], [], spread(header), *[spread(r) for r in rows]]
    project = read_project(_book(tmp_path, sheets))
    assert [(load.name, load.row, load.leakage_ma) for load in project.loads] == [
        ("Filter", 5, None),
        ("Meter", 6, 0.75),
    ]


def test_numbers_stored_as_text_and_odd_keys_are_read(tmp_path: Path) -> None:
    sheets = basic_sheets()
    sheets["Circuits"][1] = [" k1 ", " GFCI-A ", " 120 ", "60", "Single ", "20", "1,000.0 ft", "Kitchen"]
    sheets["Circuits"][2] = ["E1", "rcd-30", 230, 50, "single", 32, None, "Office"]
    sheets["Loads"][1] = ["Filter", "K1 ", None, "1", None, "4.7nF", None, " l1 ", "Kitchen"]
    sheets["Loads"][2] = ["Meter", " e1", " Kettle ", 2, "750 µA", None, None, None, "Office"]
    sheets["Settings"] = [[" setting ", "VALUE"], ["budget_FRACTION ", "30 %"], ["Length Unit", "ft"]]
    project = read_project(_book(tmp_path, sheets))
    k1, e1 = project.circuits
    assert (k1.circuit_id, k1.device.key, k1.voltage_v, k1.system) == ("k1", "gfci-a", 120.0, "single")
    assert k1.cable_length_m == pytest.approx(304.8)  # 1000 ft, 0.3048 m/ft exactly (international foot)
    assert [(ld.circuit_id, ld.appliance_key, ld.leakage_ma) for ld in project.loads] == [
        ("k1", None, None),
        ("E1", "kettle", pytest.approx(0.75)),
    ]


def test_non_ascii_names_and_unicode_forms_match(tmp_path: Path) -> None:
    """A circuit typed 'Küche 1' (NFC) and referred to as 'Ku\u0308che 1' (NFD, as pasted from some sources)
    is one circuit; names survive into the result sheets (read back with calamine)."""
    sheets = basic_sheets()
    sheets["Circuits"][1][0] = unicodedata.normalize("NFC", "Küche 1")
    sheets["Loads"][1][1] = unicodedata.normalize("NFD", "Küche 1")
    sheets["Loads"][1][0] = "Kühlschrank — 冷蔵庫 🔌"
    path = _book(tmp_path, sheets, "Plan für Straße 3 — Øst.xlsx")
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 0, result.output
    loads = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("Load results").to_python()
    assert any(row[0] == "Kühlschrank — 冷蔵庫 🔌" and row[2] == "Küche 1" for row in loads)


def test_merged_names_read_as_seen_and_merged_titles_change_nothing(tmp_path: Path) -> None:
    import xlsxwriter

    path = tmp_path / "merged.xlsx"
    book = xlsxwriter.Workbook(str(path))
    circuits = book.add_worksheet("Circuits")
    circuits.merge_range("A1:D1", "Panel P2, 3 Wren Lane (invented)")
    circuits.write_row(1, 0, ["Circuit", "Device", "Voltage", "Frequency"])
    circuits.write_row(2, 0, ["K1", "gfci-a", 120, 60])
    loads = book.add_worksheet("Loads")
    loads.merge_range("A1:B1", "Load")  # a header cell merged across a blank column
    loads.write_row(0, 2, ["Circuit", "Leakage", "Room"])
    for i, (name, leak) in enumerate([("Fridge", "0.4 mA"), ("Freezer", "0.5 mA"), ("Kettle", "0.1 mA")], start=1):
        loads.write_row(i, 0, [name, None, None, leak])
    loads.merge_range("C2:C4", "K1")
    loads.merge_range("E2:E4", "Küche")
    book.close()
    project = read_project(path)
    assert [(ld.name, ld.circuit_id, ld.room) for ld in project.loads] == [
        ("Fridge", "K1", "Küche"),
        ("Freezer", "K1", "Küche"),
        ("Kettle", "K1", "Küche"),
    ]


def test_cached_formula_results_are_read_and_helper_formulas_ignored(tmp_path: Path) -> None:
    """XlsxWriter saves formulas with the result given (as a spreadsheet program caches it); openpyxl saves them
    with no result (<v/>, ECMA-376 Part 1 18.3.1.4). A formula without result outside the contract's columns is
    never needed, so it is not an error; inside them it is, naming the cell and the formula."""
    import openpyxl
    import xlsxwriter

    cached = tmp_path / "cached.xlsx"
    book = xlsxwriter.Workbook(str(cached))
    circuits = book.add_worksheet("Circuits")
    circuits.write_row(0, 0, ["Circuit", "Device", "Voltage", "Frequency"])
    circuits.write_row(1, 0, ["K1", "gfci-a"])
    circuits.write_formula(1, 2, "=2*60", None, 120)
    circuits.write_formula(1, 3, "=60", None, 60)
    loads = book.add_worksheet("Loads")
    loads.write_row(0, 0, ["Load", "Circuit", "Leakage"])
    loads.write_row(1, 0, ["Fridge", "K1"])
    loads.write_formula(1, 2, "=0.2*2", None, 0.4)
    book.close()
    project = read_project(cached)
    assert (project.circuits[0].voltage_v, project.loads[0].leakage_ma) == (120.0, 0.4)

    uncached = tmp_path / "uncached.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Circuits"
    ws.append(["Circuit", "Device", "Voltage", "Frequency", "Helper"])
    ws.append(["K1", "gfci-a", 120, 60, "=C2*2"])
    loads_ws = wb.create_sheet("Loads")
    loads_ws.append(["Load", "Circuit", "Leakage"])
    loads_ws.append(["Fridge", "K1", 0.4])
    wb.save(uncached)
    assert read_project(uncached).loads[0].leakage_ma == 0.4
    loads_ws["C2"] = "=0.2*2"
    wb.save(uncached)
    with pytest.raises(WorkbookError) as info:
        read_project(uncached)
    assert str(info.value) == (
        "uncached.xlsx, sheet 'Loads', row 2, column 'Leakage', cell C2: the formula =0.2*2 has no saved result "
        "(leakbudget reads saved results and calculates nothing); open the workbook in a spreadsheet program, let "
        "it calculate and save it."
    )


# ------------------------------------------------------------------------------------------- lock files


@pytest.mark.parametrize("lock", lock_file_cases())
def test_a_workbook_open_elsewhere_is_refused_before_any_work(tmp_path: Path, lock: str) -> None:
    """The lock check comes first: even a file that is not a workbook at all gets the lock sentence."""
    path = tmp_path / "plan.xlsx"
    path.write_text("not even a workbook")
    (tmp_path / lock).write_text("someone")
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2
    assert result.output.startswith(f"Error: {path}: the file is open in a spreadsheet program (lock file {lock}")
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([lock, "plan.xlsx"])


@pytest.mark.parametrize("lock", lock_file_cases())
def test_reading_a_workbook_open_elsewhere_warns(tmp_path: Path, lock: str) -> None:
    path = write_workbook(tmp_path / "plan.xlsx", basic_sheets())
    (tmp_path / lock).write_text("someone")
    before = path.read_bytes()
    for args in (["--no-write"], ["--out", str(tmp_path / "copy.xlsx")]):
        result = runner.invoke(app, ["check", str(path), *args])
        assert result.exit_code == 0, result.output
        shown = " ".join(result.output.split())  # the terminal wraps long lines
        assert f"plan.xlsx is open in a spreadsheet program (lock file {lock}); changes not saved there" in shown
    assert path.read_bytes() == before


# ------------------------------------------------------------------------------------------- nothing opened


def test_no_path_from_a_cell_is_ever_opened_or_written(tmp_path: Path) -> None:
    """Every text cell names a file (absolute, relative, URL, UNC); Python's audit hooks (PEP 578) see every file
    the check opens, renames, copies or deletes; none of them is one of those."""
    bait = tmp_path / "leakbudget-bait"
    bait.mkdir()
    (bait / "catalogue.csv").write_text("Key,Typical leakage\nheater,0.1\n")
    names = [
        str(bait / "catalogue.csv"),
        "../leakbudget-bait/plan.xlsx",
        f"file://{bait}/x.xlsx",
        "\\\\server\\leakbudget-bait\\x.xlsx",
        str(bait / "out.xlsx"),
    ]
    sheets = basic_sheets()
    sheets["Circuits"][0].append("Note")
    for i, row in enumerate(sheets["Circuits"][1:]):
        row[7] = names[i]
        row.append(names[-1 - i])
    sheets["Loads"][1][0], sheets["Loads"][2][0] = names[2], names[3]
    sheets["Settings"] = [["Setting", "Value"], ["Catalogue", names[0]], ["Output", names[4]]]
    sheets["Appliances"] = [["Key", "Typical leakage", "Typical source"], ["heater", 0.1, names[1]]]
    path = write_workbook(tmp_path / "plan.xlsx", sheets)
    seen: list[str] = []

    def hook(event: str, args: tuple) -> None:
        if recording and (event == "open" or event.startswith(("os.", "shutil."))):
            seen.extend(str(a) for a in args if isinstance(a, (str, bytes, os.PathLike)))

    recording = False
    sys.addaudithook(hook)
    recording = True
    try:
        result = runner.invoke(app, ["check", str(path), "--out", str(tmp_path / "result.xlsx")])
    finally:
        recording = False
    assert result.exit_code == 0, result.output
    assert seen and any("result.xlsx" in s for s in seen)  # the hook did see the check's own files
    assert [s for s in seen if "leakbudget-bait" in s or s.startswith("file:") or "\\\\" in s] == []
    assert sorted(p.name for p in bait.iterdir()) == ["catalogue.csv"]


def test_formula_like_names_reach_the_result_sheet_as_text(tmp_path: Path) -> None:
    """Load names and notes that look like formulas come back as text, with no formula element in the part."""
    sheets = basic_sheets()
    sheets["Loads"][1][0] = '=HYPERLINK("http://example.invalid","x")'
    sheets["Loads"][2][0] = "@SUM(A1:A2)"
    path = write_workbook(tmp_path / "plan.xlsx", sheets)
    assert runner.invoke(app, ["check", str(path)]).exit_code == 0
    rows = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("Load results").to_python()
    assert {'=HYPERLINK("http://example.invalid","x")', "@SUM(A1:A2)"} <= {row[0] for row in rows}
    written = [data for name, data in parts(path).items() if "leakbudget_sheet" in name]
    assert written and not any(re.search(rb"<f[ >]", data) for data in written)


# ------------------------------------------------------------------------------------------- random damage


@pytest.mark.slow
@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seed=st.integers(0, 2**32 - 1), cell_damage=st.integers(0, 3), package_damage=st.integers(0, 2))
def test_random_damage_exit_0_1_2_no_traceback_input_unchanged_cells_kept(
    tmp_path: Path, seed: int, cell_damage: int, package_damage: int
) -> None:
    """A workbook made from the contract, damaged at random (odd cells, rows, sheets; truncated, flipped or
    dropped parts, DTDs, far cells, formulas without results, error values, merges): `check --out` exits 0, 1
    or 2, prints no traceback, leaves the input's bytes as they were, and on 0 or 1 every sheet of the input
    reads the same in the output."""
    folder = tmp_path / f"case-{seed}-{cell_damage}-{package_damage}"
    folder.mkdir()
    path = damaged_workbook(folder, seed, cell_damage, package_damage)
    verdict = judge(path, folder / "out.xlsx")
    assert verdict.problems == [], (seed, cell_damage, package_damage, verdict.output)


def test_damage_is_reproducible(tmp_path: Path) -> None:
    """The same seed makes the same damaged file, so a failing example can be replayed."""
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir()
    b.mkdir()
    seed = random.Random(11).randrange(2**32)
    assert damaged_workbook(a, seed, 2, 2).read_bytes() == damaged_workbook(b, seed, 2, 2).read_bytes()


def test_a_guarded_package_can_be_inspected(tmp_path: Path) -> None:
    path = write_workbook(tmp_path / "plan.xlsx", basic_sheets())
    guard = GuardedPackage(path)
    try:
        assert guard.sheet_parts == {"Circuits": "xl/worksheets/sheet1.xml", "Loads": "xl/worksheets/sheet2.xml"}
        assert (guard.scan_sheet("Loads").rows, guard.scan_sheet("Loads").columns) == (3, 9)
    finally:
        guard.close()
