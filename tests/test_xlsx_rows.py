"""The directly generated rows of the result sheets read back as XlsxWriter's own cell-by-cell writing does.

References: XlsxWriter writes the same cells one by one (write_string / write_number / write_boolean, its shared-
strings mode) into a workbook of its own; python-calamine and Gnumeric's ssconvert read both; ECMA-376 Part 1
§18.3.1.35 (``dimension``) and §18.8 (styles) are followed by hand for the used range and the cell formats.
"""

from __future__ import annotations

import math
import re
import shutil
import zipfile
from pathlib import Path

import defusedxml.ElementTree as DET
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from leakbudget.xlsx import zipped
from leakbudget.xlsx.package import SheetData, write_sheets
from leakbudget.xlsx.rows import EXCEL_MAX_NUMBER, ROWS_PER_CHUNK, ColumnRows, escape_text, rows_xml
from leakbudget.xlsx.zipped import deflated
from tests.test_xlsx_package import DATA, MAIN, cells, entries, real_program_csv

AWKWARD_TEXT = [
    "=1+2",
    "+A1",
    "-2+3",
    "@SUM(A1:A2)",
    "=cmd|' /C calc'!A0",  # formula-like: must stay text
    "\x01start",
    "bell\x07",
    "tab\there",
    "line\nfeed",
    "carriage\rreturn",
    "\x1f",  # control characters
    "_x0041_",
    "_x005F_",
    "a_x0041_b_X00e9_",
    "_x41_",  # literal escapes (ECMA-376 ST_Xstring)
    "<r>x</r>",
    "<r></t></is></c></row></r>",
    "a & b < c > d \" e ' f",  # markup
    "😀 non-BMP 𝄞",
    "Ω µ μ é ñ 中文",
    " leading space",
    "trailing space ",
    "  ",
    "\u00a0nbsp",
    "x" * 40_000,
    "😀" * 20_000,  # beyond Excel's 32,767 UTF-16 units: cut there, never inside a character
    "",
]
AWKWARD_NUMBERS = [
    0,
    1,
    -1,
    7,
    2**53 + 1,
    0.1,
    1 / 3,
    -0.0,
    1e-300,
    5e-324,
    1.5e300,
    123456789.123456789,
    float("inf"),
    float("-inf"),
    1.7976931348623157e308,
    True,
    False,
]


def reference_workbook(path: Path, name: str, header: list[str], rows: list[list]) -> Path:
    """The same cells written one by one by XlsxWriter (shared strings, its default mode)."""
    import xlsxwriter

    book = xlsxwriter.Workbook(str(path))
    sheet = book.add_worksheet(name)
    for column, title in enumerate(header):
        sheet.write_string(0, column, title)
    for r, row in enumerate(rows, start=1):
        for c, value in enumerate(row):
            if value is None or (isinstance(value, float) and math.isnan(value)):
                continue
            if isinstance(value, bool):
                sheet.write_boolean(r, c, value)
            elif isinstance(value, (int, float)) and abs(value) <= EXCEL_MAX_NUMBER:
                sheet.write_number(r, c, value)
            elif isinstance(value, (int, float)):
                sheet.write_string(r, c, repr(float(value)))
            elif value.startswith("<r>") and value.endswith("</r>"):
                # XlsxWriter copies such text unescaped (it takes it for a rich string): write it in three runs
                sheet.write_rich_string(r, c, value[:1], value[1:2], value[2:])
            else:
                sheet.write_string(r, c, value)
    book.close()
    return path


def fast_workbook(tmp_path: Path, name: str, header: list[str], rows: list[list], **extra) -> Path:  # noqa: ANN003
    path = tmp_path / "fast.xlsx"
    shutil.copyfile(DATA / "gnumeric.xlsx", path)
    write_sheets(path, [SheetData(name, header, rows, **extra)])
    return path


