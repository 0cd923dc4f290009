"""The result sheets `check` writes: their cells, and the native chart on the 'Circuit results' sheet.

The cells hold the values of the records of the ``--json`` document (which tests/test_demo_documents.py pins),
rounded as Python's own ``round`` does (CPython rounds correctly: the exact binary value, ties to even). The chart
part is read as DrawingML (ECMA-376 Part 1 §21.2: c:ser holds c:tx/c:cat/c:val formula references and c:spPr the
series fill); the cells it points at are read back with python-calamine, independent of the writer.
"""

from __future__ import annotations

import json
import math
import random
import shutil
import zipfile
from pathlib import Path

import defusedxml.ElementTree as ET
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from leakbudget.api import example_path
from leakbudget.checking import check
from leakbudget.cli.app import app
from leakbudget.output import check as output
from leakbudget.reporting import charts
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER, write_workbook

NS = {
    "c": "http://schemas.openxmlformats.org/drawingml/2006/chart",
    "a": "http://schemas.openxmlformats.org/drawingml/2006/main",
}
runner = CliRunner()


def _cells(path, sheet: str) -> list[list]:
    from python_calamine import CalamineWorkbook

    return CalamineWorkbook.from_path(str(path)).get_sheet_by_name(sheet).to_python()


def _column(ref: str) -> tuple[str, int, int]:
    """'Circuit results'!$J$2:$J$11 → ("J", 2, 11)."""
    cells = ref.split("!")[1].replace("$", "")
    first, _, last = cells.partition(":")
    letters = "".join(ch for ch in first if ch.isalpha())
    return letters, int(first[len(letters) :]), int((last or first)[len(letters) :])


def test_circuit_results_chart_plots_every_circuit_and_nothing_else(tmp_path):
    workbook = tmp_path / "alder.xlsx"
    shutil.copyfile(example_path(), workbook)
    doc = json.loads(runner.invoke(app, ["check", str(workbook), "--no-write", "--json"]).stdout)
    for _ in range(2):  # a second run replaces the sheet and its chart, never adds one
        assert runner.invoke(app, ["check", str(workbook)]).exit_code == 1
    with zipfile.ZipFile(workbook) as package:
        chart_parts = [n for n in package.namelist() if n.startswith("xl/charts/chart") or "_chart" in n]
        assert chart_parts == ["xl/charts/leakbudget_chart1.xml"]
        root = ET.fromstring(package.read(chart_parts[0]))
    assert root.find(".//c:barChart/c:barDir", NS).get("val") == "col"
    rows = _cells(workbook, "Circuit results")
    header, data = rows[0], rows[1:]
    series = root.findall(".//c:ser", NS)
    names, colours = [], []
    for ser in series:
        name_col, name_row, _ = _column(ser.find("c:tx//c:f", NS).text)
        cat_col, cat_first, cat_last = _column(ser.find("c:cat//c:f", NS).text)
        val_col, val_first, val_last = _column(ser.find("c:val//c:f", NS).text)
        assert name_row == 1 and cat_col == "A"
        # exactly the ten circuit rows (2-11): the notes under the table are not categories
        assert (cat_first, cat_last) == (val_first, val_last) == (2, 1 + len(doc["circuits"]))
        index = ord(val_col) - ord("A")
        names.append(header[index])
        plotted = [row[index] for row in data[: len(doc["circuits"])]]
        key = {
            "Leakage, arithmetic (mA)": "leakage_ma",
            "Budget (mA)": "budget_ma",
            "No-trip level (mA)": "no_trip_ma",
        }[header[index]]
        assert plotted == [c[key] if c[key] is not None else "" for c in doc["circuits"]]
        colours.append("#" + ser.find("c:spPr/a:solidFill/a:srgbClr", NS).get("val").lower())
    assert [row[0] for row in data[: len(doc["circuits"])]] == [c["circuit"] for c in doc["circuits"]]
    assert names == ["Leakage, arithmetic (mA)", "Budget (mA)", "No-trip level (mA)"]
    assert colours == [charts.SEGMENT_COLOURS[0], charts.BUDGET_COLOUR, charts.NO_TRIP_COLOUR]


