"""Integrity of the built-in catalogue data files, appliance_data/appliances.csv and appliance_data/cables.csv.

The files are read with the csv module only (not through leakbudget), so these checks hold whatever the loader does.
Published values are checked against the standard each row cites: IEC 60335-1 cl. 13.2, IEC 60335-2-40 cl. 13.2,
UL 101, UL 8750 sec. 8.7.1, IEC 61140 Annex B, IEC 60598-1 (upper limits) and the Electrical Installation Guide,
RCD sensitivity chapter (typical values, cable leakage). Limits of product standards not confirmed here
(IEC 60335-2-58, IEC 60335-2-41, IEC 60974-1, IEC 62368-1, IEC 62040-1) are cited "limit from memory" and checked
against the remembered figure, kept apart from the published ones.
"""

from __future__ import annotations

import csv
import math
import re
from collections.abc import Callable
from dataclasses import dataclass
from functools import cache
from pathlib import Path

import pytest

DATA_DIR = Path(__file__).parents[1] / "appliance_data"

APPLIANCE_HEADER = [
    "Key", "Description", "Category", "Class", "Connection", "Nature", "Waveform", "Heating",
    "Typical leakage", "Upper leakage", "Reference voltage", "Reference frequency", "Typical power",
    "Wiring", "Rated voltage", "Leakage per", "Line-neutral leakage", "Typical source", "Upper source",
    "Often bonded",
    "Luminaire",
]  # fmt: skip
CABLE_HEADER = ["Key", "Description", "Capacitance", "Source"]

ENUMERATIONS = {
    "Category": {"kitchen", "bathroom", "laundry", "outdoor", "garage", "office", "shop", "general"},
    "Class": {"0I", "I", "II", "III"},
    "Connection": {"plug", "fixed"},
    "Nature": {"capacitive", "resistive", "mixed"},
    "Waveform": {"sine", "pulsating-dc", "high-frequency", "smooth-dc"},
    "Heating": {"yes", "no"},
    "Often bonded": {"yes", "no"},
    "Luminaire": {"yes", "no"},
    "Wiring": {"", "line-neutral", "line-line"},
    "Leakage per": {"", "line", "total"},
}
LINE_LINE_COLUMNS = ["Rated voltage", "Leakage per", "Line-neutral leakage"]
REQUIRED_CATEGORIES = {"kitchen", "bathroom", "laundry", "outdoor", "garage", "office", "shop"}
NUMERIC_COLUMNS = ["Typical leakage", "Upper leakage", "Reference voltage", "Reference frequency", "Typical power"]
MIN_APPLIANCE_ROWS = 45

KEBAB = re.compile(r"^[a-z0-9]+(?:-[a-z0-9]+)*$")
CABLE_KEY = re.compile(r"^[a-z0-9]+(?:[-.][a-z0-9]+)*$")  # kebab, plus a decimal point in a size (2.5 mm2)

US_SUPPLY = (120.0, 60.0)  # line-to-earth volts and hertz the UL limits are stated at
IEC_SUPPLY = (230.0, 50.0)  # line-to-earth volts and hertz the IEC limits and the handbook figures are stated at

# A published citation names one of these publications and, where the limit sits in one clause of a longer
# document, that clause. UL 101 is itself the leakage-current standard, so it is cited whole; IEC 60598-1 is cited
# by its requirement (class I luminaire <= 7 A) because its clause number is not confirmed here.
PUBLICATION_LOCATORS: dict[str, str | None] = {
    "IEC 60335-1": r"cl\. 13\.2",
    "IEC 60335-2-40": r"cl\. 13\.2",
    "IEC 61140": r"Annex B",
    "UL 8750": r"sec\. 8\.7\.1",
    "Electrical Installation Guide": r"chapter",
    "UL 101": None,
    "IEC 60598-1": None,
}
# Withdrawn or superseded for the purpose: IEC 60950-1 (withdrawn, replaced by IEC 62368-1); EN 60598-1 (the
# catalogue cites the IEC luminaire standard itself).
NOT_TO_BE_CITED = ("IEC 60950-1", "EN 60598-1")
# Anything that reads as a citation of a standard or handbook.
CITATION = re.compile(r"\b(?:IEC|EN|UL|BS|NEC|ANSI|CSA)\s+\d|Electrical Installation Guide")
MARKERS = ("from memory", "common practice")


