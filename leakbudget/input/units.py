"""Quantities typed by people: "0.75 mA", "750 µA", "4.7 nF", "30 ft", "30'", "2.2 kW", "30 %", or a bare number.

A cell is read by a grammar, never evaluated: exactly one number, then at most one unit, and nothing else.

- The number: an optional sign, digits with at most one decimal point (``12``, ``0.75``, ``.5``, ``5.``), an
  optional exponent (``1e-3``, ``4.7E+2``). Commas group thousands only where that cannot be misread: with a
  decimal point after the groups (``12,500.5``) or with two groups or more (``1,000,000``), each group three
  digits. ``1,500`` alone is refused: it is fifteen hundred in one country and one and a half in another; so is a
  decimal comma (``0,75``, ``1.000,5``). A negative number is read, and every column refuses it (none takes one).
- The unit, if any: one of the column's kind (a current for Leakage, a length for Cable length, …), written as
  :data:`COMMON_SPELLINGS` (their factors precomputed by pint, :mod:`leakbudget.input.unit_factors`), ``'`` for
  feet (:data:`ALIASES`), ``%`` where a fraction is meant, or any single unit name pint's registry knows
  (``milliampere``, ``megohms``), looked up by name; ``pF/m`` style units are two names. Case matters
  (``mohm`` is a milliohm, ``MA`` a megaampere); a unit written in the wrong case is refused with the spelling to
  use.
- Nothing else: no arithmetic (``5/2``, ``2**3``, ``240-10``), no second number (``2 3``, ``2;3``, ``2 mA 3``), no
  names of constants (``pi``), no bounds (``<0.1``) or approximations (``~0.4``): each is refused with a sentence
  saying what it is and what to type instead. pint's expression parser never sees a cell.

Each distinct text is read once per column (a workbook repeats the same few texts thousands of times), in
microseconds whatever it holds: the grammar is one regular expression without nested repetition, a text longer
than :data:`MAX_TEXT_CHARS` is refused before it is matched, and pint is imported only for a unit name outside the
common spellings.
"""

from __future__ import annotations

import math
import re
import unicodedata
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

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
    "feet",
    "foot",
)
# Spellings pint does not know, as the unit they stand for: the prime (typed as an apostrophe, or turned into a
# right quotation mark by a spreadsheet's autocorrect) is the foot (common practice in US drawings and schedules).
ALIASES = {"'": "ft", "′": "ft", "’": "ft"}
PERCENT = 0.01  # "%": one hundredth, by definition
MAX_TEXT_CHARS = 100  # modelling choice: a number with a unit is far shorter; a longer text is refused unread

# The spellings suggested in a hint, by the column's unit.
SUGGESTED = {
    "mA": "mA, µA or A",
    "A": "A or mA",
    "nF": "nF, pF or µF",
    "Mohm": "Mohm, MΩ or kΩ",
    "W": "W or kW",
    "V": "V or kV",
    "Hz": "Hz",
    "m": "m or ft",
    "pF/m": "pF/m, nF/km or pF/ft",
}
DIMENSION_NAMES = {
    "mA": "current",
    "A": "current",
    "nF": "capacitance",
    "Mohm": "resistance",
    "W": "power",
    "V": "voltage",
    "Hz": "frequency",
    "m": "length",
    "pF/m": "capacitance per length",
    "dimensionless": "plain number",
}
DIMENSIONLESS = "dimensionless"

