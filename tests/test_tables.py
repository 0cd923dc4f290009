"""RawTable reads whole columns at once but reports problems row by row, as reading cell by cell would.

References: the row-by-row order of checks in leakbudget.workbook.read.read_loads (Quantity before Leakage in a row), and
pint, counted as it parses, for "each distinct text once".
"""

from __future__ import annotations

import pytest

from leakbudget.errors import WorkbookError
from leakbudget.input import units
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER


def sheets_with_loads(loads: list[list]) -> dict[str, list[list]]:
    return {
        "Circuits": [CIRCUITS_HEADER, ["E1", "rcd-30", 230, 50, "single", 32, None, "Office"]],
        "Loads": [LOADS_HEADER, *loads],
    }


def load(quantity=1, leakage="0.5 mA"):  # noqa: ANN001, ANN201
    return ["Printer", "E1", None, quantity, leakage, None, None, None, "Office"]


@pytest.mark.parametrize(
    ("loads", "message"),
    [
        # the Quantity column is read whole at row 2, with row 3's bad cell, yet row 2's Leakage is reported
        (
            [load(leakage="lots"), load(quantity="two")],
            "plan.xlsx, sheet 'Loads', row 2, column 'Leakage', cell E2: 'lots' is not a number with a unit",
        ),
        (
            [load(quantity="two"), load(leakage="lots")],
            "plan.xlsx, sheet 'Loads', row 2, column 'Quantity', cell D2: 'two' is not a number with a unit",
        ),
        (
            [load(), load(leakage=-1), load(leakage="lots")],
            "plan.xlsx, sheet 'Loads', row 3, column 'Leakage', cell E3: '-1' must not be negative",
        ),
    ],
    ids=["later-row-other-column", "earlier-row-first", "sign-checked-on-access"],
)
def test_the_first_problem_in_row_order_is_reported(make_workbook, loads, message):
    with pytest.raises(WorkbookError) as info:
        read_project(make_workbook(sheets_with_loads(loads)))
    assert str(info.value).startswith(message)


def test_blank_cells_are_none_whatever_they_hold(make_workbook):
    loads = [
        ["Printer", "E1", None, 1, "0.5 mA", None, None, "   ", "  "],
        ["Scanner", "E1", None, None, " ", "2.2 nF", None, "", None],
    ]
    project = read_project(make_workbook(sheets_with_loads(loads)))
    assert [(x.room, x.leg_text, x.quantity, x.leakage_ma) for x in project.loads] == [
        (None, "L1", 1, pytest.approx(0.5)),
        (None, "L1", 1, None),
    ]


def test_pint_parses_each_distinct_text_once(make_workbook, monkeypatch):
    """Texts outside the common spellings go to pint's parser: once per distinct text, not once per cell."""
    texts = ["250 microampere", "0.4 milliampere", "620 microamperes"]
    loads = [["Load", "E1", None, 1, texts[i % 3], None, None, None, None] for i in range(300)]
    path = make_workbook(sheets_with_loads(loads))
    ureg = units.registry()
    parsed: list[str] = []

    class Counting:
        def Quantity(self, value, *args):  # noqa: ANN001, ANN201, N802
            if isinstance(value, str) and not args:
                parsed.append(value)
            return ureg.Quantity(value, *args)

    monkeypatch.setattr(units, "registry", lambda: Counting())
    units._factor_for_text.cache_clear()
    project = read_project(path)
    assert sorted(parsed) == sorted(texts)
    assert [x.leakage_ma for x in project.loads[:3]] == pytest.approx([0.25, 0.4, 0.62])  # pint's own answers