@cache
def appliance_table() -> tuple[list[str], list[dict[str, str]]]:
    return _read(DATA_DIR / "appliances.csv")


@cache
def cable_table() -> tuple[list[str], list[dict[str, str]]]:
    return _read(DATA_DIR / "cables.csv")


def _read(path: Path) -> tuple[list[str], list[dict[str, str]]]:
    with path.open(newline="", encoding="utf-8") as handle:
        reader = csv.DictReader(handle)
        rows = list(reader)
        return list(reader.fieldnames or []), rows


def appliances() -> list[dict[str, str]]:
    return appliance_table()[1]


def number(row: dict[str, str], column: str) -> float:
    return float(row[column])


def line_line(row: dict[str, str]) -> bool:
    return row["Wiring"] == "line-line"


def rated_current_a(row: dict[str, str]) -> float:
    """Rated current from the row's power and the voltage it is rated at, I = P / V. [A]"""
    return number(row, "Typical power") / number(row, "Rated voltage" if row["Rated voltage"] else "Reference voltage")


def line_neutral_ma(row: dict[str, str]) -> float:
    return number(row, "Line-neutral leakage") if row["Line-neutral leakage"] else 0.0


def supply(row: dict[str, str]) -> tuple[float, float]:
    return number(row, "Reference voltage"), number(row, "Reference frequency")


def is_marked(source: str) -> bool:
    return any(marker in source.lower() for marker in MARKERS)


def assert_rows(check: Callable[[dict[str, str]], str | None], rows: list[dict[str, str]]) -> None:
    """Run ``check`` on every row; fail listing ``"key: problem"`` for each row it objects to."""
    problems = [f"{row['Key']}: {problem}" for row in rows if (problem := check(row))]
    assert not problems, "\n".join(problems)


# ---------------------------------------------------------------------------------------------- appliance table


def test_appliance_header_is_exact():
    assert appliance_table()[0] == APPLIANCE_HEADER


def test_every_appliance_row_has_every_field():
    # DictReader puts surplus cells under None and fills missing ones with None.
    assert_rows(lambda r: "wrong cell count" if None in r or None in r.values() else None, appliances())


def test_appliance_rows_are_enough_and_cover_every_place():
    rows = appliances()
    assert len(rows) >= MIN_APPLIANCE_ROWS
    assert {r["Category"] for r in rows} >= REQUIRED_CATEGORIES


def test_appliance_keys_are_unique_kebab():
    keys = [r["Key"] for r in appliances()]
    assert len(keys) == len(set(keys)), sorted(k for k in set(keys) if keys.count(k) > 1)
    assert [k for k in keys if not KEBAB.match(k)] == []


@pytest.mark.parametrize("column", sorted(ENUMERATIONS))
def test_enumerated_field_is_valid(column):
    allowed = ENUMERATIONS[column]
    assert_rows(lambda r: None if r[column] in allowed else repr(r[column]), appliances())


@pytest.mark.parametrize("column", NUMERIC_COLUMNS)
def test_number_is_positive_and_finite(column):
    def check(row):
        try:
            value = number(row, column)
        except ValueError:
            return f"not a number: {row[column]!r}"
        return None if math.isfinite(value) and value > 0 else f"not positive: {value}"

    assert_rows(check, appliances())


def test_typical_leakage_not_above_upper():
    def check(row):
        typical, upper = number(row, "Typical leakage"), number(row, "Upper leakage")
        return None if typical <= upper else f"typical {typical} mA > upper {upper} mA"

    assert_rows(check, appliances())


