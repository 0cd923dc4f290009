"""Tests of leakbudget.xlsx.edit: cells of existing worksheets changed by byte splices, everything else kept.

Independent references: python-calamine reads the cells back (and the grid every edit should give is computed
here from the original grid, cell by cell), Gnumeric's ssconvert re-opens the edited files, zipfile compares the
other parts byte by byte, and ECMA-376 Part 1 (rows ascend in sheetData, ``row`` §18.3.1.73 from memory;
§18.3.1.4 cells ascend in a row; §18.3.1.35 dimension) is checked by hand on the edited XML.
"""

from __future__ import annotations

import re
import shutil
import zipfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from python_calamine import CalamineWorkbook

from leakbudget.errors import WriteBackError
from leakbudget.xlsx.cells import column_index
from leakbudget.xlsx.edit import (
    CellRefused,
    CellWrite,
    SheetEdit,
    _fast_scan,
    _parsed_scan,
    edit_sheet_xml,
    edit_sheets,
)
from tests.conftest import write_workbook
from tests.test_xlsx_package import real_program_csv

DATA = Path(__file__).parent / "data"
FIXTURES = ["libreoffice", "gnumeric", "libreoffice_extension"]
SHEET = "xl/worksheets/sheet1.xml"


def grid(path: Path, sheet: str) -> list[list]:
    return CalamineWorkbook.from_path(str(path)).get_sheet_by_name(sheet).to_python(skip_empty_area=False)


