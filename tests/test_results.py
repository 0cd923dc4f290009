"""The native spreadsheet chart `check` writes on the 'Circuit results' sheet: there once, over the right cells.

The chart part is read as DrawingML (ECMA-376 Part 1 §21.2: c:ser holds c:tx/c:cat/c:val formula references and
c:spPr the series fill); the cells it points at are read back with python-calamine, independent of the writer.
"""

from __future__ import annotations

import json
import shutil
import zipfile

import defusedxml.ElementTree as ET
from typer.testing import CliRunner

from leakbudget.api import example_path
from leakbudget.cli.app import app
from leakbudget.reporting import charts

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