def assert_same_cells(fast: list[list], reference: list[list]) -> None:
    """Equal grids; numbers to XlsxWriter's 16 significant digits (format ".16G"; ours are exact, via repr)."""
    assert len(fast) == len(reference)
    for r, (a, b) in enumerate(zip(fast, reference)):
        assert len(a) == len(b), r
        for c, (x, y) in enumerate(zip(a, b)):
            if isinstance(y, float) and not isinstance(y, bool):
                assert x == pytest.approx(y, rel=1e-15, abs=0), (r, c)
            else:
                assert x == y, (r, c, x, y)


def sheet_part(path: Path) -> bytes:
    return entries(path)["xl/worksheets/leakbudget_sheet1.xml"]


def dimension(xml: bytes) -> str:
    return DET.fromstring(xml).find(f"{MAIN}dimension").get("ref")


def test_awkward_text_and_numbers_read_back_as_xlsxwriter_writes_them(tmp_path: Path) -> None:
    rows = [[text, i, None] for i, text in enumerate(AWKWARD_TEXT)]
    rows += [[None, number, f"n{i}"] for i, number in enumerate(AWKWARD_NUMBERS)]
    rows += [[None, None, None], [None, float("nan"), "after a blank row"]]
    header = ["text", "number", "label"]
    fast = fast_workbook(tmp_path, "Odd", header, rows)
    reference = reference_workbook(tmp_path / "reference.xlsx", "Odd", header, rows)
    got = cells(fast)["Odd"]
    assert_same_cells(got, cells(reference)["Odd"])
    # and against the data itself: text exactly, cut at Excel's limit of 32,767 UTF-16 units (a non-BMP
    # character counts two: 16,383 of them fit); numbers exactly (repr round-trips)
    expected = ["x" * 32_767 if t == "x" * 40_000 else "😀" * 16_383 if t == "😀" * 20_000 else t for t in AWKWARD_TEXT]
    assert [row[0] for row in got[1 : len(AWKWARD_TEXT) + 1]] == expected
    first = len(AWKWARD_TEXT) + 1
    assert [row[1] for row in got[first : first + len(AWKWARD_NUMBERS)]] == [
        n if isinstance(n, bool) else repr(float(n)) if abs(n) > EXCEL_MAX_NUMBER else float(n) for n in AWKWARD_NUMBERS
    ]
    assert dimension(sheet_part(fast)) == dimension(entries(reference)["xl/worksheets/sheet1.xml"])
    part = sheet_part(fast)
    assert b"<f>" not in part and b"<f " not in part  # never a formula


def test_a_real_program_reads_the_same_text_from_both(tmp_path: Path) -> None:
    """Gnumeric reads both files alike (it shows _xHHHH_ escapes as written, for XlsxWriter's file too)."""
    texts = [t for t in AWKWARD_TEXT if len(t) < 100 and t.strip() and "\n" not in t and "\r" not in t]
    rows = [[t, i] for i, t in enumerate(texts)]
    fast = fast_workbook(tmp_path, "Odd", ["text", "n"], rows)
    reference = reference_workbook(tmp_path / "reference.xlsx", "Odd", ["text", "n"], rows)
    assert real_program_csv(fast, "Odd") == real_program_csv(reference, "Odd")


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    rows=st.lists(
        st.lists(
            st.one_of(st.none(), st.text(max_size=30), st.booleans(), st.integers(-(10**15), 10**15), st.floats()),
            max_size=6,
        ),
        max_size=8,
    )
)
def test_any_rows_read_back_as_xlsxwriter_writes_them(tmp_path: Path, rows: list[list]) -> None:
    folder = tmp_path / f"case{abs(hash(repr(rows)))}"
    folder.mkdir(exist_ok=True)
    header = ["a", "b", "c"]
    rows = [
        [v.replace("\ufffe", "\ufffd").replace("\uffff", "\ufffd") if isinstance(v, str) else v for v in row]
        for row in rows
    ]  # XML 1.0 §2.2: U+FFFE/U+FFFF cannot be written; both writers' forms differ there
    fast = fast_workbook(folder, "P", header, rows)
    reference = reference_workbook(folder / "reference.xlsx", "P", header, rows)
    assert_same_cells(cells(fast)["P"], cells(reference)["P"])
    assert dimension(sheet_part(fast)) == dimension(entries(reference)["xl/worksheets/sheet1.xml"])


