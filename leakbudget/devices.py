"""Protective devices, their trip and no-trip levels, and the standing-leakage budget rule.

Each level carries its source. Budget = budget fraction × trip level (BS 7671:2018 reg. 531.3.2: protective
conductor current in normal service should not exceed 30 % of IΔn).
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum

from leakbudget.provenance import Kind, Source

BUDGET_FRACTION_DEFAULT = 0.30
BUDGET_FRACTION_SOURCE = Source.published("BS 7671:2018 reg. 531.3.2 (30 % of IΔn)")
# Applying the 30 % rule to a UL 943 device is by analogy, not a published US rule.
BUDGET_FRACTION_SOURCE_UL = Source.common_practice("30 % of trip level, by analogy with BS 7671:2018 reg. 531.3.2")

UL943 = "UL 943"
UL943C = "UL 943C"
IEC_RCD = "IEC 61008-1 / IEC 61009-1"


class Family(str, Enum):
    GFCI = "gfci"  # UL 943 personnel protection
    SPECIAL = "special-gfci"  # UL 943C special-purpose
    EQUIPMENT = "equipment"  # equipment ground-fault protective device
    RCD = "rcd"  # IEC residual-current device
    NONE = "none"


@dataclass(frozen=True, slots=True)
class Device:
    """A protective device kind: its trip level (must trip at or above) and no-trip level (must not trip below)."""

    key: str
    label: str
    family: Family
    trip_ma: float
    no_trip_ma: float
    trip_source: Source
    no_trip_source: Source
    market: str  # "us" or "iec": sets the default supply when a circuit gives none

    @property
    def protected(self) -> bool:
        return self.family is not Family.NONE


def _rcd(ma: int) -> Device:
    return Device(
        key=f"rcd-{ma}",
        label=f"RCD IΔn {ma} mA",
        family=Family.RCD,
        trip_ma=float(ma),
        no_trip_ma=ma / 2.0,
        trip_source=Source.published(f"{IEC_RCD} (operates at IΔn = {ma} mA)"),
        no_trip_source=Source.published(f"{IEC_RCD} (no operation below 0.5 IΔn = {ma / 2:g} mA)"),
        market="iec",
    )


DEVICES: dict[str, Device] = {
    d.key: d
    for d in (
        Device(
            "gfci-a",
            "GFCI Class A (personnel)",
            Family.GFCI,
            6.0,
            4.0,
            Source.published(f"{UL943} Class A (trips at 6 mA)"),
            Source.published(f"{UL943} Class A (no trip below 4 mA)"),
            "us",
        ),
        Device(
            "spgfci",
            "Special-purpose GFCI Class C/D/E",
            Family.SPECIAL,
            20.0,
            15.0,
            Source.published(f"{UL943C} Class C/D/E (trips at 20 mA)"),
            Source.from_memory(f"{UL943C} no-trip 15 mA, within its published 15-20 mA band (from memory)"),
            "us",
        ),
        Device(
            "egfpd-30",
            "Equipment ground-fault protective device, 30 mA",
            Family.EQUIPMENT,
            30.0,
            15.0,
            Source.published("NEC 426.28 / 427.22 equipment protection (30 mA setting)"),
            Source.from_memory("no-trip at 50 % of setting (typical, from memory)"),
            "us",
        ),
        *(_rcd(ma) for ma in (10, 30, 100, 300, 500)),
        Device(
            "none",
            "No ground-fault protection",
            Family.NONE,
            float("nan"),
            float("nan"),
            Source.common_practice("unprotected circuit"),
            Source.common_practice("unprotected circuit"),
            "us",
        ),
    )
}

DEVICE_ALIASES = {"": "none", "no": "none", "-": "none"}


def device(key: str) -> Device:
    """Look a device up by key (case-insensitive); raise KeyError for an unknown key."""
    k = key.strip().lower()
    return DEVICES[DEVICE_ALIASES.get(k, k)]


class Status(str, Enum):
    OK = "ok"
    OVER_BUDGET = "over-budget"
    TRIP_RISK = "trip-risk"
    UNPROTECTED = "unprotected"


def budget_ma(dev: Device, fraction: float) -> float:
    """Standing-leakage budget [mA] = fraction × trip level (BS 7671:2018 reg. 531.3.2 uses 0.30 × IΔn)."""
    return fraction * dev.trip_ma


def budget_source(dev: Device, fraction: float, fraction_from_user: bool) -> Source:
    """Where a circuit's budget comes from, given the device and whether the user chose the fraction."""
    if fraction_from_user and abs(fraction - BUDGET_FRACTION_DEFAULT) > 1e-12:
        return Source(Kind.USER, f"budget fraction {fraction:g} × trip level (user setting)")
    if dev.family is Family.RCD:
        return BUDGET_FRACTION_SOURCE
    return BUDGET_FRACTION_SOURCE_UL


def status(dev: Device, standing_ma: float, budget: float) -> Status:
    """Status band of a circuit: ok (≤ budget), over-budget (< no-trip), trip-risk (≥ no-trip), unprotected."""
    if not dev.protected:
        return Status.UNPROTECTED
    if standing_ma >= dev.no_trip_ma:
        return Status.TRIP_RISK
    if standing_ma > budget:
        return Status.OVER_BUDGET
    return Status.OK


def ul943_trip_time_s(current_ma: float) -> float:
    """UL 943 Class A inverse-time limit T = (20 / I)^1.43 seconds, I in mA, valid 6-264 mA (UL 943)."""
    if not 6.0 <= current_ma <= 264.0:
        raise ValueError("the UL 943 trip-time curve holds from 6 mA to 264 mA")
    return (20.0 / current_ma) ** 1.43
