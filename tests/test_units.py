"""Unit parsing: pint is the reference; every accepted spelling converts to the column's unit."""

from __future__ import annotations

import pytest

from leakbudget.input.units import UnitProblem, to_unit


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("0.75 mA", "mA", 0.75),
        ("750 uA", "mA", 0.75),
        ("750 µA", "mA", 0.75),
        ("750 μA", "mA", 0.75),
        ("4.7 nF", "nF", 4.7),
        ("4700 pF", "nF", 4.7),
        ("30 ft", "m", 9.144),
        ("2.2 kW", "W", 2200.0),
        ("2 MΩ", "Mohm", 2.0),
        ("2 megohm", "Mohm", 2.0),
        (0.5, "mA", 0.5),
        ("0.5", "mA", 0.5),
        ("1,500", "W", 1500.0),
        ("30 %", "dimensionless", 0.30),
    ],
)
def test_accepted_spellings(text, unit, expected):
    assert to_unit(text, unit) == pytest.approx(expected)  # 1 ft = 0.3048 m exactly (international foot)


def test_bare_numbers_take_the_default_unit_and_convert():
    assert to_unit(50, "ft", "m") == pytest.approx(15.24)


@pytest.mark.parametrize("bad", ["5 kg", "abc", True, float("nan"), float("inf"), "1 mA mA"])
def test_refused(bad):
    with pytest.raises(UnitProblem):
        to_unit(bad, "mA")


def test_wrong_dimension_names_it():
    with pytest.raises(UnitProblem, match="not a current"):
        to_unit("5 kg", "mA")


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
    from leakbudget.input.units import registry

    ureg = registry()
    for spelling, (dimension, _) in FACTORS.items():
        for target, (target_dimension, _) in FACTORS.items():
            if dimension == target_dimension:
                expected = ureg.Quantity(f"2.5 {spelling}").to(target).magnitude
                assert to_unit(f"2.5 {spelling}", target) == pytest.approx(expected, rel=1e-12), (spelling, target)


def test_common_spellings_do_not_import_pint():
    import subprocess
    import sys

    code = (
        "import sys; from leakbudget.input.units import to_unit; "
        "values = [to_unit('250 uA', 'mA'), to_unit('4.7nF', 'nF'), to_unit('30 ft', 'm'), to_unit(50, 'ft', 'm')]; "
        "print('pint' in sys.modules, values)"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stdout.startswith("False ["), done.stdout