@pytest.mark.parametrize("column", ["Typical source", "Upper source"])
def test_every_row_has_a_source(column):
    assert_rows(lambda r: None if r[column].strip() else "empty", appliances())


def published_problem(source: str) -> str | None:
    """Why ``source`` is not a recognised published citation (publication plus clause or chapter), or None."""
    for publication, locator in PUBLICATION_LOCATORS.items():
        if source.startswith(publication):
            if locator and not re.search(locator, source):
                return f"{source!r} names {publication} without its clause ({locator})"
            return None
    return f"{source!r} is neither a known publication nor marked from memory / common practice"


@pytest.mark.parametrize(
    "column, marker", [("Typical source", "typical, from memory"), ("Upper source", "upper, from memory")]
)
def test_source_is_published_or_marked(column, marker):
    def check(row):
        source = row[column]
        if not is_marked(source):
            return published_problem(source)
        if "from memory" not in source:
            return None  # common practice
        if CITATION.search(source):
            # A from-memory value must not read as published: a standard named beside it is one whose limit is
            # remembered, cited as such (see REMEMBERED_LIMITS).
            remembered = [limit.name for limit in REMEMBERED_LIMITS if re.search(limit.cites, source)]
            if column == "Upper source" and len(remembered) == 1:
                return None
            return f"{source!r} is marked from memory but names a publication as if its figure were published"
        return None if source.startswith(marker) else f"{source!r} should start {marker!r}"

    assert_rows(check, appliances())


@pytest.mark.parametrize("column", ["Description", "Typical source", "Upper source"])
def test_no_withdrawn_or_superseded_standard_is_cited(column):
    assert_rows(lambda r: next((f"cites {s}" for s in NOT_TO_BE_CITED if s in r[column]), None), appliances())


# ------------------------------------------------------------------------------------- published upper limits


@dataclass(frozen=True)
class Limit:
    """One bound on protective-conductor or leakage current, as an upper catalogue value must carry it."""

    name: str  # the source, used as the test id
    cites: str  # regex an Upper source matches when it cites this limit
    classes: frozenset[str]
    connections: frozenset[str]
    supply: tuple[float, float]
    upper_ma: Callable[[dict[str, str]], float | None]  # None: the limit does not cover this row


def _iec_60335_heating_ma(row: dict[str, str]) -> float:
    # IEC 60335-1 cl. 13.2: stationary class I heating appliances, 0.75 mA or 0.75 mA per kW of rated power,
    # whichever is higher, with a maximum of 5 mA.
    return min(5.0, max(0.75, 0.75 * number(row, "Typical power") / 1000.0))


def _iec_60335_2_40_ma(row: dict[str, str]) -> float:
    # IEC 60335-2-40 cl. 13.2 (modification): stationary class I heat pumps, air conditioners and dehumidifiers,
    # 2 mA per kW of rated power input, at most 10 mA for appliances accessible to the general public.
    return min(10.0, 2.0 * number(row, "Typical power") / 1000.0)


def _iec_61140_plug_ma(row: dict[str, str]) -> float | None:
    # IEC 61140 Annex B, plug-connected equipment up to 32 A: <= 4 A 2 mA; 4-10 A 0.5 mA/A; > 10 A 5 mA.
    current_a = rated_current_a(row)
    if current_a > 32:
        return None
    return 2.0 if current_a <= 4 else 0.5 * current_a if current_a <= 10 else 5.0


def _iec_61140_fixed_ma(row: dict[str, str]) -> float:
    # IEC 61140 Annex B, permanently connected equipment: <= 7 A 3.5 mA; 7-20 A 0.5 mA/A; > 20 A 10 mA.
    current_a = rated_current_a(row)
    return 3.5 if current_a <= 7 else 0.5 * current_a if current_a <= 20 else 10.0


def _iec_60598_ma(row: dict[str, str]) -> float | None:
    # IEC 60598-1: class I luminaires rated up to 7 A, 3.5 mA.
    return 3.5 if rated_current_a(row) <= 7 else None