COLUMN_VALUES = {
    "text": st.one_of(
        st.none(),
        st.sampled_from(["K1", "catalogue", "=1+2", "-x", " pad", "a & b", "x|=y", "_x0041_"]),
        st.text(max_size=12),
    ),
    "float": st.one_of(st.none(), st.sampled_from([0.0, -0.0, 230.0, 0.575, 1e-5, 1.5e300]), st.floats()),
    "int": st.one_of(st.none(), st.sampled_from([0, 1, 2, -7]), st.integers(-(10**20), 10**20)),
}


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    kinds=st.lists(st.sampled_from(sorted(COLUMN_VALUES)), min_size=1, max_size=4),
    data=st.data(),
    height=st.integers(0, 14),
    blanks=st.booleans(),
)
def test_columns_of_one_kind_read_back_as_xlsxwriter_writes_them(
    tmp_path: Path, monkeypatch, kinds: list[str], data, height: int, blanks: bool
) -> None:
    """Columns all text, all floats or all ints (what result sheets hold), with repeated values, blanks, and rows
    in pieces of four rows, given as rows or as columns (ColumnRows): the same cells as XlsxWriter's cell-by-cell
    writing."""
    from leakbudget.xlsx import rows as xlsx_rows

    monkeypatch.setattr(xlsx_rows, "ROWS_PER_CHUNK", 4)
    columns = []
    for kind in kinds:
        values = COLUMN_VALUES[kind] if blanks else COLUMN_VALUES[kind].filter(lambda v: v is not None)
        pool = data.draw(st.lists(values, min_size=1, max_size=3))  # few distinct values: many repeats
        columns.append([data.draw(st.sampled_from(pool) | values) for _ in range(height)])
    rows = [list(row) for row in zip(*columns)]
    rows = [
        [v.replace("\ufffe", "\ufffd").replace("\uffff", "\ufffd") if isinstance(v, str) else v for v in row]
        for row in rows
    ]
    folder = tmp_path / f"case{abs(hash(repr(rows)))}"
    folder.mkdir(exist_ok=True)
    header = [f"c{i}" for i in range(len(kinds))]
    kept = ColumnRows([list(column) for column in zip(*rows)]) if rows and data.draw(st.booleans()) else rows
    fast = fast_workbook(folder, "K", header, kept)  # rows as lists, or kept as their columns
    reference = reference_workbook(folder / "reference.xlsx", "K", header, rows)
    assert_same_cells(cells(fast)["K"], cells(reference)["K"])
    assert dimension(sheet_part(fast)) == dimension(entries(reference)["xl/worksheets/sheet1.xml"])


def test_repeated_numbers_are_written_exactly_signed_zeros_too() -> None:
    """Each number's text is its shortest round-trip form (Python's repr), also where a piece of rows repeats a
    few numbers (each formatted once) and where 0.0 and -0.0, equal as keys, are both among them."""
    values = [0.0, -0.0, 230.0, 0.575, 230.0, -0.0] * 50
    piece = b"".join(rows_xml([[v, 7] for v in values], ["", ""]))
    written = re.findall(rb'<c r="A\d+"><v>([^<]*)</v>', piece)
    assert [w.decode() for w in written] == [repr(v) for v in values]
    assert re.findall(rb'<c r="B\d+"><v>([^<]*)</v>', piece) == [b"7"] * len(values)