def _odd_workbook(folder: Path) -> Path:
    """Circuits and loads with the values that take other ways: an unprotected circuit, a circuit and a load with
    no leakage at all (no phase), an unplaced load, a load with a note of formula-like text."""
    return write_workbook(
        folder / "odd.xlsx",
        {
            "Circuits": [
                CIRCUITS_HEADER,
                ["K1", "gfci-a", 120, 60, "single", 20, 12, "Kitchen"],
                ["U1", "none", 230, 50, "single", 16, None, "Shed"],
                ["Z1", "rcd-30", 230, 50, "single", 16, None, "Store"],
                ["E1", "rcd-30", 230, 50, "single", 32, 40, "Office"],
            ],
            "Loads": [
                LOADS_HEADER,
                ["Filter", "K1", None, 3, None, "4.7 nF", None, None, "Kitchen"],
                ["Heater", "K1", None, 1, None, None, "2 MΩ", None, "Kitchen"],
                ["Drill", "U1", None, 1, "0.5 mA", None, None, None, "Shed"],
                ["Off", "Z1", None, 1, "0 mA", None, None, None, "Store"],
                ["Meter", "E1", None, 2, "0.75 mA", None, None, None, "Office"],
                ["=Spare", None, None, 1, "0.2 mA", None, None, None, "Office"],
            ],
        },
    )


def _same(a: object, b: object) -> bool:
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a):
        return math.isnan(b)
    return type(a) is type(b) and a == b


@pytest.mark.parametrize("source", ["demo", "uk", "odd"])
def test_result_sheets_hold_the_json_documents_values(tmp_path: Path, source: str) -> None:
    """Every cell of the Circuit results and Load results sheets is the --json record's value under the column's
    key, with its type (an int stays an int, a rounded float the same float; None an empty cell)."""
    path = {
        "demo": example_path(),
        "uk": Path(example_path()).parent / "tanners-row-flat.xlsx",
        "odd": _odd_workbook(tmp_path),
    }[source]
    result = check(read_project(Path(path)))
    doc = output.to_json(result)
    sheets = {sheet.name: sheet for sheet in output.result_sheets(result)}
    for name, columns, records in (
        ("Circuit results", output.CIRCUIT_COLUMNS, doc["circuits"]),
        ("Load results", output.LOAD_COLUMNS, doc["loads"]),
    ):
        rows = sheets[name].rows[: len(records)]
        assert len(rows) == len(records)
        for row, record in zip(rows, records):
            expected = [record[key] for _, key, _ in columns]
            assert len(row) == len(expected) and all(map(_same, row, expected)), (name, row, expected)
    assert any(r["phase_deg"] is None for r in doc["loads"]) or source != "odd"
    assert any(c["budget_source"] is None for c in doc["circuits"]) or source != "odd"


def _step(x: float, steps: int) -> float:
    for _ in range(abs(steps)):
        x = math.nextafter(x, math.inf if steps > 0 else -math.inf)
    return x


@settings(max_examples=300, deadline=None)
@given(
    values=st.lists(st.one_of(st.none(), st.floats(), st.floats(-1e6, 1e6), st.integers(-(10**6), 10**6)), max_size=40),
    digits=st.sampled_from([1, 4, 6]),
)
def test_rounding_a_column_is_pythons_round(values: list, digits: int) -> None:
    """The column-at-a-time rounding gives what round(float(x), digits) gives (None for None, NaN and ±inf)."""
    expected = [
        None if v is None or (isinstance(v, float) and not math.isfinite(v)) else round(float(v), digits)
        for v in values
    ]
    assert [repr(v) for v in output._rounded(values, digits)] == [repr(v) for v in expected]


def test_rounding_a_column_is_pythons_round_next_to_ties() -> None:
    """Values within a few ulps of a decimal tie (k + ½)·10⁻ⁿ, where x·10ⁿ in floating point can land on the
    other side: each is still rounded as round() rounds it."""
    rng = random.Random(16)
    for digits in (1, 4, 6):
        values = [
            _step((rng.randrange(-(10**8), 10**8) + 0.5) / 10**digits, rng.randrange(-3, 4)) for _ in range(20000)
        ]
        values += [rng.uniform(-1, 1) * 10.0 ** rng.randrange(-320, 300) for _ in range(5000)]
        assert [repr(v) for v in output._rounded(values, digits)] == [repr(round(v, digits)) for v in values]


def test_phases_of_a_column_are_phase_deg() -> None:
    """Zero, signed zeros, NaN and infinite parts and the four quadrants: the same as phase_deg one by one."""
    nan, inf = math.nan, math.inf
    phasors = [0j, -0j, complex(-0.0, -0.0), complex(nan, 0), complex(0, nan), complex(inf, 0), complex(inf, inf)]
    phasors += [complex(-inf, nan), 1j, -1 + 0j, complex(-1, -0.0), complex(1e-320, 0), 3 + 4j, -3 - 4j, 3 - 4j]
    got = output._phases_deg(phasors)
    expected = [None if abs(p) == 0 else round(math.degrees(math.atan2(p.imag, p.real)), 1) for p in phasors]
    assert [repr(v) for v in got] == [repr(v) for v in expected]
