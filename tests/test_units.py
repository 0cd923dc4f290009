"""The number reader: one number, at most one unit, nothing else.

References: pint (the unit library the factors come from) for every conversion, and for what its expression
parser would make of the refused texts; Python's float() for the number grammar; 1 ft = 0.3048 m exactly (the
international foot, 1959 agreement).
"""

from __future__ import annotations

import math
import re

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from leakbudget.input import units
from leakbudget.input.units import UnitProblem, to_unit


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("0.75 mA", "mA", 0.75),
        ("750 uA", "mA", 0.75),
        ("750 µA", "mA", 0.75),
        ("750 μA", "mA", 0.75),
        ("750µA", "mA", 0.75),
        ("750\u00a0µA", "mA", 0.75),  # a no-break space between number and unit
        ("4.7 nF", "nF", 4.7),
        ("4700 pF", "nF", 4.7),
        ("30 ft", "m", 9.144),
        ("30 feet", "m", 9.144),
        ("30'", "m", 9.144),  # the prime for feet on a cable run
        ("30’", "m", 9.144),  # the same after a spreadsheet's autocorrect
        ("2.2 kW", "W", 2200.0),
        ("2 MΩ", "Mohm", 2.0),
        ("2 megohm", "Mohm", 2.0),
        ("2 megohms", "Mohm", 2.0),  # a unit name from pint's registry (its plural rule)
        ("250 microampere", "mA", 0.25),
        ("100 nF/km", "pF/m", 100.0),
        (0.5, "mA", 0.5),
        ("0.5", "mA", 0.5),
        (".5", "mA", 0.5),
        ("5.", "mA", 5.0),
        ("+0.5", "mA", 0.5),
        ("4.7e-1 mA", "mA", 0.47),
        ("1,500.0", "W", 1500.0),  # a decimal point after the group: the comma can only group thousands
        ("12,500.5", "W", 12500.5),
        ("1,000,000", "W", 1e6),  # two groups: no decimal comma is written twice
        ("-4.7", "nF", -4.7),  # read; every column then refuses a negative value
        ("−4.7", "nF", -4.7),  # the minus sign U+2212
    ],
)
def test_accepted_spellings(text, unit, expected):
    assert to_unit(text, unit) == pytest.approx(expected, rel=1e-12)


def test_a_percentage_is_read_only_where_a_fraction_is_meant():
    assert to_unit("30 %", "dimensionless", percent=True) == pytest.approx(0.30)
    with pytest.raises(UnitProblem, match="'30 %' is a percentage or share, where a plain number belongs"):
        to_unit("30 %", "dimensionless")
    with pytest.raises(UnitProblem, match="'50 %' is a percentage or share, which is never a current"):
        to_unit("50 %", "mA", percent=True)


def test_bare_numbers_take_the_default_unit_and_convert():
    assert to_unit(50, "ft", "m") == pytest.approx(15.24)
    assert to_unit("50", "feet", "m") == pytest.approx(15.24)


