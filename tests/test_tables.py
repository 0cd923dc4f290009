"""RawTable reads whole columns at once; a reading collects every bad cell and lists them in the sheet's order.

References: the sheet's own order (row, then column) for the list; pint, its lookups counted, for "each distinct
unit name once" and its conversions for the values.
"""

from __future__ import annotations

import unicodedata
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from leakbudget.catalogue import WAVEFORMS
from leakbudget.errors import WorkbookProblems
from leakbudget.input import units
from leakbudget.input.ranges import STANDING_LEAKAGE_MA
from leakbudget.input.schema import LOADS
from leakbudget.input.table import BAD, NO, YES, Problems, RawTable, Unreadable
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER


def sheets_with_loads(loads: list[list]) -> dict[str, list[list]]:
    return {
        "Circuits": [CIRCUITS_HEADER, ["E1", "rcd-30", 230, 50, "single", 32, None, "Office"]],
        "Loads": [LOADS_HEADER, *loads],
    }


def load(quantity=1, leakage="0.5 mA"):  # noqa: ANN001, ANN201
    return ["Printer", "E1", None, quantity, leakage, None, None, None, "Office"]


def problems_of(path) -> list[str]:  # noqa: ANN001
    with pytest.raises(WorkbookProblems) as info:
        read_project(path)
    return [str(p) for p in info.value.problems]


def test_every_bad_cell_of_every_row_is_reported_once_in_the_sheets_order(make_workbook):
    """Row 2 has two bad cells, row 3 one: all three, by row then column, though the Quantity column is read whole
    first; the bad Leakage is not reported again as a load without a leakage figure."""
    path = make_workbook(sheets_with_loads([load(quantity="two", leakage="lots"), load(leakage=-1)]))
    assert problems_of(path) == [
        "plan.xlsx, sheet 'Loads', row 2, column 'Quantity', cell D2: 'two' is not a number with a unit: it has no "
        "digits; type a plain number.",
        "plan.xlsx, sheet 'Loads', row 2, column 'Leakage', cell E2: 'lots' is not a number with a unit: it has no "
        "digits; type a number (taken in mA) or a number with a unit of current (mA, µA or A).",
        "plan.xlsx, sheet 'Loads', row 3, column 'Leakage', cell E3: '-1' must not be negative.",
    ]


def test_a_bad_circuit_row_does_not_make_its_loads_unknown(make_workbook):
    """A circuit whose Device is unknown is one problem; its loads are not reported as naming an unknown circuit,
    but a load on a circuit that exists nowhere is."""
    sheets = sheets_with_loads([load(), ["Lamp", "E9", None, 1, "0.1 mA", None, None, None, "Office"]])
    sheets["Circuits"][1][1] = "rcd-31"
    assert [p.split(": ")[0] for p in problems_of(make_workbook(sheets))] == [
        "plan.xlsx, sheet 'Circuits', row 2, column 'Device', cell B2",
        "plan.xlsx, sheet 'Loads', row 3, column 'Circuit', cell B3",
    ]


def test_problems_beyond_the_limit_are_counted(make_workbook):
    from leakbudget.errors import PROBLEM_LIMIT

    path = make_workbook(sheets_with_loads([load(leakage=f"{i}/2 mA") for i in range(PROBLEM_LIMIT + 7)]))
    with pytest.raises(WorkbookProblems) as info:
        read_project(path)
    assert (len(info.value.problems), info.value.unlisted) == (PROBLEM_LIMIT, 7)
    lines = str(info.value).splitlines()
    assert lines[0] == f"plan.xlsx: {PROBLEM_LIMIT + 7} problems; fix them all, then run again:"
    assert lines[1].startswith("- plan.xlsx, sheet 'Loads', row 2, column 'Leakage', cell E2: '0/2 mA' is a calc")
    assert lines[-1] == f"- and 7 more (the first {PROBLEM_LIMIT} are listed)."
    assert len(lines) == PROBLEM_LIMIT + 2


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


def test_pint_looks_up_each_distinct_unit_name_once(make_workbook, monkeypatch):
    """Unit names outside the common spellings are looked up in pint's registry once per name, not once per cell,
    and read as pint's conversion gives them."""
    texts = ["250 microampere", "0.4 milliampere", "620 microamperes"]
    loads = [["Load", "E1", None, 1, texts[i % 3], None, None, None, None] for i in range(300)]
    path = make_workbook(sheets_with_loads(loads))
    looked_up: list[str] = []
    original = units._pint_name

    def counting(name: str):  # noqa: ANN202
        looked_up.append(name)
        return original(name)

    monkeypatch.setattr(units, "_pint_name", counting)
    for cache in (units._read_text, units._resolve, units.unit_factor):
        cache.cache_clear()
    project = read_project(path)
    assert sorted(looked_up) == ["microampere", "microamperes", "milliampere"]
    ureg = units.registry()
    expected = [ureg.Quantity(float(t.split()[0]), t.split()[1]).to("mA").magnitude for t in texts]
    assert [x.leakage_ma for x in project.loads[:3]] == pytest.approx(expected, rel=1e-12)  # pint's own answers