def test_every_row_keeps_its_columns_format(tmp_path: Path) -> None:
    """ECMA-376 Part 1 §18.8: each cell's s → cellXfs/xf → numFmtId → numFmt/@formatCode, on every row."""
    n = 2 * ROWS_PER_CHUNK + 7  # more than one piece of output
    rows = [[f"C{i}", i / 7, i, None if i % 3 else "note"] for i in range(n)]
    path = fast_workbook(
        tmp_path, "Many", ["circuit", "leakage_ma", "count", "note"], rows, number_formats={1: "0.000", 2: "0"}
    )
    styles = DET.fromstring(entries(path)["xl/styles.xml"])
    xfs = styles.find(f"{MAIN}cellXfs").findall(f"{MAIN}xf")
    codes = {int(f.get("numFmtId")): f.get("formatCode") for f in styles.iter(f"{MAIN}numFmt")}
    codes.setdefault(1, "0")  # built-in number format 1 is "0" (§18.8.30)
    sheet = DET.fromstring(sheet_part(path))
    formats: dict[str, set] = {}
    for cell in sheet.iter(f"{MAIN}c"):
        if cell.get("r").endswith("1") and re.fullmatch(r"[A-Z]+1", cell.get("r")):
            continue  # the header row
        column = re.match(r"[A-Z]+", cell.get("r")).group()
        xf = xfs[int(cell.get("s", "0"))]
        formats.setdefault(column, set()).add(codes.get(int(xf.get("numFmtId")), "General"))
    assert formats == {"A": {"General"}, "B": {"0.000"}, "C": {"0"}, "D": {"General"}}
    assert dimension(sheet_part(path)) == f"A1:D{n + 1}"
    got = cells(path)["Many"]
    assert len(got) == n + 1 and got[-1][:3] == [f"C{n - 1}", pytest.approx((n - 1) / 7), n - 1]


def test_a_sheet_without_rows_is_its_header(tmp_path: Path) -> None:
    path = fast_workbook(tmp_path, "Empty", ["a", "b", "c"], [])
    assert cells(path)["Empty"] == [["a", "b", "c"]]
    assert dimension(sheet_part(path)) == "A1:C1"


def test_escapes_follow_ecma_376_st_xstring() -> None:
    """ECMA-376 Part 1 §22.9.2.19: a character as _xHHHH_; a literal _xHHHH_ has its underscore escaped."""
    assert escape_text("_x0041_") == "_x005F_x0041_"
    assert escape_text("a\x01b") == "a_x0001_b"
    assert escape_text("1 < 2 & 3 > 2") == "1 &lt; 2 &amp; 3 &gt; 2"
    assert escape_text("plain text, unchanged") == "plain text, unchanged"
    assert escape_text("\ud800") == "\ufffd"  # a lone surrogate cannot be encoded in UTF-8


def test_progress_hears_every_row_once_in_order() -> None:
    heard: list[tuple[int, int]] = []
    rows = [["x", 1.0]] * (ROWS_PER_CHUNK * 2 + 1)
    pieces = list(rows_xml(rows, ["", ""], lambda done, total: heard.append((done, total))))
    total = len(rows)
    assert heard == [(ROWS_PER_CHUNK, total), (2 * ROWS_PER_CHUNK, total), (total, total)]
    assert b"".join(pieces).count(b"<row ") == total


