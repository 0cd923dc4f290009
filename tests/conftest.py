"""Shared test helpers: build small workbooks with XlsxWriter (a library independent of the reader)."""

from __future__ import annotations

from datetime import date, datetime
from pathlib import Path
from typing import Any

import pytest

CIRCUITS_HEADER = ["Circuit", "Device", "Voltage", "Frequency", "System", "Rating", "Cable length", "Rooms"]
LOADS_HEADER = [
    "Load",
    "Circuit",
    "Appliance",
    "Quantity",
    "Leakage",
    "Y capacitance",
    "Insulation resistance",
    "Leg",
    "Room",
]


def write_workbook(path: Path, sheets: dict[str, list[list[Any]]]) -> Path:
    """Write ``sheets`` (name → rows, first row the header) to an .xlsx at ``path``."""
    import xlsxwriter

    book = xlsxwriter.Workbook(str(path))
    book.set_properties({"created": datetime(2026, 1, 5, 9, 30)})  # the same bytes on every run
    date_format = book.add_format({"num_format": "yyyy-mm-dd hh:mm"})
    for name, rows in sheets.items():
        ws = book.add_worksheet(name)
        for i, row in enumerate(rows):
            for j, value in enumerate(row):
                if value is None:
                    continue
                if isinstance(value, str):
                    ws.write_string(i, j, value)
                elif isinstance(value, (date, datetime)):
                    ws.write_datetime(i, j, value, date_format)  # a date cell, as a spreadsheet program saves it
                else:
                    ws.write(i, j, value)
    book.close()
    return path


def basic_sheets() -> dict[str, list[list[Any]]]:
    """A small valid workbook: one UL 943 kitchen circuit, one 30 mA RCD office circuit."""
    return {
        "Circuits": [
            CIRCUITS_HEADER,
            ["K1", "gfci-a", 120, 60, "single", 20, None, "Kitchen"],
            ["E1", "rcd-30", 230, 50, "single", 32, None, "Office"],
        ],
        "Loads": [
            LOADS_HEADER,
            ["Filter", "K1", None, 1, None, "4.7 nF", None, None, "Kitchen"],
            ["Meter", "E1", None, 2, "0.75 mA", None, None, None, "Office"],
        ],
    }


@pytest.fixture
def make_workbook(tmp_path: Path):
    def make(sheets: dict[str, list[list[Any]]] | None = None, name: str = "plan.xlsx") -> Path:
        return write_workbook(tmp_path / name, sheets if sheets is not None else basic_sheets())

    return make


SLOW_FIXTURES = {"demo_run"}  # builds the demo's HTML and PDF report once (several seconds)


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    """Tests that use a slow fixture are slow too (`-m "not slow"` leaves them out)."""
    for item in items:
        if SLOW_FIXTURES & set(getattr(item, "fixturenames", ())):
            item.add_marker(pytest.mark.slow)