# Texts pint's expression parser evaluates (reference: pint itself, asked below), each with the sentence the
# reader refuses it with instead.
ARITHMETIC = [
    ("5/2 mA", "mA", "'5/2 mA' is a calculation or a range, and leakbudget does no arithmetic"),
    ("2 3 mA", "mA", "'2 3 mA' holds more than one number"),
    ("2;3 mA", "mA", "'2;3 mA' holds more than one number"),
    ("2 mA 3", "mA", "'2 mA 3' holds more than one number"),
    ("pi mA", "mA", "'pi mA' is not a number with a unit: it has no digits"),
    ("2**3 mA", "mA", "'2**3 mA' is a calculation or a range, and leakbudget does no arithmetic"),
    ("1e-400", "mA", "'1e-400' is too small to tell from zero (below 1e-308)"),
    ("50 %", "mA", "'50 %' is a percentage or share, which is never a current"),
    ("<0.1 mA", "mA", "'<0.1 mA' is a bound, not a value"),
    ("~0.4 mA", "mA", "'~0.4 mA' is an approximation, not a value"),
    ("1,500 W", "W", "'1,500 W' could be 1500 or 1.500: a comma separates thousands in some countries and decimals"),
    ("0,75 mA", "mA", "'0,75 mA' has a decimal comma or a misplaced thousands separator"),
]
REFUSED = [
    *ARITHMETIC,
    ("240-10 V", "V", "'240-10 V' is a calculation or a range, and leakbudget does no arithmetic"),
    ("9**9**9 mA", "mA", "'9**9**9 mA' is a calculation or a range, and leakbudget does no arithmetic"),
    ("1.000,5", "W", "'1.000,5' has a decimal comma or a misplaced thousands separator"),
    ("1,00,000", "W", "'1,00,000' has a decimal comma or a misplaced thousands separator"),
    ("1 000", "W", "'1 000' holds more than one number"),
    ("≤0.1 mA", "mA", "'≤0.1 mA' is a bound, not a value"),
    ("max 0.5 mA", "mA", "'max 0.5 mA' is a bound, not a value"),
    ("approx. 0.4 mA", "mA", "'approx. 0.4 mA' is an approximation, not a value"),
    ("0.4? mA", "mA", "'0.4? mA' is not one number with at most one unit"),
    ("0.3 ± 0.1 mA", "mA", "'0.3 ± 0.1 mA' is a value with a tolerance"),
    ("0.3-0.5 mA", "mA", "'0.3-0.5 mA' is a calculation or a range"),
    ("=2*0.4", "mA", "'=2*0.4' is a calculation or a range"),
    ("1.5.3", "mA", "'1.5.3' has more than one decimal point"),
    ("1e400 nF", "nF", "'1e400 nF' is not a finite number"),
    ("inf", "mA", "'inf' is not a finite number"),
    ("nan", "mA", "'nan' is not a finite number"),
    ("abc", "mA", "'abc' is not a number with a unit: it has no digits"),
    ("1 mA mA", "mA", "'1 mA mA' is not one number with at most one unit"),
    ("5 kg", "mA", "'5 kg' is in kg, which is not a current"),
    ("30'", "mA", "'30'' is in ' (ft), which is not a current"),
    ("0.75 ma", "mA", "'0.75 ma' is in ma, which is not a current"),  # pint's ma is a milliyear
    ("230 v", "V", "'230 v' has the unit 'v', which is not a unit of voltage leakbudget knows"),
    ("5 mA", "dimensionless", "'5 mA' is in mA, which is not a plain number"),
    ("٣ mA", "mA", "'٣ mA' is not a number with a unit: it has no digits"),  # an Arabic-Indic three
    ("1" * 101, "mA", "the text (101 characters) is too long to be a number with a unit"),
    (True, "mA", "TRUE is a yes/no value, not a number"),
    (float("nan"), "mA", "'nan' is not a finite number"),
    (float("inf"), "mA", "'inf' is not a finite number"),
]


@pytest.mark.parametrize(("text", "unit", "message"), REFUSED, ids=[str(r[0])[:20] for r in REFUSED])
def test_refused_with_its_sentence(text, unit, message):
    with pytest.raises(UnitProblem) as info:
        to_unit(text, unit)
    assert str(info.value).startswith(message)


@pytest.mark.parametrize(("text", "unit", "_message"), ARITHMETIC, ids=[r[0] for r in ARITHMETIC])
def test_pint_would_have_computed_what_the_reader_refuses(text, unit, _message):
    """The danger, shown with pint itself: its expression parser gives each of these a value (2.5 mA for 5/2 mA,
    8 mA for 2**3 mA, 0.1 mA for <0.1 mA, 1500 W for 1,500 W, 0 mA for 0,75 mA)."""
    assert units.registry().Quantity(text) is not None


def test_case_is_kept_and_the_right_spelling_named():
    with pytest.raises(UnitProblem) as info:
        to_unit("0.75 ma", "mA")
    assert info.value.hint == "units are case-sensitive: write mA"
    with pytest.raises(UnitProblem) as info:
        to_unit("60 HZ", "Hz")
    assert info.value.hint == "units are case-sensitive: write Hz"
    # mohm is a milliohm (pint), not a megohm: read as such, the insulation check then refuses it
    assert to_unit("2 mohm", "Mohm") == pytest.approx(2e-9)


def test_the_expression_parser_never_sees_a_cell(monkeypatch):
    """pint's parse_expression, parse_units and Quantity (from a string) are never called for any cell text;
    unit names outside the common spellings go through parse_unit_name, a name lookup."""
    ureg = units.registry()

    def guarded(original):  # noqa: ANN001, ANN202
        def call(*args, **kwargs):  # noqa: ANN002, ANN003, ANN202
            if any(isinstance(a, str) for a in args):
                raise AssertionError(f"pint's parser called with {args}")
            return original(*args, **kwargs)

        return call

    for name in ("parse_expression", "parse_units", "Quantity", "Unit"):
        monkeypatch.setattr(ureg, name, guarded(getattr(ureg, name)))
    for cache in (units._read_text, units._resolve, units.unit_factor):
        cache.cache_clear()
    assert to_unit("250 microampere", "mA") == pytest.approx(0.25)
    assert to_unit("3 megohms", "Mohm") == pytest.approx(3.0)
    assert to_unit("12 yards", "m") == pytest.approx(12 * 0.9144)
    for text, unit, _ in REFUSED:
        with pytest.raises(UnitProblem):
            to_unit(text, unit)
    for cache in (units._read_text, units._resolve, units.unit_factor):
        cache.cache_clear()


