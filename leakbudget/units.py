"""Quantities typed by people: "0.75 mA", "750 µA", "4.7 nF", "30 ft", "2.2 kW", or a bare number.

pint does the parsing and the conversion. Each distinct text is parsed once (a workbook repeats the same few
texts thousands of times), and pint is imported only when a cell actually carries a unit, so a workbook of bare
numbers never pays for it.
"""

from __future__ import annotations

import math
from functools import lru_cache
from typing import Any

_SIMPLE_NUMBER_CHARS = frozenset("0123456789.+-eE ")


class UnitProblem(ValueError):
    """A value could not be read as a quantity in the wanted unit; the message says why (no location)."""


@lru_cache(maxsize=1)
def registry() -> Any:
    """The one pint registry of the process (built on first use)."""
    import pint

    try:  # pint keeps its parsed definitions in the user's cache folder: ten times faster start-up
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True, cache_folder=":auto:")
    except OSError:  # no writable cache folder
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    ureg.define("megohm = megaohm")
    return ureg


@lru_cache(maxsize=65536)
def _factor_for_text(text: str, default_unit: str, target_unit: str) -> float:
    """Parse one text once: return its magnitude in ``target_unit`` (cached per distinct text)."""
    cleaned = text.strip().replace(",", "") if _looks_like_grouped_number(text) else text.strip()
    if cleaned and set(cleaned) <= _SIMPLE_NUMBER_CHARS:
        try:
            return _convert(float(cleaned), default_unit, target_unit)
        except ValueError:
            pass
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
        raise UnitProblem(
            f"'{text}' is in {quantity.units:~P}, which is not a {_dimension_name(target_unit)}"
        ) from None


def _looks_like_grouped_number(text: str) -> bool:
    """True for '1,000' or '12,500.5' (thousands separators), not for '0,75'."""
    parts = text.strip().split(",")
    return len(parts) > 1 and all(len(p.split(".")[0]) == 3 for p in parts[1:]) and parts[0].strip("+-").isdigit()


@lru_cache(maxsize=256)
def _unit_factor(default_unit: str, target_unit: str) -> float:
    if default_unit == target_unit:
        return 1.0
    return float(registry().Quantity(1.0, default_unit).to(target_unit).magnitude)


def _convert(magnitude: float, default_unit: str, target_unit: str) -> float:
    return magnitude * _unit_factor(default_unit, target_unit)


@lru_cache(maxsize=64)
def _dimension_name(unit: str) -> str:
    names = {
        "mA": "current", "A": "current", "nF": "capacitance", "Mohm": "resistance", "W": "power",
        "V": "voltage", "Hz": "frequency", "m": "length", "pF/m": "capacitance per length",
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
