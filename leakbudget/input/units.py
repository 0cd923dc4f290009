"""Quantities typed by people: "0.75 mA", "750 µA", "4.7 nF", "30 ft", "2.2 kW", or a bare number.

pint does the parsing and the conversion. Each distinct text is parsed once (a workbook repeats the same few
texts thousands of times), and pint is imported only when a cell carries a unit that is not one of the common
spellings below, so most workbooks never pay for its import (about 0.2 s): "<number> <spelling>" is converted with
the factors pint computed for those spellings once, kept in :mod:`leakbudget.input.unit_factors`.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache
from typing import Any

_SIMPLE_NUMBER_CHARS = frozenset("0123456789.+-eE ")
_NUMBER_WITH_UNIT = re.compile(r"([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?) ?(\S+)")

# The unit spellings people type most in these columns (and the columns' own units), with both micro signs.
COMMON_SPELLINGS = (
    "A",
    "mA",
    "uA",
    "µA",
    "μA",
    "F",
    "uF",
    "µF",
    "μF",
    "nF",
    "pF",
    "pF/m",
    "nF/km",
    "pF/ft",
    "ohm",
    "Ω",
    "kohm",
    "kΩ",
    "Mohm",
    "MΩ",
    "megohm",
    "Gohm",
    "GΩ",
    "W",
    "kW",
    "V",
    "kV",
    "Hz",
    "m",
    "mm",
    "km",
    "ft",
)


class UnitProblem(ValueError):
    """A value could not be read as a quantity in the wanted unit; the message says why (no location)."""


@lru_cache(maxsize=1)
def registry() -> Any:
    """The one pint registry of the process (built on first use)."""
    import pint

    ureg: pint.UnitRegistry[Any]
    try:  # pint keeps its parsed definitions in the user's cache folder: ten times faster start-up
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True, cache_folder=":auto:")
    except OSError:  # no writable cache folder
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    ureg.define("megohm = megaohm")
    return ureg


def unit_factor_table() -> dict[str, tuple[str, float]]:
    """Each of :data:`COMMON_SPELLINGS` → (its dimensionality, the factor to SI base units), computed by pint.

    The source of :mod:`leakbudget.input.unit_factors` (regenerate with ``python -m leakbudget.input.units``).
    """
    ureg = registry()
    table = {}
    for spelling in COMMON_SPELLINGS:
        quantity = ureg.Quantity(f"1 {spelling}")
        table[spelling] = (str(quantity.dimensionality), float(quantity.to_base_units().magnitude))
    return table


@lru_cache(maxsize=256)
def _known_factor(unit: str, target_unit: str) -> float | None:
    """``unit`` → ``target_unit`` from pint's precomputed factors; None when either is not listed or the
    dimensions differ (pint then parses, and names the problem)."""
    from leakbudget.input.unit_factors import FACTORS

    have, want = FACTORS.get(unit), FACTORS.get(target_unit)
    if have is None or want is None or have[0] != want[0]:
        return None
    return have[1] / want[1]


@lru_cache(maxsize=65536)
def _factor_for_text(text: str, default_unit: str, target_unit: str) -> float:
    """Parse one text once: return its magnitude in ``target_unit`` (cached per distinct text)."""
    cleaned = _ungrouped(text.strip())
    if "," in cleaned:  # pint would read "0,75" as 0 and "1.000,5" as 1.0005
        raise UnitProblem(
            f"'{text}' has a decimal comma or a misplaced thousands separator; write the decimal "
            "point as '.' (0.75), with no other separators"
        )
    if cleaned and set(cleaned) <= _SIMPLE_NUMBER_CHARS:
        try:
            return _convert(float(cleaned), default_unit, target_unit)
        except ValueError:
            pass
    match = _NUMBER_WITH_UNIT.fullmatch(cleaned)
    if match is not None:
        factor = _known_factor(match.group(2), target_unit)
        if factor is not None:
            return float(match.group(1)) * factor
    if cleaned.endswith("%"):
        try:
            return float(cleaned[:-1]) / 100.0 * _convert(1.0, default_unit, target_unit)
        except ValueError:
            raise UnitProblem(f"'{text}' is not a percentage") from None
    ureg = registry()
    try:
        quantity = ureg.Quantity(cleaned)
    except Exception:
        raise UnitProblem(f"'{text}' is not a number with a unit") from None
    if not hasattr(quantity, "magnitude") or not isinstance(quantity.magnitude, (int, float)):
        raise UnitProblem(f"'{text}' is not a number with a unit")
    if quantity.dimensionless and str(quantity.units) in ("dimensionless", ""):
        return _convert(float(quantity.magnitude), default_unit, target_unit)
    try:
        return float(quantity.to(target_unit).magnitude)
    except Exception:
        written = cleaned.lstrip("+-0123456789.eE ").strip()
        case = f"; units are case-sensitive: write {target_unit}" if written.lower() == target_unit.lower() else ""
        raise UnitProblem(
            f"'{text}' is in {quantity.units:~P}, which is not a {_dimension_name(target_unit)}{case}"
        ) from None


# A number with thousands separators at the start of a text: "1,000", "12,500.5", "-1,000 ft" (not "0,75").
_GROUPED = re.compile(r"[+-]?[1-9][0-9]{0,2}(?:,[0-9]{3})+(?:\.[0-9]*)?(?![0-9,])")


def _ungrouped(text: str) -> str:
    """``text`` with the thousands separators of a leading number removed ('1,000 ft' -> '1000 ft')."""
    match = _GROUPED.match(text)
    return match.group(0).replace(",", "") + text[match.end() :] if match else text


@lru_cache(maxsize=256)
def _unit_factor(default_unit: str, target_unit: str) -> float:
    if default_unit == target_unit:
        return 1.0
    known = _known_factor(default_unit, target_unit)
    if known is not None:
        return known
    try:
        return float(registry().Quantity(1.0, default_unit).to(target_unit).magnitude)
    except Exception:  # pint raises several types for a unit text it cannot use
        raise UnitProblem(f"'{default_unit}' is not a unit of {_dimension_name(target_unit)}") from None


def _convert(magnitude: float, default_unit: str, target_unit: str) -> float:
    return magnitude * _unit_factor(default_unit, target_unit)


@lru_cache(maxsize=64)
def _dimension_name(unit: str) -> str:
    names = {
        "mA": "current",
        "A": "current",
        "nF": "capacitance",
        "Mohm": "resistance",
        "W": "power",
        "V": "voltage",
        "Hz": "frequency",
        "m": "length",
        "pF/m": "capacitance per length",
    }
    return names.get(unit, f"quantity convertible to {unit}")


def to_unit(value: Any, default_unit: str, target_unit: str | None = None) -> float:
    """Return ``value`` as a float in ``target_unit`` (default: ``default_unit``).

    ``value`` is a bare number (taken in ``default_unit``) or text with a unit pint understands. Raises
    :class:`UnitProblem` for text that is not a quantity, the wrong dimension ("5 kg" as a current), NaN or
    infinity. Booleans are refused: a TRUE where a number belongs is a mistake.
    """
    target = target_unit or default_unit
    if isinstance(value, bool):
        raise UnitProblem(f"{'TRUE' if value else 'FALSE'} is a yes/no value, not a number")
    if isinstance(value, (int, float)):
        result = _convert(float(value), default_unit, target)
    elif isinstance(value, str):
        result = _factor_for_text(value, default_unit, target)
    else:
        raise UnitProblem(f"'{value}' ({type(value).__name__}) is not a number")
    if math.isnan(result) or math.isinf(result):
        raise UnitProblem(f"'{value}' is not a finite number")
    return result


def _write_factor_module() -> None:
    """Write :mod:`leakbudget.input.unit_factors` from :func:`unit_factor_table`."""
    from pathlib import Path

    lines = [
        f"    {spelling!r}: ({dimension!r}, {factor!r}),"
        for spelling, (dimension, factor) in unit_factor_table().items()
    ]
    Path(__file__).with_name("unit_factors.py").write_text(
        '"""The factor of each common unit spelling to SI base units, with its dimensionality, as pint computes them.\n'
        "\n"
        "Generated by `python -m leakbudget.input.units` (leakbudget.input.units.unit_factor_table); do not edit. tests/test_units.py\n"
        'checks that it still equals what pint computes.\n"""\n\n'
        "FACTORS: dict[str, tuple[str, float]] = {\n" + "\n".join(lines) + "\n}\n",
        encoding="utf-8",
    )


if __name__ == "__main__":
    _write_factor_module()