# The grammar: sign, number (digits with thousands groups, or plain), exponent, spaces, one unit. No nested
# repetition, so matching is linear in the text's length.
_CELL = re.compile(
    r"(?P<sign>[+\-\u2212])?"
    r"(?P<mantissa>[0-9][0-9,]*(?:\.[0-9]*)?|\.[0-9]+)"
    r"(?P<exponent>[eE][+\-]?[0-9]+)?"
    r"\s*"
    r"(?P<unit>[^\W\d_]+(?:/[^\W\d_]+)?|%|['′’])?"
)
_GROUPED = re.compile(r"[1-9][0-9]{0,2}(?:,[0-9]{3})+(?:\.[0-9]*)?")
_UNIT_NAME = re.compile(r"[^\W\d_]+")
_BOUND = re.compile(
    r"(?:<|>|≤|≥|≦|≧|⩽|⩾|max\b|min\b|up to\b|at most\b|at least\b|less than\b|more than\b|below\b|under\b|above\b|over\b)"
)
_APPROXIMATE = re.compile(r"(?:~|≈|∼|≃|approx|about\b|around\b|circa\b|ca\b|ca\.)")
_TOLERANCE = re.compile(r"±|\+/-|\+-|-/\+")
_ARITHMETIC = re.compile(r"[*^×÷=()\[\]]|/\s*[0-9.(]|[0-9.]\s*[+\-\u2212]\s*[0-9.]")
_NUMBER_TOKEN = re.compile(r"[0-9]+(?:[.,][0-9]+)*|\.[0-9]+")
_TWO_POINTS = re.compile(r"[0-9]*\.[0-9]*\.")