def _per_kw(ma_per_kw: float, cap_ma: float) -> Callable[[dict[str, str]], float]:
    return lambda row: min(cap_ma, ma_per_kw * number(row, "Typical power") / 1000.0)


def _constant(value_ma: float) -> Callable[[dict[str, str]], float]:
    return lambda row: value_ma


IEC_60335 = r"^IEC 60335-1 cl\. 13\.2 \("
BOTH = frozenset({"plug", "fixed"})
CORD = frozenset({"plug"})  # UL 101 and UL 8750 sec. 8.7.1 bound cord-connected equipment
FIXED = frozenset({"fixed"})
CLASS_I = frozenset({"I"})
LIMITS = [
    Limit("IEC 60335-1 cl. 13.2 class II 0.25 mA", IEC_60335 + r"class II\b", frozenset({"II"}), BOTH,
          IEC_SUPPLY, _constant(0.25)),
    Limit("IEC 60335-1 cl. 13.2 class 0, 0I, III 0.5 mA", IEC_60335 + r"class (0|0I|III|0/0I/III)\b",
          frozenset({"0I", "III"}), BOTH, IEC_SUPPLY, _constant(0.5)),
    Limit("IEC 60335-1 cl. 13.2 class I portable 0.75 mA", IEC_60335 + r"class I portable\b", CLASS_I, CORD,
          IEC_SUPPLY, _constant(0.75)),
    Limit("IEC 60335-1 cl. 13.2 class I stationary motor-operated 3.5 mA",
          IEC_60335 + r"class I stationary motor-operated\b", CLASS_I, BOTH, IEC_SUPPLY, _constant(3.5)),
    Limit("IEC 60335-1 cl. 13.2 class I stationary heating 0.75 mA/kW (0.75-5 mA)",
          IEC_60335 + r"class I stationary heating\b", CLASS_I, BOTH, IEC_SUPPLY, _iec_60335_heating_ma),
    Limit("IEC 60335-2-40 cl. 13.2 stationary class I 2 mA/kW, at most 10 mA",
          r"^IEC 60335-2-40 cl\. 13\.2 \(stationary class I\b", CLASS_I, BOTH, IEC_SUPPLY, _iec_60335_2_40_ma),
    Limit("UL 101 portable 0.5 mA", r"^UL 101 \(.*\bportable\b", frozenset({"I", "II"}), CORD, US_SUPPLY,
          _constant(0.5)),
    Limit("UL 101 stationary or fixed cord-connected 0.75 mA", r"^UL 101 \(.*\b(stationary|fixed)\b", CLASS_I, CORD,
          US_SUPPLY, _constant(0.75)),
    Limit("UL 8750 sec. 8.7.1 stationary or fixed cord-connected 0.75 mA",
          r"^UL 8750 sec\. 8\.7\.1 \(.*\b(stationary|fixed)\b", CLASS_I, CORD, US_SUPPLY, _constant(0.75)),
    Limit("IEC 61140 Annex B plug-connected", r"^IEC 61140 Annex B \(plug-connected\b", CLASS_I, CORD, IEC_SUPPLY,
          _iec_61140_plug_ma),
    Limit("IEC 61140 Annex B permanently connected", r"^IEC 61140 Annex B \(permanently connected\b", CLASS_I,
          FIXED, IEC_SUPPLY, _iec_61140_fixed_ma),
    Limit("IEC 60598-1 class I luminaire up to 7 A 3.5 mA", r"^IEC 60598-1 \(class I luminaire\b", CLASS_I, BOTH,
          IEC_SUPPLY, _iec_60598_ma),
]  # fmt: skip

