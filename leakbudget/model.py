"""The validated input: circuits, loads, settings and catalogue, as read from one workbook.

Plain dataclasses with unit-suffixed fields; ``row`` is the 1-based row in the user's sheet, kept for messages.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from leakbudget.catalogue import Catalogue
from leakbudget.devices import Device
from leakbudget.locations import LocationRow
from leakbudget.provenance import Source
from leakbudget.settings import Settings


@dataclass(slots=True)
class Circuit:
    circuit_id: str
    device: Device
    rcd_type: str | None
    voltage_v: float
    frequency_hz: float
    supply_source: Source  # where voltage and frequency came from
    system: str  # "single", "split" or "three"
    rating_a: float | None
    cable_length_m: float | None
    cable_key: str
    rooms: tuple[str, ...]
    note: str | None
    row: int
    shared_neutral: bool = False  # shares its neutral with another circuit (multiwire branch circuit)
    protected_by: str | None = None  # Id of the shared device it hangs under (Protection sheet)
    phase: str = "L1"  # the board's line a single-pole circuit takes
    purpose: str = "mixed"  # sockets, lighting, dedicated or mixed
    neutral_earth_bond: bool = False  # neutral tied to earth on its load side (a bonded subpanel, a generator)


@dataclass(slots=True)
class Load:
    name: str
    circuit_id: str | None  # None = not yet placed
    appliance_key: str | None
    quantity: int
    leakage_ma: float | None  # measured / datasheet, per unit, at the circuit's supply
    y_capacitance_nf: float | None  # per unit, line to earth
    insulation_resistance_mohm: float | None  # per unit, to earth
    power_w: float | None
    current_a: float | None
    leg: tuple[str, ...]  # line conductors, e.g. ("L1",) or ("L1", "L2")
    leg_text: str
    room: str | None
    stays: bool  # the Stays column (formerly Fixed): the planner never moves it
    note: str | None
    row: int
    waveform: str | None = None  # the Waveform column; None = the catalogue's (or sine)
    model: str | None = None  # model reference; a Leakage reading on one unit stands for units of the same model
    protected_by: str | None = None  # Id of a device inside its circuit that protects it (Protection sheet)
    neutral_earth_bond: bool | None = (
        None  # its neutral tied to earth (a strap left in, a bonded generator); None=blank
    )
    connection: str | None = None  # the Connection column, "plug" or "fixed" (hard-wired); None = the catalogue's
    group: str | None = None  # the Group column: loads of one group move together (split)


PURPOSES = ("sockets", "lighting", "dedicated", "mixed")
# What a Loads row's Connection says: a plug (cord-and-plug) or hard-wired; "fixed" as the catalogue names it.
CONNECTION_WORDS = {
    "plug": "plug",
    "cord-and-plug": "plug",
    "cord": "plug",
    "hard-wired": "fixed",
    "hardwired": "fixed",
    "fixed": "fixed",
    "permanent": "fixed",
}
PHASES = ("L1", "L2", "L3")


@dataclass(slots=True)
class SharedDevice:
    """A Protection row: a device protecting several circuits of a board, above other devices, or inside one
    circuit (``circuit_id``)."""

    device_id: str
    device: Device
    rcd_type: str | None
    upstream_id: str | None
    rating_a: float | None
    board: str | None
    system: str  # the lines it carries
    circuit_id: str | None  # set for a device inside one circuit
    note: str | None
    row: int


# What a Readings row's Conditions say: every load running, or loads connected but not running.
ALL_ON = "all on"
IDLE = "idle"
CONDITION_WORDS = {
    "all on": ALL_ON,
    "all loads on": ALL_ON,
    "on": ALL_ON,
    "running": ALL_ON,
    "idle": IDLE,
    "standby": IDLE,
}


@dataclass(slots=True)
class Reading:
    """A measured total leakage of one circuit (Readings sheet), with a leakage clamp around its live conductors."""

    circuit_id: str
    reading_ma: float
    conditions: str  # "all on" or "idle"
    date: str | None
    calibrate: bool  # use this reading to calibrate the circuit's catalogue values
    note: str | None
    row: int


@dataclass
class Project:
    """Everything ``check`` needs, validated."""

    path: Path
    circuits: list[Circuit]
    loads: list[Load]
    settings: Settings
    catalogue: Catalogue
    warnings: list[str] = field(default_factory=list)
    defaults_used: list[str] = field(default_factory=list)  # plain sentences: "Voltage 120 V (…) for K1, K2"
    location_rows: list[LocationRow] = field(default_factory=list)  # the user's Locations sheet
    readings: list[Reading] = field(default_factory=list)  # optional Readings sheet
    protection: list[SharedDevice] = field(default_factory=list)  # optional Protection sheet

    def circuit_index(self) -> dict[str, int]:
        return {c.circuit_id.lower(): i for i, c in enumerate(self.circuits)}