def entries(path: Path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as archive:
        return {info.filename: archive.read(info) for info in archive.infolist()}


def expected_grid(before: list[list], cells: dict[tuple[int, int], object]) -> list[list]:
    """The grid calamine should read after ``cells`` are written: the original with each cell replaced, grown and
    trimmed as calamine sizes a sheet (from A1 to the last value; trailing empty rows and columns dropped)."""
    rows = [list(r) for r in before]
    for (r, c), value in cells.items():
        while len(rows) < r:
            rows.append([])
        row = rows[r - 1]
        row.extend([""] * (c + 1 - len(row)))
        row[c] = "" if value is None else float(value) if isinstance(value, int | float) else value
    while rows and all(v == "" for v in rows[-1]):
        rows.pop()
    width = max((max((j + 1 for j, v in enumerate(r) if v != ""), default=0) for r in rows), default=0)
    return [(r + [""] * width)[:width] for r in rows]


@pytest.fixture(params=FIXTURES)
def fixture_copy(request, tmp_path: Path) -> Path:
    target = tmp_path / f"{request.param}.xlsx"
    shutil.copyfile(DATA / f"{request.param}.xlsx", target)
    return target


def test_cells_change_and_every_other_part_is_byte_identical(fixture_copy: Path, tmp_path: Path) -> None:
    """A spreadsheet program's own file: a changed cell, a new row styled like the row above, a new header cell."""
    out = tmp_path / "edited.xlsx"
    before_bytes = fixture_copy.read_bytes()
    before = grid(fixture_copy, "Circuits")
    cells = {
        (3, 1): CellWrite("Kitchen left"),  # an existing text cell
        (10, 0): CellWrite("NEW-1", (7, 0)),  # a row that does not exist, styled like row 7
        (10, 2): CellWrite(25, (7, 2)),
        (2, 5): CellWrite("Note", (2, 4)),  # a header cell right of the last one
    }
    edit_sheets(fixture_copy, [SheetEdit("Circuits", cells)], out)
    assert fixture_copy.read_bytes() == before_bytes  # the source is only read
    assert grid(out, "Circuits") == expected_grid(before, {k: w.value for k, w in cells.items()})
    assert grid(out, "Loads") == grid(fixture_copy, "Loads")
    old, new = entries(fixture_copy), entries(out)
    assert list(new) == list(old)  # same entries, same order: nothing added, nothing dropped
    changed = [name for name in old if old[name] != new[name]]
    assert len(changed) == 1 and changed[0].startswith("xl/worksheets/"), changed
    # the new row copies the style indices of row 7 (ECMA-376 Part 1 §18.3.1.4: s indexes cellXfs)
    xml = new[changed[0]].decode()
    style = {m.group(1): m.group(2) for m in re.finditer(r'<c r="([A-Z]+\d+)"(?: s="(\d+)")?', xml)}
    original = {
        m.group(1): m.group(2) for m in re.finditer(r'<c r="([A-Z]+\d+)"(?: s="(\d+)")?', old[changed[0]].decode())
    }
    assert style["A10"] == original["A7"] and style["C10"] == original["C7"]
    assert style["B3"] == original["B3"]  # a changed cell keeps its own style


def test_rows_and_cells_stay_in_ascending_order(fixture_copy: Path, tmp_path: Path) -> None:
    """ECMA-376 Part 1 ``row`` (§18.3.1.73, from memory) and §18.3.1.4: rows ascend in sheetData, cells ascend
    within a row."""
    out = tmp_path / "edited.xlsx"
    cells = {(r, c): CellWrite(f"r{r}c{c}") for r in (1, 4, 9, 12, 30) for c in (0, 3, 7, 6)}
    edit_sheets(fixture_copy, [SheetEdit("Loads", cells)], out)
    part = next(n for n, data in entries(out).items() if data != entries(fixture_copy).get(n))
    xml = entries(out)[part].decode()
    rows = [int(r) for r in re.findall(r'<row r="(\d+)"', xml)]
    assert rows == sorted(rows) and len(rows) == len(set(rows))
    for row in re.findall(r"<row [^>]*?(?:/>|>.*?</row>)", xml, re.S):
        columns = [column_index(c) for c in re.findall(r'<c r="([A-Z]+)\d+"', row)]
        assert columns == sorted(columns) and len(columns) == len(set(columns)), row
    assert grid(out, "Loads") == expected_grid(grid(fixture_copy, "Loads"), {k: w.value for k, w in cells.items()})


def test_the_dimension_covers_the_new_cells(tmp_path: Path) -> None:
    path = write_workbook(tmp_path / "in.xlsx", {"Data": [["a", "b"], [1, 2]]})
    out = tmp_path / "out.xlsx"
    edit_sheets(path, [SheetEdit("Data", {(5, 3): CellWrite("far")})], out)
    xml = entries(out)[SHEET]
    assert b'<dimension ref="A1:D5"/>' in xml  # §18.3.1.35: the used range, A1 to the last cell


def test_a_formula_cell_is_refused_and_nothing_is_written(fixture_copy: Path, tmp_path: Path) -> None:
    """The fixtures' totals row (row 8, tests/data/make_fixtures.py) holds =SUM(D3:D7) in D8; replacing a formula
    could break others that share it."""
    out = tmp_path / "edited.xlsx"
    with pytest.raises(CellRefused) as caught:
        edit_sheets(fixture_copy, [SheetEdit("Circuits", {(8, 3): CellWrite(0)})], out)
    assert caught.value.ref == "D8" and caught.value.formula.upper().replace(" ", "") == "SUM(D3:D7)"
    assert "cell D8" in str(caught.value) and str(caught.value).count(". ") == 0
    assert not out.exists() and list(tmp_path.glob("*.tmp")) == []


def test_text_stays_text(tmp_path: Path) -> None:
    """Text that looks like a formula, markup, an escape, or has edge spaces reads back exactly (ST_Xstring)."""
    path = write_workbook(tmp_path / "in.xlsx", {"Data": [["x"]]})
    out = tmp_path / "out.xlsx"
    texts = ['=HYPERLINK("x")', "<r>bold</r>", "a & b < c", "_x0041_", "  spaced  ", "tab\there", "ünï ✓"]
    edit_sheets(path, [SheetEdit("Data", {(i + 2, 0): CellWrite(t) for i, t in enumerate(texts)})], out)
    assert [r[0] for r in grid(out, "Data")[1:]] == texts
    assert b"<f>" not in entries(out)[SHEET]


def test_a_prefixed_namespace_and_implicit_positions_are_followed(tmp_path: Path) -> None:
    """Some writers use <x:row>/<x:c> and leave out r (``row`` and §18.3.1.4 ``c``: a missing r follows the one
    before)."""
    path = write_workbook(tmp_path / "in.xlsx", {"Data": [["a", "b", "c"], ["d", "e", "f"]]})
    main = b"http://schemas.openxmlformats.org/spreadsheetml/2006/main"
    source = tmp_path / "prefixed.xlsx"
    with zipfile.ZipFile(path) as zin, zipfile.ZipFile(source, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == SHEET:
                data = data.replace(b'xmlns="' + main + b'"', b'xmlns:x="' + main + b'"')
                data = re.sub(rb"<(/?)(?!\?)(\w+)", rb"<\1x:\2", data)
                data = re.sub(rb'(<x:c) r="[A-Z]+\d+"', rb"\1", data)  # cells without r
                data = data.replace(b'<x:row r="2"', b"<x:row")  # a row without r
            zout.writestr(info, data)
    assert grid(source, "Data") == [["a", "b", "c"], ["d", "e", "f"]]
    out = tmp_path / "out.xlsx"
    edit_sheets(
        source, [SheetEdit("Data", {(2, 1): CellWrite("E"), (2, 4): CellWrite("g"), (3, 0): CellWrite(7)})], out
    )
    assert grid(out, "Data") == [["a", "b", "c", "", ""], ["d", "E", "f", "", "g"], [7.0, "", "", "", ""]]
    assert b"<c " not in entries(out)[SHEET] and b"<x:is><x:t>g</x:t></x:is>" in entries(out)[SHEET]


def test_an_empty_row_element_and_clearing_a_cell(tmp_path: Path) -> None:
    path = write_workbook(tmp_path / "in.xlsx", {"Data": [["a", "b"], ["c", "d"], [], ["e"]]})
    source = tmp_path / "rows.xlsx"
    with zipfile.ZipFile(path) as zin, zipfile.ZipFile(source, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == SHEET:
                data = data.replace(b'<row r="4"', b'<row r="3" spans="1:2"/><row r="4"')  # a formatted empty row
            zout.writestr(info, data)
    out = tmp_path / "out.xlsx"
    edit_sheets(source, [SheetEdit("Data", {(3, 2): CellWrite("x"), (1, 1): CellWrite(None)})], out)
    assert grid(out, "Data") == [["a", "", ""], ["c", "d", ""], ["", "", "x"], ["e", "", ""]]
    assert b'<row r="3" spans="1:3"><c r="C3"' in entries(out)[SHEET]  # the row's spans hint widened


def test_a_dtd_in_the_sheet_is_refused(tmp_path: Path) -> None:
    bomb = b'<?xml version="1.0"?><!DOCTYPE w [<!ENTITY a "aaaa">]><worksheet><sheetData/></worksheet>'
    with pytest.raises(Exception) as caught:
        edit_sheet_xml(bomb, {(1, 0): CellWrite("x")}, tmp_path / "w.xlsx", "Data")
    assert type(caught.value).__name__ == "UnsafeXmlError"


def test_out_must_be_another_file_and_an_unknown_sheet_is_refused(tmp_path: Path) -> None:
    path = write_workbook(tmp_path / "in.xlsx", {"Data": [["a"]]})
    with pytest.raises(ValueError):
        edit_sheets(path, [SheetEdit("Data", {})], path)
    with pytest.raises(WriteBackError, match="sheet 'Nope' is not a worksheet"):
        edit_sheets(path, [SheetEdit("Nope", {(1, 0): CellWrite("x")})], tmp_path / "out.xlsx")


VALUES = st.one_of(
    st.none(),
    st.integers(-(10**6), 10**6),
    st.floats(allow_nan=False, allow_infinity=False, width=32),
    st.text(st.characters(codec="utf-8", exclude_categories=("Cs", "Cc")), min_size=1, max_size=8).filter(
        lambda t: t.strip() == t and t != ""
    ),
)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    original=st.lists(st.lists(VALUES, max_size=5), min_size=1, max_size=6),
    cells=st.dictionaries(st.tuples(st.integers(1, 9), st.integers(0, 6)), VALUES, max_size=12),
)
def test_any_edit_reads_back_as_the_grid_it_should_give(tmp_path: Path, original, cells) -> None:
    """Random sheets (written by XlsxWriter) and random edits: calamine reads exactly the edited grid."""
    path = write_workbook(tmp_path / "in.xlsx", {"Data": original})
    out = tmp_path / "out.xlsx"
    out.unlink(missing_ok=True)
    before = grid(path, "Data")
    edit_sheets(path, [SheetEdit("Data", {k: CellWrite(v) for k, v in cells.items()})], out)
    got = grid(out, "Data")
    want = expected_grid(before, cells)
    assert [[pytest.approx(v) if isinstance(v, float) else v for v in r] for r in want] == got


@pytest.mark.slow
def test_gnumeric_opens_the_edited_file(fixture_copy: Path, tmp_path: Path) -> None:
    """Gnumeric's ssconvert, a program of its own, reads the edited cells and the untouched ones."""
    out = tmp_path / "edited.xlsx"
    cells = {(3, 1): CellWrite("Kitchen left"), (10, 0): CellWrite("NEW-1", (7, 0)), (10, 2): CellWrite(25, (7, 2))}
    edit_sheets(fixture_copy, [SheetEdit("Circuits", cells)], out)
    rows = real_program_csv(out, "Circuits")
    assert rows[2][:2] == ["K1", "Kitchen left"]
    assert rows[-1][:3] == ["NEW-1", "", "25"]
    assert real_program_csv(out, "Loads") == real_program_csv(fixture_copy, "Loads")


def sheet_parts(path: Path) -> list[bytes]:
    return [data for name, data in entries(path).items() if name.startswith("xl/worksheets/sheet")]


@pytest.mark.parametrize("name", FIXTURES)
def test_fast_and_parsed_scans_agree(name: str) -> None:
    """The fast path (rows found by their start tags) locates exactly what expat's full parse locates."""
    for data in sheet_parts(DATA / f"{name}.xlsx"):
        for wanted in ({1}, {2, 3, 8}, {5, 9, 40}, set(range(1, 12))):
            fast = _fast_scan(data, wanted)
            assert fast is not None and fast == _parsed_scan(data, wanted), (name, wanted)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    original=st.lists(st.lists(VALUES, max_size=4), min_size=1, max_size=8),
    wanted=st.sets(st.integers(1, 12), max_size=5),
)
def test_fast_and_parsed_scans_agree_on_random_sheets(tmp_path: Path, original, wanted) -> None:
    path = write_workbook(tmp_path / "in.xlsx", {"Data": original})
    data = entries(path)[SHEET]
    fast = _fast_scan(data, wanted)
    assert fast is not None and fast == _parsed_scan(data, wanted)


def test_a_comment_that_looks_like_a_row_takes_the_careful_path(tmp_path: Path) -> None:
    """XML 1.0 §2.5: a comment's text is not markup, so '<row r="3">' inside one must not be taken for a row."""
    path = write_workbook(tmp_path / "in.xlsx", {"Data": [["a"], ["b"], ["c"]]})
    source = tmp_path / "commented.xlsx"
    with zipfile.ZipFile(path) as zin, zipfile.ZipFile(source, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == SHEET:
                data = data.replace(b'<row r="2"', b'<!-- <row r="3"><c r="A3"/></row> --><row r="2"')
            zout.writestr(info, data)
    assert _fast_scan(entries(source)[SHEET], {3}) is None
    out = tmp_path / "out.xlsx"
    edit_sheets(source, [SheetEdit("Data", {(3, 1): CellWrite("x"), (2, 0): CellWrite("B")})], out)
    assert grid(out, "Data") == [["a", ""], ["B", ""], ["c", "x"]]
    assert b'<!-- <row r="3"><c r="A3"/></row> -->' in entries(out)[SHEET]