@pytest.mark.parametrize("how", ["deflated by zlib-ng", "streamed through zipfile"])
def test_a_sheet_with_zip64_sizes_reads_back(tmp_path: Path, monkeypatch, how: str) -> None:
    """A sheet part beyond zip's 32-bit sizes gets ZIP64 sizes (APPNOTE.TXT 4.5.3), whether deflated whole (sizes
    known: the limit is lowered to reach it) or streamed (more than ZIP64_ROWS rows); both readers accept them."""
    from leakbudget.xlsx import package as xlsx_package

    if how == "deflated by zlib-ng":
        write_package = xlsx_package._write_package

        def with_a_low_limit(*args, **kwargs):  # noqa: ANN002, ANN003, ANN202 (only while our package is written)
            with monkeypatch.context() as inside:
                inside.setattr(zipfile, "ZIP64_LIMIT", 64)
                return write_package(*args, **kwargs)

        monkeypatch.setattr(xlsx_package, "_write_package", with_a_low_limit)
        parts = []
        monkeypatch.setattr(zipped, "deflated", lambda chunks, entry: parts.append(entry) or deflated(chunks, entry))
    else:
        monkeypatch.setattr(xlsx_package, "ZIP64_ROWS", 0)
        monkeypatch.setattr(zipped, "can_append", lambda out: False)
    rows = [["K1", 0.85], ["K2", 1.4]]
    path = fast_workbook(tmp_path, "Big", ["circuit", "leakage_ma"], rows)
    with zipfile.ZipFile(path) as archive:
        info = archive.getinfo("xl/worksheets/leakbudget_sheet1.xml")
        assert info.extract_version >= 45  # APPNOTE.TXT 4.4.3.2: 4.5 = uses ZIP64 format extensions
    assert cells(path)["Big"] == [["circuit", "leakage_ma"], *rows]
    assert real_program_csv(path, "Big")[1:] == [["K1", "0.85"], ["K2", "1.4"]]
    if how == "deflated by zlib-ng":
        assert [e.filename for e in parts] == ["xl/worksheets/leakbudget_sheet1.xml"]


def test_rows_kept_as_columns_are_a_sequence_of_rows() -> None:
    """ColumnRows reads as the list of tuples zip makes of its columns (the standard library as reference)."""
    columns = [["a", "b", "c"], [1.5, None, 3.0], [1, 2, 3]]
    rows = ColumnRows([list(c) for c in columns])
    expected = list(zip(*columns))
    assert len(rows) == 3 and list(rows) == expected and rows[1] == expected[1] and rows[-1] == expected[-1]
    assert rows[1:] == expected[1:] and rows[::-1] == expected[::-1]
    rows.append(["d"])
    assert rows[3] == ("d", None, None)
    with pytest.raises(IndexError):
        rows[4]
    with pytest.raises(ValueError):
        rows.append(["too", "many", "cells", "here"])
    with pytest.raises(ValueError):
        ColumnRows([[1, 2], [1]])


def test_text_beyond_ascii_is_written_as_character_references(tmp_path: Path) -> None:
    """The rows are ASCII: other characters as references (XML 1.0 §4.1), which an XML parser (defusedxml here)
    turns back into the same text, in plain texts, repeated ones, escaped ones and beside blanks."""
    texts = ["Küche", "2πfCV × 5 m", "IΔn = 30 mA", "中文 😀 𝄞", "a & ü", " ü padded ", "Küche"]
    rows = [[t, t if i % 2 else None, "same ü"] for i, t in enumerate(texts)]
    part = b"".join(rows_xml(rows, ["", "", ""]))
    assert part.isascii() and b"&#" in part
    root = DET.fromstring(b'<sheetData xmlns="' + MAIN[1:-1].encode() + b'">' + part + b"</sheetData>")
    got = [["".join(c.itertext()) for c in row] for row in root]
    assert got == [[v for v in row if v is not None] for row in rows]


def test_awkward_header_texts_read_back_as_xlsxwriter_writes_them(tmp_path: Path) -> None:
    """The header row's texts go in as every text cell does (XlsxWriter writes only bold sample cells there), with
    or without rows under them; python-calamine and Gnumeric read them as XlsxWriter's own cell-by-cell file
    (the reference) gives them."""
    header = [t for t in AWKWARD_TEXT if len(t) < 100 and t.strip() and "\n" not in t and "\r" not in t][:12]
    for rows in ([], [[1.5] * len(header)]):
        fast = fast_workbook(tmp_path, "Odd", header, rows)
        reference = reference_workbook(tmp_path / "reference.xlsx", "Odd", header, rows)
        assert_same_cells(cells(fast)["Odd"], cells(reference)["Odd"])
        assert real_program_csv(fast, "Odd")[0] == real_program_csv(reference, "Odd")[0]
        shared = "xl/sharedStrings.xml"
        assert entries(fast)[shared] == entries(DATA / "gnumeric.xlsx")[shared]  # nothing added to the user's