class UnitProblem(ValueError):
    """A value could not be read as a quantity in the wanted unit: the message says why and ``hint`` (when given)
    what to type instead (no location)."""

    def __init__(self, message: str, hint: str | None = None) -> None:
        super().__init__(message)
        self.hint = hint


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
    These are our own spellings, so pint may parse them.
    """
    ureg = registry()
    table = {}
    for spelling in COMMON_SPELLINGS:
        quantity = ureg.Quantity(f"1 {spelling}")
        table[spelling] = (str(quantity.dimensionality), float(quantity.to_base_units().magnitude))
    return table


@dataclass(frozen=True, slots=True)
class _Unit:
    """A unit as written, with its dimensionality (pint's text of it) and its factor to SI base units."""

    written: str
    dimension: str
    factor: float


def _pint_name(name: str) -> tuple[str, float] | None:
    """(dimensionality, factor to SI base units) of one unit name, looked up in pint's registry by name only (its
    prefix and plural rules, never its expression parser); None when pint does not know it or it could be two
    units of different sizes."""
    from pint.util import UnitsContainer

    ureg = registry()
    found = set()
    for prefix, unit, _suffix in ureg.parse_unit_name(name):
        units = UnitsContainer({prefix + unit: 1})
        found.add((str(ureg.get_dimensionality(units)), float(ureg.get_base_units(units)[0])))
    return found.pop() if len(found) == 1 else None


@lru_cache(maxsize=1024)
def _resolve(written: str) -> _Unit | None:
    """The unit a spelling stands for (see the module docstring), or None when it is not a unit."""
    from leakbudget.input.unit_factors import FACTORS

    if written == DIMENSIONLESS:
        return _Unit(written, DIMENSIONLESS, 1.0)
    if written == "%":
        return _Unit(written, DIMENSIONLESS, PERCENT)
    spelling = ALIASES.get(written, written)
    known = FACTORS.get(spelling)
    if known is not None:
        return _Unit(written, known[0], known[1])
    names = spelling.split("/")
    if len(names) > 2 or not all(_UNIT_NAME.fullmatch(n) for n in names):
        return None
    parts = [FACTORS.get(n) or _pint_name(n) for n in names]
    if any(p is None for p in parts):
        return None
    if len(parts) == 1:
        dimension, factor = parts[0]  # type: ignore[misc]
        return _Unit(written, dimension, factor)
    from pint.util import UnitsContainer

    ureg = registry()
    units = UnitsContainer({})
    for name, power in zip(names, (1, -1), strict=True):
        for prefix, unit, _suffix in ureg.parse_unit_name(ALIASES.get(name, name))[:1]:
            units = units * UnitsContainer({prefix + unit: power})
    return _Unit(written, str(ureg.get_dimensionality(units)), float(ureg.get_base_units(units)[0]))


def dimension_name(unit: str) -> str:
    """What a column in ``unit`` holds, in words ("current")."""
    return DIMENSION_NAMES.get(unit, f"quantity in {unit}")


def _suggestion(target_unit: str) -> str:
    if target_unit == DIMENSIONLESS:
        return "type a plain number"
    spellings = SUGGESTED.get(target_unit, target_unit)
    return (
        f"type a number (taken in {target_unit}) or a number with a unit of {dimension_name(target_unit)} ({spellings})"
    )


def _unit_problem(unit: str, target_unit: str, percent: bool) -> tuple[float | None, str, str | None]:
    """(the factor from ``unit`` to ``target_unit``, or None; what is wrong with it, said of a text holding it; the
    hint)."""
    if unit == target_unit:
        return 1.0, "", None
    want = _resolve(target_unit)
    if want is None:  # a column's own unit: a programming error, not the user's
        raise ValueError(f"unknown target unit {target_unit!r}")
    have = _resolve(unit)
    what = dimension_name(target_unit)
    if have is not None and have.dimension == DIMENSIONLESS and (have.factor != 1.0 or want.dimension != DIMENSIONLESS):
        if want.dimension != DIMENSIONLESS:
            return None, f"is a percentage or share, which is never a {what}", _suggestion(target_unit)
        if not percent:
            return None, f"is a percentage or share, where a {what} belongs", _suggestion(target_unit)
    if have is not None and have.dimension == want.dimension:
        return have.factor / want.factor, "", None
    case = _right_case(unit, want.dimension)
    hint = f"units are case-sensitive: write {case}" if case else _suggestion(target_unit)
    if have is None:
        return None, f"has the unit '{unit}', which is not a unit of {what} leakbudget knows", hint
    written = f"{unit} ({ALIASES[unit]})" if unit in ALIASES else unit
    return None, f"is in {written}, which is not a {what}", hint


@lru_cache(maxsize=1024)
def unit_factor(unit: str, target_unit: str, *, percent: bool = False) -> float:
    """The factor that takes a value in ``unit`` to ``target_unit``; raises :class:`UnitProblem` when ``unit`` is
    not a unit of the same kind (a percentage counts as a plain number only with ``percent``)."""
    factor, _what, hint = _unit_problem(unit, target_unit, percent)
    if factor is None:
        raise UnitProblem(f"'{unit}' is not a unit of {dimension_name(target_unit)}", hint)
    return factor


def _right_case(unit: str, dimension: str) -> str | None:
    """The common spelling of ``dimension`` that ``unit`` is in another case, if there is one."""
    from leakbudget.input.unit_factors import FACTORS

    low = unit.lower()
    for spelling, (dim, _factor) in FACTORS.items():
        if dim == dimension and spelling.lower() == low and spelling != unit:
            return spelling
    return None


def _read_number(match: re.Match[str], text: str) -> float:
    """The number of a text the grammar matched; refuses an ambiguous or misplaced comma, infinity, underflow."""
    mantissa, exponent = match["mantissa"], match["exponent"] or ""
    if "," in mantissa:
        grouped = _GROUPED.fullmatch(mantissa) is not None and not exponent
        if grouped and "." not in mantissa and mantissa.count(",") == 1:
            plain, decimal = mantissa.replace(",", ""), mantissa.replace(",", ".")
            raise UnitProblem(
                f"'{text}' could be {plain} or {decimal}: a comma separates thousands in some countries and "
                "decimals in others",
                f"type {plain} or {decimal}, without the comma",
            )
        if not grouped:
            raise _decimal_comma(text)
    magnitude = float(mantissa.replace(",", "") + exponent)
    if math.isinf(magnitude):
        raise UnitProblem(f"'{text}' is not a finite number", "type the value in a larger unit")
    if magnitude == 0.0 and any(c in "123456789" for c in mantissa):
        raise UnitProblem(
            f"'{text}' is too small to tell from zero (below 1e-308)", "type the value in a smaller unit, or 0"
        )
    return -magnitude if match["sign"] in ("-", "\u2212") else magnitude


def _decimal_comma(text: str) -> UnitProblem:
    return UnitProblem(
        f"'{text}' has a decimal comma or a misplaced thousands separator",
        "write the decimal point as '.' (0.75) and no other separators",
    )


def _not_a_quantity(text: str, target_unit: str) -> UnitProblem:
    """Why a text the grammar does not match is refused, in the user's terms."""
    low = text.lower()
    if _BOUND.match(low):
        return UnitProblem(
            f"'{text}' is a bound, not a value",
            "type the value itself: measure it, or type the figure you mean to plan with",
        )
    if _APPROXIMATE.match(low) or text.endswith("?"):
        return UnitProblem(
            f"'{text}' is an approximation, not a value",
            "type the value without the sign, or measure it",
        )
    if _TOLERANCE.search(text):
        return UnitProblem(f"'{text}' is a value with a tolerance", "type the value alone, without the ± part")
    if re.search(r"[0-9],[0-9]", text):
        return _decimal_comma(text)
    if not re.search(r"[0-9]", text):
        if low.lstrip("+-\u2212") in ("inf", "infinity", "nan"):
            return UnitProblem(f"'{text}' is not a finite number", _suggestion(target_unit))
        return UnitProblem(f"'{text}' is not a number with a unit: it has no digits", _suggestion(target_unit))
    if _ARITHMETIC.search(text):
        return UnitProblem(
            f"'{text}' is a calculation or a range, and leakbudget does no arithmetic",
            "type one number, the result you mean, with at most one unit",
        )
    if len(_NUMBER_TOKEN.findall(text)) > 1:
        return UnitProblem(f"'{text}' holds more than one number", "type one number with at most one unit in each cell")
    if _TWO_POINTS.search(text):
        return UnitProblem(f"'{text}' has more than one decimal point", "type one number, e.g. 1000.5")
    return UnitProblem(f"'{text}' is not one number with at most one unit", _suggestion(target_unit))


@lru_cache(maxsize=65536)
def _read_text(text: str, default_unit: str, target_unit: str, percent: bool) -> float | UnitProblem:
    """Read one text once (cached per distinct text): its value in ``target_unit``, or the problem with it."""
    shown = text.strip()
    if len(shown) > MAX_TEXT_CHARS:
        return UnitProblem(
            f"the text ({len(shown)} characters) is too long to be a number with a unit", _suggestion(target_unit)
        )
    cleaned = unicodedata.normalize("NFC", shown)
    match = _CELL.fullmatch(cleaned)
    try:
        if match is None:
            return _not_a_quantity(shown, target_unit)
        magnitude = _read_number(match, shown)
        unit = match["unit"]
        if unit is None:
            return _scaled(magnitude, unit_factor(default_unit, target_unit, percent=percent), shown)
        factor, what, hint = _unit_problem(unit, target_unit, percent)
        if factor is None:
            return UnitProblem(f"'{shown}' {what}", hint)
        return _scaled(magnitude, factor, shown)
    except UnitProblem as exc:
        return exc


def _scaled(magnitude: float, factor: float, shown: str) -> float:
    result = magnitude * factor
    if math.isinf(result):
        raise UnitProblem(f"'{shown}' is not a finite number", "type the value in a larger unit")
    if result == 0.0 and magnitude != 0.0:
        raise UnitProblem(f"'{shown}' is too small to tell from zero (below 1e-308)", "type the value, or 0")
    return result


def to_unit(value: Any, default_unit: str, target_unit: str | None = None, *, percent: bool = False) -> float:
    """Return ``value`` as a float in ``target_unit`` (default: ``default_unit``).

    ``value`` is a bare number (taken in ``default_unit``) or text read by the grammar of the module docstring.
    ``percent``: the value is a fraction, so ``30 %`` reads as 0.3 (only for a dimensionless target). Raises
    :class:`UnitProblem` for text that is not one quantity, the wrong kind ("5 kg" as a current, "50 %" as a
    current), NaN, infinity or a value too small to tell from zero. Booleans are refused: a TRUE where a number
    belongs is a mistake.
    """
    target = target_unit or default_unit
    if isinstance(value, bool):
        raise UnitProblem(f"{'TRUE' if value else 'FALSE'} is a yes/no value, not a number")
    if isinstance(value, str):
        result = _read_text(value, default_unit, target, percent)
        if isinstance(result, UnitProblem):
            raise UnitProblem(str(result), result.hint)
        return result
    if isinstance(value, (int, float)):
        magnitude = float(value)
        if math.isnan(magnitude) or math.isinf(magnitude):
            raise UnitProblem(f"'{value}' is not a finite number")
        return _scaled(magnitude, unit_factor(default_unit, target, percent=percent), str(value))
    raise UnitProblem(f"'{value}' ({type(value).__name__}) is not a number")


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
