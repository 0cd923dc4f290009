"""The appliance and cable catalogue: built-in CSV rows plus the user's own rows from the workbook.

Every row carries a typical and an upper leakage, the supply they hold at, and a source for each (a published
limit with clause, or "typical, from memory"). User rows from an ``Appliances`` / ``Cables`` sheet add to the
built-in rows and override rows with the same key; the results say so.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

from leakbudget.input.ranges import CABLE_CAPACITANCE_PF_PER_M, FREQUENCY_HZ, STANDING_LEAKAGE_MA, VOLTAGE_V
from leakbudget.input.schema import APPLIANCES, CABLES
from leakbudget.input.table import RawTable, shipped_table
from leakbudget.provenance import Kind, Source, source_from_text

NATURES = ("capacitive", "resistive", "mixed")
WAVEFORMS = ("sine", "pulsating-dc", "high-frequency", "smooth-dc")
CLASSES = ("0I", "I", "II", "III")
CONNECTIONS = ("plug", "fixed")
WIRINGS = ("line-neutral", "line-line")
LINE_NEUTRAL, LINE_LINE = WIRINGS
LEAKAGE_PER = ("line", "total")
CATEGORIES = ("kitchen", "bathroom", "laundry", "outdoor", "garage", "office", "shop", "general")
DEFAULT_REFERENCE_VOLTAGE_V = 230.0
DEFAULT_REFERENCE_FREQUENCY_HZ = 50.0
DEFAULT_CABLE = "generic"
BUILT_IN = "built-in catalogue"


@dataclass(frozen=True, slots=True)
class Appliance:
    """One catalogue row. Leakage values are per unit [mA] at the reference supply."""

    key: str
    description: str
    category: str
    insulation_class: str | None
    connection: str | None
    nature: str
    waveform: str
    heating: bool
    typical_ma: float
    upper_ma: float
    reference_voltage_v: float
    reference_frequency_hz: float
    typical_power_w: float | None
    typical_source: Source
    upper_source: Source
    origin: str  # "built-in catalogue" or "workbook sheet 'Appliances' row N"
    wiring: str = LINE_NEUTRAL  # "line-neutral" or "line-line"
    rated_voltage_v: float | None = None  # the voltage typical_power_w is rated at (None: the reference voltage)
    leakage_per: str = "line"  # a line-line row's figures: "line" (each line to earth) or "total" (both lines)
    line_neutral_ma: float = 0.0  # typical leakage of a line-line row's line-to-neutral parts, on L1 [mA]
    often_bonded: bool = False  # often supplied with neutral bonded to frame (a strap for three-wire connection)
    luminaire: bool = False  # a luminaire or its driver (split: lighting or mixed circuits only)

    @property
    def line_to_line(self) -> bool:
        return self.wiring == LINE_LINE


@dataclass(frozen=True, slots=True)
class Cable:
    """A cable kind: capacitance of one line conductor to earth per metre [pF/m]."""

    key: str
    description: str
    capacitance_pf_per_m: float
    source: Source
    origin: str


@dataclass(frozen=True)
class Catalogue:
    appliances: dict[str, Appliance]
    cables: dict[str, Cable]
    overridden: tuple[str, ...] = ()  # keys of built-in rows the user's workbook replaced

    def with_user_rows(self, appliances: list[Appliance], cables: list[Cable]) -> Catalogue:
        merged_a = dict(self.appliances)
        merged_c = dict(self.cables)
        overridden = [a.key for a in appliances if a.key in merged_a] + [c.key for c in cables if c.key in merged_c]
        merged_a.update({a.key: a for a in appliances})
        merged_c.update({c.key: c for c in cables})
        return Catalogue(merged_a, merged_c, tuple(overridden))

    def search(self, word: str | None = None) -> list[Appliance]:
        """Rows whose key, description or category contain ``word`` (case-insensitive); all rows for None."""
        rows = sorted(self.appliances.values(), key=lambda a: (a.category, a.key))
        if not word:
            return rows
        w = word.lower()
        return [a for a in rows if w in a.key or w in a.description.lower() or w in a.category]


def _unique_key(table: RawTable, row: tuple[int, list[object]], seen: dict[str, int], kind: str) -> str:
    """The row's key, lower-cased; refuses a blank key or one an earlier row of the table already used."""
    key = (table.text(row, "Key") or "").lower()
    if not key:
        raise table.error(row, "Key", "the key is blank", hint=f"give every {kind} row a key")
    if key in seen:
        raise table.error(
            row, "Key", f"the key '{key}' is used twice (also row {seen[key]})", hint="keep one row per key"
        )
    seen[key] = row[0]
    return key


