"""The ranges a typed quantity must fall in to be believed; outside them it is a unit typo or a fault.

A value outside its range is refused (exit code 2) with a hint naming the unit, never silently used: "23" for a
230 V supply would make every capacitive leakage ten times too small and a circuit look safe. Each range states
its source; the standing-leakage ceiling is :data:`MAX_PLAUSIBLE_LEAKAGE_MA`.
"""

from __future__ import annotations

from dataclasses import dataclass

MAX_PLAUSIBLE_LEAKAGE_MA = 100.0  # per unit; above this a value is a unit typo or a fault (common practice)


@dataclass(frozen=True, slots=True)
class Plausible:
    """A closed range [low, high] in ``unit`` for one kind of input, with its source and the fix to suggest."""

    what: str  # "a low-voltage supply"
    low: float
    high: float
    unit: str
    source: str
    hint: str

    def holds(self, value: float) -> bool:
        """True when ``value`` (in ``unit``) is believable."""
        return self.low <= value <= self.high

    def problem(self, value: float) -> str | None:
        """Why ``value`` (in ``unit``) is not believable ("not plausible for …"), or None when it is."""
        if self.holds(value):
            return None
        return f"not plausible for {self.what} ({self.low:g} to {self.high:g} {self.unit}, {self.source})"


# Extra-low voltage is at most 50 V a.c. and low voltage at most 1000 V a.c.: BS 7671:2018 Part 2, definitions.
VOLTAGE_V = Plausible(
    "a low-voltage supply",
    50.0,
    1000.0,
    "V",
    "BS 7671:2018 Part 2, definitions of extra-low and low voltage",
    "type the line-to-neutral voltage in V, e.g. 120 or 230 (leave extra-low-voltage circuits out)",
)
# Mains is 50 or 60 Hz (IEC 60038); railway 16.7 Hz and aircraft ground power 400 Hz bound it (common practice).
FREQUENCY_HZ = Plausible(
    "a power supply",
    16.0,
    400.0,
    "Hz",
    "common practice: 16.7 Hz traction to 400 Hz aircraft supplies",
    "type the supply frequency in Hz, e.g. 50 or 60",
)
# A final circuit's run is tens of metres; voltage drop limits rule out a kilometre (common practice).
CABLE_LENGTH_M = Plausible(
    "a final circuit's cable run",
    0.0,
    1000.0,
    "m",
    "common practice",
    "check the unit: bare numbers are taken in the 'Length unit' setting (m or ft); type e.g. '35 m' or '120 ft'",
)
# Ten times the design figure of 1.5 mA per 100 m at 230 V 50 Hz, about 207 pF/m (Electrical Installation
# Guide, RCD sensitivity chapter); building cables are 50-150 pF/m (common practice).
CABLE_CAPACITANCE_PF_PER_M = Plausible(
    "a cable's capacitance to earth",
    0.0,
    2000.0,
    "pF/m",
    "common practice, ten times the 207 pF/m design figure",
    "type the capacitance of one line conductor to earth per metre in pF/m, e.g. 100",
)
STANDING_LEAKAGE_MA = Plausible(
    "a standing leakage per unit",
    0.0,
    MAX_PLAUSIBLE_LEAKAGE_MA,
    "mA",
    "common practice",
    "check the unit (type '0.75 mA' or '750 uA'); if it was measured, the appliance is faulty: have it repaired "
    "before planning around it",
)

# Settings checked against the same ranges as the columns of the same name.
SETTING_RANGES: dict[str, Plausible] = {"Voltage": VOLTAGE_V, "Frequency": FREQUENCY_HZ}