def test_the_precomputed_factors_are_what_pint_computes():
    """leakbudget/unit_factors.py against pint, the reference library it was generated from."""
    from leakbudget.input.unit_factors import FACTORS
    from leakbudget.input.units import COMMON_SPELLINGS, unit_factor_table

    fresh = unit_factor_table()
    assert list(FACTORS) == list(COMMON_SPELLINGS) == list(fresh)
    for spelling, (dimension, factor) in FACTORS.items():
        assert fresh[spelling][0] == dimension and fresh[spelling][1] == pytest.approx(factor, rel=1e-15), spelling


def test_common_spellings_convert_as_pint_converts_them():
    from leakbudget.input.unit_factors import FACTORS

    ureg = units.registry()
    for spelling, (dimension, _) in FACTORS.items():
        for target, (target_dimension, _) in FACTORS.items():
            if dimension == target_dimension:
                expected = ureg.Quantity(2.5, spelling).to(target).magnitude
                assert to_unit(f"2.5 {spelling}", target) == pytest.approx(expected, rel=1e-12), (spelling, target)


def test_common_spellings_do_not_import_pint():
    import subprocess
    import sys

    code = (
        "import sys; from leakbudget.input.units import to_unit; "
        "values = [to_unit('250 uA', 'mA'), to_unit('4.7nF', 'nF'), to_unit('30 ft', 'm'), to_unit(\"30'\", 'm'), "
        "to_unit(50, 'ft', 'm'), to_unit('30 %', 'dimensionless', percent=True)]; "
        "print('pint' in sys.modules, values)"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stdout.startswith("False ["), done.stdout


# ------------------------------------------------------------------------------------------- properties

FINITE = st.floats(min_value=1e-200, max_value=1e200) | st.just(0.0)
TARGETS = {"[current]": "mA", "[length]": "m", "1 / [time]": "Hz"}


@settings(max_examples=300, deadline=None)
@given(FINITE, st.sampled_from(["mA", "A", "uA", "µA", "ft", "feet", "m", "km", "mm", "Hz", "'"]))
def test_any_float_written_with_repr_and_a_unit_reads_as_pint_converts_it(value, spelling):
    """repr(float) and a unit: the same value pint's conversion gives (the prime as pint's ft)."""
    from leakbudget.input.unit_factors import FACTORS

    dimension = FACTORS[units.ALIASES.get(spelling, spelling)][0]
    target = TARGETS[dimension]
    expected = units.registry().Quantity(value, units.ALIASES.get(spelling, spelling)).to(target).magnitude
    assert to_unit(f"{value!r} {spelling}", target) == pytest.approx(expected, rel=1e-12)
    assert to_unit(f"{value!r}{spelling}", target) == pytest.approx(expected, rel=1e-12)


@settings(max_examples=300, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_any_float_written_with_repr_reads_back_exactly(value):
    """Python's float() is the reference for the number: repr round-trips through the reader bit for bit (in the
    column's own unit, and with it written out)."""
    assert to_unit(repr(value), "mA") == float(repr(value)) == value
    assert to_unit(f"{value!r} mA", "mA") == value


JUNK = st.lists(
    st.sampled_from(list("0123456789.,eE+-−*/^%'’ ;<>~=()µΩmAuVkWHzft\u00a0\t×÷±") + ["mA", "**", "e-", "pi", "nan"]),
    max_size=30,
).map("".join)


@settings(max_examples=1000, deadline=None)
@given(JUNK, st.sampled_from(["mA", "V", "m", "dimensionless"]), st.booleans())
def test_junk_is_refused_with_a_sentence_or_read_as_a_finite_number(text, unit, percent):
    try:
        value = to_unit(text, unit, percent=percent and unit == "dimensionless")
    except UnitProblem as exc:  # any other exception type fails the test
        message = str(exc)
        assert message and "\n" not in message and (exc.hint is None or "\n" not in exc.hint)
        return
    assert math.isfinite(value) and re.search("[0-9]", text)


@settings(max_examples=300, deadline=None)
@given(JUNK)
def test_junk_in_a_cell_becomes_one_sentence_naming_the_cell(text):
    """Through the table, a refused cell is one WorkbookError sentence naming file, sheet, row, column, cell."""
    from pathlib import Path

    from leakbudget.errors import WorkbookProblems
    from leakbudget.input.schema import LOADS
    from leakbudget.input.table import Problems, RawTable

    path = Path("plan.xlsx")
    table = RawTable.from_grid(path, "Loads", [["Load", "Leakage"], ["Kettle", text]], LOADS)
    table.problems = Problems(path)
    row = table.rows[0] if table.rows else None
    if row is None:  # a blank cell and a blank name: no row at all
        return
    value = table.number(row, "Leakage", "mA")
    try:
        table.problems.raise_if_any(["Loads"])
    except WorkbookProblems as exc:
        assert value is None
        sentence = str(exc)
        assert sentence.startswith("plan.xlsx, sheet 'Loads', row 2, column 'Leakage', cell B2: ")
        assert sentence.endswith(".") and "\n" not in sentence
        return
    assert value is None or (math.isfinite(value) and value >= 0)