def appliances_from_table(table: RawTable, origin_prefix: str | None = None) -> list[Appliance]:
    """Parse catalogue rows (built-in CSV or the user's Appliances sheet) into :class:`Appliance` rows."""
    out: list[Appliance] = []
    seen: dict[str, int] = {}
    for row in table.rows:
        key = _unique_key(table, row, seen, "catalogue")
        typical = table.number(row, "Typical leakage", "mA", positive=False, plausible=STANDING_LEAKAGE_MA)
        if typical is None:
            raise table.error(
                row, "Typical leakage", "the typical leakage is blank", hint="type the typical leakage per unit in mA"
            )
        upper = table.number(row, "Upper leakage", "mA", plausible=STANDING_LEAKAGE_MA)
        if upper is None:
            upper = typical
        if upper < typical:
            raise table.error(
                row,
                "Upper leakage",
                f"the upper leakage {upper:g} mA is below the typical {typical:g} mA",
                hint="the upper value must be at least the typical value",
            )
        origin = BUILT_IN if origin_prefix is None else f"{origin_prefix} row {row[0]}"
        user = origin_prefix is not None
        typical_src = table.text(row, "Typical source")
        upper_src = table.text(row, "Upper source")
        out.append(
            Appliance(
                key=key,
                description=table.text(row, "Description") or key,
                category=table.choice(row, "Category", CATEGORIES, "general") or "general",
                insulation_class=table.choice(row, "Class", CLASSES),
                connection=table.choice(row, "Connection", CONNECTIONS),
                nature=table.choice(row, "Nature", NATURES, "capacitive") or "capacitive",
                waveform=table.choice(row, "Waveform", WAVEFORMS, "sine") or "sine",
                heating=bool(table.flag(row, "Heating")),
                often_bonded=bool(table.flag(row, "Often bonded")),
                luminaire=bool(table.flag(row, "Luminaire")),
                typical_ma=typical,
                upper_ma=upper,
                reference_voltage_v=table.number(row, "Reference voltage", "V", positive=True, plausible=VOLTAGE_V)
                or DEFAULT_REFERENCE_VOLTAGE_V,
                reference_frequency_hz=table.number(
                    row, "Reference frequency", "Hz", positive=True, plausible=FREQUENCY_HZ
                )
                or DEFAULT_REFERENCE_FREQUENCY_HZ,
                typical_power_w=table.number(row, "Typical power", "W"),
                wiring=table.choice(row, "Wiring", WIRINGS, LINE_NEUTRAL) or LINE_NEUTRAL,
                rated_voltage_v=table.number(row, "Rated voltage", "V", positive=True, plausible=VOLTAGE_V),
                leakage_per=table.choice(row, "Leakage per", LEAKAGE_PER, "line") or "line",
                line_neutral_ma=table.number(
                    row, "Line-neutral leakage", "mA", positive=False, plausible=STANDING_LEAKAGE_MA
                )
                or 0.0,
                typical_source=source_from_text(typical_src)
                if typical_src
                else (Source(Kind.USER, f"{origin} (no source given)") if user else Source.from_memory()),
                upper_source=source_from_text(upper_src)
                if upper_src
                else (Source(Kind.USER, f"{origin} (no source given)") if user else Source.from_memory()),
                origin=origin,
            )
        )
    return out


def cables_from_table(table: RawTable, origin_prefix: str | None = None) -> list[Cable]:
    """Parse cable rows (built-in CSV or the user's Cables sheet)."""
    out: list[Cable] = []
    seen: dict[str, int] = {}
    for row in table.rows:
        key = _unique_key(table, row, seen, "cable")
        capacitance = table.number(row, "Capacitance", "pF/m", positive=True, plausible=CABLE_CAPACITANCE_PF_PER_M)
        if capacitance is None:
            raise table.error(
                row,
                "Capacitance",
                "the capacitance is blank",
                hint="type the capacitance of one line conductor to earth in pF/m",
            )
        source = table.text(row, "Source")
        out.append(
            Cable(
                key=key,
                description=table.text(row, "Description") or key,
                capacitance_pf_per_m=capacitance,
                source=source_from_text(source) if source else Source.from_memory(),
                origin=BUILT_IN if origin_prefix is None else f"{origin_prefix} row {row[0]}",
            )
        )
    return out


@lru_cache(maxsize=1)
def built_in() -> Catalogue:
    """The shipped catalogue (parsed once per process)."""
    appliances = appliances_from_table(shipped_table("appliances.csv", APPLIANCES))
    cables = cables_from_table(shipped_table("cables.csv", CABLES))
    return Catalogue({a.key: a for a in appliances}, {c.key: c for c in cables})
