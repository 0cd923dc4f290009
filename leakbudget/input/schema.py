"""The workbook contract: sheet names, column names, their default units and meaning.

One place for the names the user types; the reader, the template and the README all use these. Names match
case-insensitively, ignoring surrounding spaces and the difference between a space and an underscore.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache


@lru_cache(maxsize=4096)
def normalise(name: object) -> str:
    """Normalise a sheet or column name for matching: lower case, ``_`` as space, spaces folded."""
    text = str(name).replace("_", " ").replace("\u00a0", " ")
    return re.sub(r"\s+", " ", text).strip().lower()


@dataclass(frozen=True, slots=True)
class Column:
    name: str
    unit: str | None  # default unit for bare numbers (a pint unit string), None for text/flags
    required: bool
    help: str
    old_names: tuple[str, ...] = ()  # former names, still read (with a warning naming the new one)


@dataclass(frozen=True, slots=True)
class Sheet:
    name: str
    required: bool
    help: str
    columns: tuple[Column, ...]

    def column(self, name: str) -> Column:
        for c in self.columns:
            if normalise(c.name) == normalise(name):
                return c
        raise KeyError(name)

    def renamed(self, name: str) -> Column | None:
        """The column whose former name is ``name``, or None."""
        for c in self.columns:
            if any(normalise(old) == normalise(name) for old in c.old_names):
                return c
        return None


CIRCUITS = Sheet(
    "Circuits",
    True,
    "One row per circuit in the panel, protected or not.",
    (
        Column("Circuit", None, True, "Unique circuit id, e.g. K1 or 'Kitchen counter 1'."),
        Column("Device", None, True, "Protective device key (see `leakbudget devices`), or 'none'."),
        Column("RCD type", None, False, "AC, A, F or B (IEC 60755 / IEC 62423); blank if unknown."),
        Column("Voltage", "V", False, "Line-to-neutral supply voltage; blank takes the Settings default."),
        Column("Frequency", "Hz", False, "Supply frequency; blank takes the Settings default."),
        Column(
            "System",
            None,
            False,
            "single (line-neutral), split (120/240 V split-phase: two lines 180° apart), network (120/208 V: two "
            "lines of a three-phase wye, 120° apart) or three (three-phase).",
        ),
        Column("Rating", "A", False, "Overcurrent rating of the circuit."),
        Column("Cable length", "m", False, "Load-side cable run; bare numbers in the 'Length unit' setting."),
        Column("Cable", None, False, "Cable catalogue key (see `leakbudget cables`); blank takes the default."),
        Column("Rooms", None, False, "Rooms the circuit serves, comma-separated."),
        Column(
            "Shared neutral",
            None,
            False,
            "yes if this circuit shares its neutral with another circuit (a multiwire branch circuit); blank = no.",
        ),
        Column("Note", None, False, "Free text, copied to the results."),
        Column(
            "Protected by",
            None,
            False,
            "Id of the shared device (Protection sheet) the circuit hangs under, e.g. RCD1; blank = none.",
        ),
        Column(
            "Phase",
            None,
            False,
            "The supply line a single-pole circuit takes on a split-phase or three-phase board: L1, L2 or L3 "
            "(default L1).",
        ),
        Column(
            "Purpose",
            None,
            False,
            "sockets, lighting, dedicated (one appliance) or mixed (default); the review and the planner use it.",
        ),
        Column(
            "Neutral-earth bond",
            None,
            False,
            "yes if the neutral is tied to earth on the circuit's load side (a subpanel it feeds with neutral and "
            "earth bonded, a generator or inverter with a bonded neutral whose transfer does not switch the "
            "neutral); blank = no.",
        ),
    ),
)

LOADS = Sheet(
    "Loads",
    True,
    "One row per load (or group of identical loads) on a circuit.",
    (
        Column("Load", None, True, "Name of the load, e.g. 'Dishwasher'."),
        Column("Circuit", None, False, "Circuit it is on now; blank = not yet placed."),
        Column("Appliance", None, False, "Catalogue key (see `leakbudget appliances`)."),
        Column("Quantity", None, False, "Number of identical units (default 1)."),
        Column("Leakage", "mA", False, "Measured or datasheet leakage per unit, at this circuit's supply."),
        Column("Y capacitance", "nF", False, "Line-to-earth capacitance per unit (EMI-filter Y-capacitors)."),
        Column("Insulation resistance", "Mohm", False, "Insulation resistance to earth per unit."),
        Column("Power", "W", False, "Rated power per unit."),
        Column("Current", "A", False, "Rated current per unit."),
        Column(
            "Leg",
            None,
            False,
            "L1, L2, L3, or L1-L2 etc. for line-to-line loads (default L1; a line-line appliance on a split, "
            "network or three-phase circuit defaults to L1-L2).",
        ),
        Column("Room", None, False, "Room the load is in."),
        Column(
            "Stays",
            None,
            False,
            "yes if the load stays on its circuit: `leakbudget split` never moves it (the former name Fixed is still "
            "read; it never meant hard-wired, see Connection).",
            old_names=("Fixed",),
        ),
        Column(
            "Group",
            None,
            False,
            "A name shared by loads that belong together (a desk, a workstation, a bench): `leakbudget split` moves "
            "them together or not at all.",
        ),
        Column(
            "Connection",
            None,
            False,
            "plug (cord-and-plug) or hard-wired (permanently connected); overrides the catalogue's connection for "
            "the review's receptacle rules.",
        ),
        Column(
            "Waveform",
            None,
            False,
            "Leakage waveform: sine, pulsating-dc, high-frequency or smooth-dc; overrides the catalogue's.",
        ),
        Column("Note", None, False, "Free text, copied to the results."),
        Column(
            "Model",
            None,
            False,
            "Model reference; a Leakage measured on one unit stands for the units with "
            "the same Appliance and Model that have no figure of their own.",
        ),
        Column(
            "Protected by",
            None,
            False,
            "Id of a device inside the circuit that protects this load (Protection sheet row with a Circuit): a "
            "GFCI receptacle upstream of its outlet, a cord set's own interrupting device; blank = none.",
        ),
        Column(
            "Neutral-earth bond",
            None,
            False,
            "yes if the load ties neutral to earth (a three-wire dryer or range with its bonding strap in, a "
            "generator or inverter with a bonded neutral); blank = no.",
        ),
    ),
)

PROTECTION = Sheet(
    "Protection",
    False,
    "One row per shared device: an RCD protecting several circuits of a board, a time-delayed RCD above others, "
    "or a device inside one circuit (give its Circuit).",
    (
        Column("Id", None, True, "Unique id the Circuits and Loads sheets name in Protected by, e.g. RCD1 or MAIN."),
        Column("Device", None, True, "Device key (see `leakbudget devices`), as on Circuits."),
        Column("RCD type", None, False, "AC, A, F or B (IEC 60755 / IEC 62423); blank if unknown."),
        Column(
            "Upstream",
            None,
            False,
            "Id of the device above it; blank = at the origin (or, with a Circuit, under that circuit's own devices).",
        ),
        Column("Rating", "A", False, "Its rated current."),
        Column("Board", None, False, "Free text: which board it sits in."),
        Column(
            "System",
            None,
            False,
            "The lines it carries: single (two-pole, default), split, network or three (four-pole).",
        ),
        Column(
            "Circuit",
            None,
            False,
            "For a device inside one circuit (a GFCI receptacle, a cord set's device): that circuit's id; blank for "
            "a device on the board.",
        ),
        Column("Note", None, False, "Free text, copied to the results."),
    ),
)

SETTINGS = Sheet(
    "Settings",
    False,
    "Two columns, Setting and Value; every setting is optional.",
    (
        Column("Setting", None, True, "Name of the setting."),
        Column("Value", None, True, "Its value."),
    ),
)

APPLIANCES = Sheet(
    "Appliances",
    False,
    "Your own catalogue rows; same columns as the built-in catalogue. They add to it and override same keys.",
    (
        Column("Key", None, True, "Appliance key used in the Loads sheet."),
        Column("Description", None, False, "What it is."),
        Column("Category", None, False, "kitchen, bathroom, laundry, outdoor, garage, office, shop or general."),
        Column("Class", None, False, "Insulation class: 0I, I, II or III."),
        Column("Connection", None, False, "plug (cord-and-plug) or fixed (permanently connected)."),
        Column("Nature", None, False, "capacitive, resistive or mixed (default capacitive)."),
        Column("Waveform", None, False, "sine, pulsating-dc, high-frequency or smooth-dc (default sine)."),
        Column("Heating", None, False, "yes for a heating or cooking element (moist switch-on leakage)."),
        Column("Typical leakage", "mA", True, "Typical standing leakage per unit at the reference supply."),
        Column("Upper leakage", "mA", False, "Upper (limit or high-percentile) leakage per unit."),
        Column("Reference voltage", "V", False, "Supply voltage the leakage values hold at (default 230 V)."),
        Column("Reference frequency", "Hz", False, "Supply frequency the leakage values hold at (default 50 Hz)."),
        Column("Typical power", "W", False, "Typical rated power per unit."),
        Column(
            "Wiring",
            None,
            False,
            "line-neutral (default) or line-line: how the appliance connects (a 240 V range, a 208 V or 400 V unit).",
        ),
        Column(
            "Rated voltage",
            "V",
            False,
            "Voltage its Typical power is rated at: the line-to-line voltage for a line-line appliance "
            "(default: Reference voltage).",
        ),
        Column(
            "Leakage per",
            None,
            False,
            "For a line-line appliance: line (each line's leakage to earth; default) or total (both lines together).",
        ),
        Column(
            "Line-neutral leakage",
            "mA",
            False,
            "Typical leakage of a line-line appliance's line-to-neutral parts (a clock, a lamp, a 120 V motor), "
            "on one line, at the reference supply (default 0).",
        ),
        Column("Typical source", None, False, "Where the typical value comes from."),
        Column("Upper source", None, False, "Where the upper value comes from."),
        Column(
            "Often bonded",
            None,
            False,
            "yes if the appliance often comes with its neutral bonded to its frame (a bonding strap for a "
            "three-wire connection), so the review asks for the Loads sheet's Neutral-earth bond.",
        ),
        Column(
            "Luminaire",
            None,
            False,
            "yes for a luminaire or its driver: `split` puts it only on lighting or mixed circuits.",
        ),
    ),
)

CABLES = Sheet(
    "Cables",
    False,
    "Your own cable rows: key, description, capacitance of one line conductor to earth per length, source.",
    (
        Column("Key", None, True, "Cable key used in the Circuits sheet."),
        Column("Description", None, False, "What it is."),
        Column("Capacitance", "pF/m", True, "Capacitance of one line conductor to earth per length."),
        Column("Source", None, False, "Where the value comes from."),
    ),
)

LOCATIONS = Sheet(
    "Locations",
    False,
    "Your own room-name words and the kind of location they mean; they are tried before the built-in table.",
    (
        Column("Room name", None, True, "A room name or a word in one, e.g. 'Snug' or 'utility'."),
        Column("Location kind", None, True, "What kind of location it is (see `leakbudget review --help`)."),
    ),
)

READINGS = Sheet(
    "Readings",
    False,
    "Measured total leakage of whole circuits (leakage clamp around the circuit's line and neutral conductors).",
    (
        Column("Circuit", None, True, "Circuit id from the Circuits sheet."),
        Column("Reading", "mA", True, "The clamp reading: residual (protective conductor) current of the circuit."),
        Column("Conditions", None, False, "all on (every load connected and running, the default) or idle."),
        Column("Date", None, False, "When it was measured."),
        Column("Calibrate", None, False, "yes to scale the circuit's catalogue values to match this reading."),
        Column("Note", None, False, "Free text, copied to the results."),
    ),
)

SHEETS: tuple[Sheet, ...] = (CIRCUITS, LOADS, PROTECTION, SETTINGS, APPLIANCES, CABLES, LOCATIONS, READINGS)

# Result sheets written back into the workbook; these names are reserved (replaced on every run).
CIRCUIT_RESULTS = "Circuit results"
LOAD_RESULTS = "Load results"
REVIEW_FINDINGS = "Review findings"
READING_RESULTS = "Reading results"
DEVICE_RESULTS = "Device results"
SPLIT_PLAN = "Split plan"