# Product standards whose limits are not confirmed here: each row says "limit from memory", and the value is checked
# against the remembered figure so that the row and this table cannot drift apart.
REMEMBERED_LIMITS = [
    # IEC 60335-2-58 (commercial dishwashers), from memory: 1 mA per kW of rated power input, at most 10 mA.
    Limit("IEC 60335-2-58 commercial dishwashers 1 mA/kW, at most 10 mA (from memory)",
          r"^IEC 60335-2-58 \(commercial dishwashers\), limit from memory\b", CLASS_I, BOTH, IEC_SUPPLY,
          _per_kw(1.0, 10.0)),
    # IEC 60335-2-41 (pumps), from memory: leaves IEC 60335-1 cl. 13.2 unchanged, so a class I stationary
    # motor-operated pump is held to 3.5 mA.
    Limit("IEC 60335-2-41 pumps, IEC 60335-1 cl. 13.2 unchanged, 3.5 mA (from memory)",
          r"^IEC 60335-2-41 \(pumps\), limit from memory\b", CLASS_I, BOTH, IEC_SUPPLY, _constant(3.5)),
    # IEC 60974-1 (arc welding power sources), from memory: protective conductor current 10 mA.
    Limit("IEC 60974-1 arc welding power sources 10 mA (from memory)",
          r"^IEC 60974-1 \(arc welding power sources\), limit from memory\b", CLASS_I, BOTH, IEC_SUPPLY,
          _constant(10.0)),
    # IEC 62368-1 (audio, information and communication technology equipment), from memory: 3.5 mA for pluggable equipment type A.
    Limit("IEC 62368-1 pluggable equipment type A 3.5 mA (from memory)",
          r"^IEC 62368-1 \(pluggable equipment type A\), limit and clause from memory\b", CLASS_I, CORD, IEC_SUPPLY,
          _constant(3.5)),
    # IEC 62040-1 (UPS), from memory: 3.5 mA for pluggable equipment type A.
    Limit("IEC 62040-1 UPS pluggable equipment type A 3.5 mA (from memory)",
          r"^IEC 62040-1 \(UPS, pluggable equipment type A\), limit and clause from memory\b", CLASS_I, CORD,
          IEC_SUPPLY, _constant(3.5)),
]  # fmt: skip


def citing(pattern: str, column: str) -> list[dict[str, str]]:
    return [r for r in appliances() if re.search(pattern, r[column])]


def limit_problem(limit: Limit, row: dict[str, str]) -> str | None:
    """Why ``row`` does not carry ``limit`` as its upper value (or exceeds it with its typical value), or None."""
    if row["Class"] not in limit.classes:
        return f"class {row['Class']} is outside {sorted(limit.classes)}"
    if row["Connection"] not in limit.connections:
        return f"connection {row['Connection']} is outside {sorted(limit.connections)}"
    if supply(row) != limit.supply:
        return f"stated at {supply(row)}, the limit at {limit.supply} V, Hz"
    expected_ma = limit.upper_ma(row)
    if expected_ma is None:
        return f"the limit does not cover a {rated_current_a(row):.1f} A row"
    upper_ma = number(row, "Upper leakage")
    if upper_ma != pytest.approx(expected_ma, rel=5e-3):
        return f"upper {upper_ma} mA != {expected_ma} mA"
    # The typical unit, with its line-to-neutral parts, is within the limit too.
    typical_ma = number(row, "Typical leakage") + line_neutral_ma(row)
    return None if typical_ma <= expected_ma else f"typical {typical_ma} mA > the limit {expected_ma} mA"


@pytest.mark.parametrize("limit", LIMITS, ids=[limit.name for limit in LIMITS])
def test_upper_citing_a_published_limit_carries_it(limit):
    rows = citing(limit.cites, "Upper source")
    assert_rows(lambda row: "marked, but cites a published limit" if is_marked(row["Upper source"]) else None, rows)
    assert_rows(lambda row: limit_problem(limit, row), rows)


@pytest.mark.parametrize("limit", REMEMBERED_LIMITS, ids=[limit.name for limit in REMEMBERED_LIMITS])
def test_upper_citing_a_remembered_limit_carries_it_and_says_so(limit):
    rows = citing(limit.cites, "Upper source")
    assert rows, f"no row cites {limit.name}"
    assert_rows(lambda row: None if "from memory" in row["Upper source"] else "not marked from memory", rows)
    assert_rows(lambda row: limit_problem(limit, row), rows)