# ---------------------------------------------------------------- whole columns agree with the row accessors

_CELLS = st.one_of(
    st.none(),
    st.sampled_from(["", "  ", "yes", "No", "x", "maybe", "plug", "SINE", "pulsating_dc", "L1", " 12 ", "1,500"]),
    st.sampled_from(["0.5 mA", "750 uA", "-3", "2 kg", "5/2", "1e400", "4.7 nF", "nan", "30 %", "0"]),
    st.floats(allow_nan=True, allow_infinity=True, width=32),
    st.integers(-5, 5),
    st.booleans(),
    st.builds(lambda m: Unreadable(m, "fix it"), st.sampled_from(["a formula with no saved result", "#DIV/0!"])),
)


def _table(rows: list[list]) -> RawTable:
    grid = [["Load", "Circuit", "Quantity", "Leakage", "Stays", "Waveform"], *rows]
    table = RawTable.from_grid(Path("plan.xlsx"), "Loads", grid, LOADS)
    table.problems = Problems(Path("plan.xlsx"))
    return table


READS = [
    ("text", "Load", ()),
    ("number", "Quantity", ("dimensionless",), {"positive": True}),
    ("number", "Leakage", ("mA",), {"plausible": STANDING_LEAKAGE_MA}),
    ("number", "Circuit", ("A",), {"non_negative": False}),
    ("flag", "Stays", ()),
    ("choice", "Waveform", (WAVEFORMS,)),
    ("choice", "Circuit", (("plug", "fixed"), "plug")),
]


def _expected(kind: str, cell: object, args: tuple, kwargs: dict) -> object:
    """What a cell reads as, written out from the rules the README gives for each kind of column (the reference):
    BAD for a cell that is a problem."""
    if isinstance(cell, Unreadable) or (isinstance(cell, float) and cell != cell):
        return BAD
    blank = cell is None or (isinstance(cell, str) and not cell.strip())
    if kind == "number":
        if blank:
            return None
        try:
            value = units.to_unit(cell, *args)
        except units.UnitProblem:
            return BAD
        positive, non_negative = kwargs.get("positive", False), kwargs.get("non_negative", True)
        plausible = kwargs.get("plausible")
        if (positive and value <= 0) or (non_negative and value < 0):
            return BAD
        return BAD if plausible is not None and not plausible.low <= value <= plausible.high else value
    if blank:
        text = None
    elif isinstance(cell, bool):
        text = "yes" if cell else "no"
    elif isinstance(cell, float) and cell.is_integer():
        text = str(int(cell))
    else:
        text = unicodedata.normalize("NFC", str(cell).strip())
    if kind == "text":
        return text
    if kind == "flag":
        if text is None:
            return None
        return True if text.lower() in YES else False if text.lower() in NO else BAD
    allowed, default = args[0], (args[1] if len(args) > 1 else None)
    if text is None:
        return default
    return next((a for a in allowed if a.lower() == text.lower().replace("_", "-")), BAD)


@settings(max_examples=80, deadline=None)
@given(st.lists(st.lists(_CELLS, min_size=6, max_size=6), min_size=1, max_size=12))
def test_a_column_read_whole_answers_what_each_row_answers(rows):
    """Each whole-column read gives, row by row, what the column's rules give (:func:`_expected`), BAD exactly
    where they find a problem; the row accessor answers the same and records the problem there."""
    header = ["Load", "Circuit", "Quantity", "Leakage", "Stays", "Waveform"]
    for kind, column, args, *options in READS:
        kwargs = options[0] if options else {}
        whole, by_row = _table(rows), _table(rows)
        plural = {"text": "texts", "number": "numbers", "flag": "flags", "choice": "choices"}[kind]
        column_values = getattr(whole, plural)(column, *args, **kwargs)
        for k, row in enumerate(by_row.rows):
            expected = _expected(kind, row[1][header.index(column)], args, kwargs)
            assert column_values[k] == expected or (column_values[k] is BAD and expected is BAD), (kind, row)
            answer = getattr(by_row, kind)(row, column, *args, **kwargs)
            if expected is BAD:
                assert by_row.failed(row, column) and answer in (None, args[-1] if kind == "choice" else None)
            else:
                assert not by_row.failed(row, column) and answer == expected, (kind, row, answer)
        assert not whole.problems  # reading a column whole records nothing