def test_every_published_upper_cites_exactly_one_limit():
    def check(row):
        if is_marked(row["Upper source"]):
            return None
        matched = [limit.name for limit in LIMITS if re.search(limit.cites, row["Upper source"])]
        return None if len(matched) == 1 else f"{row['Upper source']!r} matches {matched}"

    assert_rows(check, appliances())


# A product standard applies where there is one; these rows must cite it, not a general limit.
PRODUCT_STANDARDS = {
    "heat-pump-inverter": "IEC 60335-2-40",
    "commercial-dishwasher": "IEC 60335-2-58",
    "pool-pump-vfd": "IEC 60335-2-41",
    "inverter-welder": "IEC 60974-1",
    "outdoor-led-driver": "IEC 60598-1",
    "hf-ballast-luminaire": "IEC 60598-1",
    "desktop-pc": "IEC 62368-1",
    "printer": "IEC 62368-1",
    "copier": "IEC 62368-1",
    "monitor": "IEC 62368-1",
    "network-gear": "IEC 62368-1",
    "cash-register": "IEC 62368-1",
    "ups-small": "IEC 62040-1",
}


@pytest.mark.parametrize("key, standard", sorted(PRODUCT_STANDARDS.items()))
def test_row_cites_its_product_standard(key, standard):
    (row,) = [r for r in appliances() if r["Key"] == key]
    assert re.match(re.escape(standard) + r" [(c]", row["Upper source"]), row["Upper source"]


# ---------------------------------------------------------------- US cord-connected rows and UL 101 (UL 8750)

UL_101_PORTABLE_MA = 0.5  # UL 101: portable cord-connected equipment
UL_101_STATIONARY_MA = 0.75  # UL 101 (and UL 8750 sec. 8.7.1): stationary or fixed cord-connected equipment
UL_CORD_CITATION = re.compile(r"^UL (101|8750 sec\. 8\.7\.1) \(")


def is_ev_charging(row: dict[str, str]) -> bool:
    # An EV cord set's leakage is the vehicle charger's, not a cord-connected appliance's; UL 101 does not bound it.
    return row["Key"].startswith("ev-charger")


def us_cord_connected() -> list[dict[str, str]]:
    return [r for r in appliances() if supply(r) == US_SUPPLY and r["Connection"] == "plug" and not is_ev_charging(r)]


def test_every_us_cord_connected_row_is_within_ul_101():
    rows = us_cord_connected()
    assert len(rows) >= 20 and {"microwave", "washer", "dryer", "range-electric"} <= {r["Key"] for r in rows}

    def check(row):
        source = row["Upper source"]
        if not UL_CORD_CITATION.match(source):
            return f"cites {source!r}, not UL 101 (or UL 8750 sec. 8.7.1)"
        portable = re.search(r"\bportable\b", source) is not None
        if not portable and not re.search(r"\b(stationary|fixed)\b", source):
            return f"{source!r} does not say portable, stationary or fixed"
        described_portable = re.search(r"\b(portable|hand-held)\b", row["Description"], re.IGNORECASE) is not None
        if described_portable and not portable:
            return f"described as portable but cites {source!r}"
        limit_ma = UL_101_PORTABLE_MA if portable else UL_101_STATIONARY_MA
        worst_ma = max(number(row, "Upper leakage"), number(row, "Typical leakage") + line_neutral_ma(row))
        return None if worst_ma <= limit_ma else f"{worst_ma} mA above UL 101's {limit_ma} mA"

    assert_rows(check, rows)


def test_ev_cord_set_says_why_ul_101_does_not_bound_it():
    (row,) = [r for r in appliances() if r["Key"] == "ev-charger-level-1"]
    assert row["Connection"] == "plug" and supply(row) == US_SUPPLY
    assert "vehicle charger" in row["Upper source"] and "device of its own" in row["Upper source"]


# ------------------------------------------------------------------------------------------ line-to-line rows


def line_line_rows() -> list[dict[str, str]]:
    return [r for r in appliances() if line_line(r)]


def test_line_line_rows_are_the_240_v_loads():
    assert {r["Key"] for r in line_line_rows()} == {
        "range-electric", "dryer", "pool-pump", "hot-tub", "ev-charger-level-2", "tankless-water-heater",
    }  # fmt: skip


def test_every_row_says_its_wiring_and_rated_voltage():
    # Issue 11: every row says how it connects and the voltage its typical power is rated at; a line-neutral row is
    # rated at its line-to-neutral (reference) voltage; the per-line columns belong to line-line rows only.
    def check(row):
        if row["Wiring"] not in ("line-neutral", "line-line") or not row["Rated voltage"]:
            return f"wiring {row['Wiring']!r}, rated voltage {row['Rated voltage']!r}"
        if line_line(row):
            missing = [c for c in LINE_LINE_COLUMNS if not row[c]]
            return f"missing {missing}" if missing else None
        if number(row, "Rated voltage") != pytest.approx(number(row, "Reference voltage")):
            return f"a line-neutral row rated at {row['Rated voltage']} V, referenced at {row['Reference voltage']} V"
        extra = [c for c in LINE_LINE_COLUMNS[1:] if row[c]]
        return f"a line-neutral row with {extra}" if extra else None

    assert_rows(check, appliances())


def test_line_line_rated_voltage_is_the_line_to_line_voltage():
    # Split-phase 120/240 V: figures stated per line to earth at 120 V, power rated at 240 V line to line.
    def check(row):
        rated, reference = number(row, "Rated voltage"), number(row, "Reference voltage")
        return None if rated == pytest.approx(2 * reference) else f"rated {rated} V with reference {reference} V"

    assert_rows(check, line_line_rows())


def test_line_line_typical_source_says_the_rule_in_words():
    def check(row):
        source = row["Typical source"]
        rule = (
            "figures per line to earth (each of L1 and L2)"
            if row["Leakage per"] == "line"
            else "figures for both lines together (total of L1 and L2)"
        )
        ln = line_neutral_ma(row)
        parts = f"line-to-neutral parts {ln:g} mA from memory" if ln > 0 else "no line-to-neutral parts"
        missing = [words for words in (rule, parts) if words not in source]
        return f"{source!r} does not say {missing}" if missing else None

    assert_rows(check, line_line_rows())


def test_line_line_description_leaves_the_rule_to_the_source():
    assert_rows(lambda r: "repeats the rule" if "figures per line" in r["Description"] else None, appliances())


# --------------------------------------------------------------------------------- published typical values

# Electrical Installation Guide, RCD sensitivity chapter: design estimates of standing leakage at 230 V 50 Hz.
HANDBOOK_TYPICALS = [
    ("PC 2 mA", 2.0, False),
    ("printer 1 mA", 1.0, False),
    ("copier 1.5 mA", 1.5, False),
    ("heated floor 1 mA/kW", 1.0, True),  # per kW of heating: the row's value is 1 mA x its kW
]
HANDBOOK = "Electrical Installation Guide, RCD sensitivity chapter"


@pytest.mark.parametrize(
    "figure, typical_ma, per_kw", HANDBOOK_TYPICALS, ids=[f"{HANDBOOK}: {f[0]}" for f in HANDBOOK_TYPICALS]
)
def test_typical_citing_the_handbook_carries_its_figure(figure, typical_ma, per_kw):
    rows = citing(re.escape(f"{HANDBOOK} ({figure})"), "Typical source")
    assert rows, f"no row cites {HANDBOOK} ({figure})"

    def check(row):
        expected_ma = typical_ma * (number(row, "Typical power") / 1000.0 if per_kw else 1.0)
        if supply(row) != IEC_SUPPLY:
            return f"stated at {supply(row)}, the handbook at {IEC_SUPPLY} V, Hz"
        value_ma = number(row, "Typical leakage")
        return None if value_ma == pytest.approx(expected_ma) else f"typical {value_ma} mA != {expected_ma} mA"

    assert_rows(check, rows)


def test_every_published_typical_is_a_handbook_figure():
    known = {f"{HANDBOOK} ({figure})" for figure, _, _ in HANDBOOK_TYPICALS}

    def check(row):
        source = row["Typical source"]
        if is_marked(source):
            return None
        citation, _, note = source.partition("; ")
        if citation not in known:
            return repr(source)
        return f"its note {note!r} cites something else" if CITATION.search(note) else None

    assert_rows(check, appliances())


# ----------------------------------------------------------------------------------------------- waveforms


def test_every_waveform_kind_has_a_row():
    assert {r["Waveform"] for r in appliances()} == ENUMERATIONS["Waveform"]


def test_ev_chargers_leak_smooth_dc():
    # Vehicle chargers can leak smooth DC (IEC 62955 / BS 7671 531.3.3 call for Type B or a 6 mA DC detector).
    chargers = [r for r in appliances() if r["Key"].startswith("ev-charger")]
    assert len(chargers) >= 2
    assert_rows(lambda r: None if r["Waveform"] == "smooth-dc" else r["Waveform"], chargers)


@pytest.mark.parametrize(
    "waveform, words",
    [
        ("smooth-dc", "does not scale with V·f"),  # smooth DC: no 2πfCV, so no rescaling with the supply
        ("high-frequency", "does not rescale with mains frequency"),  # kHz inverter leakage, not a mains phasor
    ],
)
def test_non_mains_waveform_rows_say_their_leakage_does_not_rescale(waveform, words):
    rows = [r for r in appliances() if r["Waveform"] == waveform]
    assert rows
    assert_rows(lambda r: None if words in r["Typical source"] else f"{r['Typical source']!r}", rows)


# ------------------------------------------------------------------------------------------------ cable table


def test_cable_header_is_exact():
    assert cable_table()[0] == CABLE_HEADER


def test_cable_keys_are_unique_generic_first():
    keys = [r["Key"] for r in cable_table()[1]]
    assert keys[0] == "generic"
    assert len(keys) == len(set(keys))
    assert [k for k in keys if not CABLE_KEY.match(k)] == []
    assert 7 <= len(keys) <= 10


def test_generic_cable_reproduces_the_handbook_figure():
    # Electrical Installation Guide, RCD sensitivity chapter: 1.5 mA per 100 m of line at 230 V 50 Hz.
    generic = cable_table()[1][0]
    capacitance_f_per_m = float(generic["Capacitance"]) * 1e-12
    leakage_ma = 2 * math.pi * 50.0 * capacitance_f_per_m * 230.0 * 100.0 * 1e3  # I = 2 pi f C V L
    assert leakage_ma == pytest.approx(1.5, rel=1e-3)
    assert generic["Source"].startswith(HANDBOOK)


def test_other_cables_are_marked_typical_within_the_building_cable_band():
    # Building cable is about 50-150 pF/m line-to-earth; that band is not from a confirmed publication, so the
    # rows must say "typical, from memory".
    def check(row):
        capacitance_pf_per_m = float(row["Capacitance"])
        if not 50 <= capacitance_pf_per_m <= 150:
            return f"{capacitance_pf_per_m} pF/m outside 50-150"
        return None if row["Source"].startswith("typical, from memory") else f"source {row['Source']!r}"

    assert_rows(check, cable_table()[1][1:])


def test_every_cable_says_per_line_conductor_and_which_capacitance_counts():
    # The figure is per line conductor to earth; capacitance to neutral returns through the device's own
    # transformer and is no residual current, so only capacitance to the protective conductor counts.
    def check(row):
        text = f"{row['Description']} {row['Source']}"
        wanted = ["per line conductor to earth", "protective conductor", "capacitance to neutral returns"]
        missing = [words for words in wanted if words not in text]
        return f"does not say {missing}" if missing else None

    assert_rows(check, cable_table()[1])
