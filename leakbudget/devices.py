"""Protective devices, their trip and no-trip levels, their times, and the standing-leakage budget rule.

Each level and time carries its source. Budget = budget fraction × trip level (BS 7671:2018 reg. 531.3.2:
protective conductor current in normal service should not exceed 30 % of IΔn).

Times (for the protection tree): every device kind stores its maximum break time and its minimum non-actuating time
(the time a residual current may flow without the device operating; 0 for devices without a delay):
IEC 61008-1 / IEC 61009-1 tables for general and type S (time-delayed) RCDs at 1, 2 and 5 IΔn, and the UL 943
inverse-time curve T = (20 / I)^1.43 s for Class A GFCIs (UL 943C gives Class C and D the same curve from 20 mA).

Operating bands by waveform (for judging non-sine leakage): a sine residual current operates a device between 0.5
and 1 IΔn (IEC 61008-1); pulsating DC operates Types A, F and B between 0.35 and 1.4 IΔn (IEC 61008-1 / IEC 60755,
the exact band from memory); smooth DC above 6 mA (Type A) or 10 mA (Type F) blinds the device (BS 7671:2018 reg.
531.3.3 notes); Type B detects smooth DC. See :func:`operating_band` and :func:`smooth_dc_limit_ma`.
"""

from __future__ import annotations

import math
from bisect import bisect_left, bisect_right
from dataclasses import dataclass
from enum import Enum

from leakbudget.provenance import Kind, Source

BUDGET_FRACTION_DEFAULT = 0.30
BUDGET_FRACTION_SOURCE = Source.published("BS 7671:2018 reg. 531.3.2 (30 % of IΔn)")
# Applying the 30 % rule to a UL 943 device is by analogy, not a published US rule: a modelling choice.
BUDGET_FRACTION_SOURCE_UL = Source(
    Kind.DEFAULT,
    "modelling choice: 30 % of the trip level, by analogy with BS 7671:2018 reg. 531.3.2; no US rule sets a "
    "standing-leakage budget, and the Budget of setting offers a share of the no-trip level instead",
)
TRIP_LEVEL, NO_TRIP_LEVEL = BUDGET_OF = ("trip level", "no-trip level")

UL943 = "UL 943"
UL943C = "UL 943C"
IEC_RCD = "IEC 61008-1 / IEC 61009-1"


class Family(str, Enum):
    GFCI = "gfci"  # UL 943 personnel protection
    SPECIAL = "special-gfci"  # UL 943C special-purpose
    EQUIPMENT = "equipment"  # equipment ground-fault protective device
    RCD = "rcd"  # IEC residual-current device
    NONE = "none"


# ------------------------------------------------------------------------------------------------------- times

TimeTable = tuple[tuple[float, float], ...]  # (multiple of IΔn, seconds), multiples ascending

# IEC 61008-1 / IEC 61009-1, general type: maximum break times at 1, 2 and 5 IΔn.
GENERAL_MAX_BREAK_S: TimeTable = ((1.0, 0.300), (2.0, 0.150), (5.0, 0.040))
# IEC 61008-1 / IEC 61009-1, type S (time-delayed): maximum break times and minimum non-actuating times.
TYPE_S_MAX_BREAK_S: TimeTable = ((1.0, 0.500), (2.0, 0.200), (5.0, 0.150))
TYPE_S_MIN_NON_ACTUATING_S: TimeTable = ((1.0, 0.130), (2.0, 0.060), (5.0, 0.050))

GENERAL_BREAK_SOURCE = Source.published(f"{IEC_RCD} general type (break within 300 / 150 / 40 ms at 1 / 2 / 5 IΔn)")
GENERAL_NON_ACTUATING_SOURCE = Source.published(
    f"{IEC_RCD} general type (no time delay: no minimum non-actuating time)"
)
TYPE_S_BREAK_SOURCE = Source.published(f"{IEC_RCD} type S (break within 500 / 200 / 150 ms at 1 / 2 / 5 IΔn)")
TYPE_S_NON_ACTUATING_SOURCE = Source.published(
    f"{IEC_RCD} type S (does not operate within 130 / 60 / 50 ms at 1 / 2 / 5 IΔn)"
)
UNPROTECTED_TIME_SOURCE = Source.common_practice("unprotected circuit: nothing breaks")


@dataclass(frozen=True, slots=True)
class InverseTime:
    """A maximum break time curve T = (k_ma / I)^exponent seconds, I in mA, from ``from_ma`` upward.

    Below ``from_ma`` the device is not required to break (infinite time). Above ``to_ma`` (where the published
    curve ends) the time at ``to_ma`` is held, a modelling choice. The time is never taken below ``floor_s``.
    """

    k_ma: float
    exponent: float
    from_ma: float
    to_ma: float | None = None
    floor_s: float = 0.0

    def time_s(self, current_ma: float) -> float:
        if current_ma < self.from_ma:
            return math.inf
        i = current_ma if self.to_ma is None else min(current_ma, self.to_ma)
        return max(self.floor_s, (self.k_ma / i) ** self.exponent)


# UL 943 Class A: T = (20 / I)^1.43 s for 6-264 mA.
UL943_CURVE = InverseTime(k_ma=20.0, exponent=1.43, from_ma=6.0, to_ma=264.0)
# UL 943C Class C and D: the same relationship from 20 mA, T not required to be less than 20 ms.
UL943C_CURVE = InverseTime(k_ma=20.0, exponent=1.43, from_ma=20.0, floor_s=0.020)
# Equipment ground-fault protective device: no published time figure here; the UL 943 curve from its setting.
EGFPD_CURVE = InverseTime(k_ma=20.0, exponent=1.43, from_ma=30.0)


def _at_or_below(table: TimeTable, multiple: float) -> float:
    """Time at the largest tabulated multiple not above ``multiple``; inf below the table's first multiple."""
    multiples = [m for m, _ in table]
    i = bisect_right(multiples, multiple)
    return math.inf if i == 0 else table[i - 1][1]


def _at_or_above(table: TimeTable, multiple: float) -> float:
    """Time at the smallest tabulated multiple not below ``multiple``; the last figure beyond the table."""
    multiples = [m for m, _ in table]
    i = bisect_left(multiples, multiple)
    return table[min(i, len(table) - 1)][1]


@dataclass(frozen=True, slots=True)
class Device:
    """A protective device kind: its trip level (must trip at or above) and no-trip level (must not trip below).

    Times: ``max_break_s`` (a table against multiples of IΔn) or ``inverse_time`` (a curve in mA) gives the longest
    time the device may take to break; ``min_non_actuating_s`` the shortest time a residual current at or above
    IΔn may flow without it operating (empty: 0, a device without a delay). Read them through
    :meth:`max_break_time_s` and :meth:`min_non_actuating_time_s`.
    """

    key: str
    label: str
    family: Family
    trip_ma: float
    no_trip_ma: float
    trip_source: Source
    no_trip_source: Source
    market: str  # "us" or "iec": sets the default supply when a circuit gives none
    time_delayed: bool = False  # type S (selective) RCD
    max_break_s: TimeTable = ()
    inverse_time: InverseTime | None = None
    min_non_actuating_s: TimeTable = ()
    break_time_source: Source = UNPROTECTED_TIME_SOURCE
    non_actuating_source: Source = UNPROTECTED_TIME_SOURCE

    @property
    def protected(self) -> bool:
        return self.family is not Family.NONE

    def _multiple_and_current(self, multiple: float | None, current_ma: float | None) -> tuple[float, float]:
        if (multiple is None) == (current_ma is None):
            raise ValueError("give the residual current either as a multiple of the trip level or in mA")
        if multiple is not None:
            return multiple, multiple * self.trip_ma
        assert current_ma is not None
        return current_ma / self.trip_ma, current_ma

    def max_break_time_s(self, multiple: float | None = None, *, current_ma: float | None = None) -> float:
        """Longest time [s] the device may take to break a residual current of ``multiple`` × IΔn (or ``current_ma``).

        IEC tables: the time at the largest tabulated multiple not above the current (300 ms from 1 to 2 IΔn for a
        general type, say); inf below IΔn, where the device need not operate. UL curves: the curve at the current;
        inf below its start. An unprotected circuit: inf.
        """
        if not self.protected:
            return math.inf
        m, i_ma = self._multiple_and_current(multiple, current_ma)
        if self.inverse_time is not None:
            return self.inverse_time.time_s(i_ma)
        return _at_or_below(self.max_break_s, m)

    def min_non_actuating_time_s(self, multiple: float | None = None, *, current_ma: float | None = None) -> float:
        """Shortest time [s] a residual current of ``multiple`` × IΔn (or ``current_ma``) flows without operation.

        0 for devices without a delay (general-type RCDs, GFCIs). Type S: the figure at the smallest tabulated
        multiple not below the current (a higher current's figure bounds a lower current's from below); beyond
        5 IΔn the 5 IΔn figure is held, a modelling choice.
        """
        if not self.protected or not self.min_non_actuating_s:
            return 0.0
        m, _ = self._multiple_and_current(multiple, current_ma)
        return _at_or_above(self.min_non_actuating_s, m)


def _rcd(ma: int, time_delayed: bool = False) -> Device:
    kind = ", type S (time-delayed)" if time_delayed else ""
    return Device(
        key=f"rcd-{ma}{'s' if time_delayed else ''}",
        label=f"RCD IΔn {ma} mA{kind}",
        family=Family.RCD,
        trip_ma=float(ma),
        no_trip_ma=ma / 2.0,
        trip_source=Source.published(f"{IEC_RCD} (operates at IΔn = {ma} mA)"),
        no_trip_source=Source.published(f"{IEC_RCD} (no operation below 0.5 IΔn = {ma / 2:g} mA)"),
        market="iec",
        time_delayed=time_delayed,
        max_break_s=TYPE_S_MAX_BREAK_S if time_delayed else GENERAL_MAX_BREAK_S,
        min_non_actuating_s=TYPE_S_MIN_NON_ACTUATING_S if time_delayed else (),
        break_time_source=TYPE_S_BREAK_SOURCE if time_delayed else GENERAL_BREAK_SOURCE,
        non_actuating_source=TYPE_S_NON_ACTUATING_SOURCE if time_delayed else GENERAL_NON_ACTUATING_SOURCE,
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
            inverse_time=UL943_CURVE,
            break_time_source=Source.published(f"{UL943} Class A (break within T = (20/I)^1.43 s, 6-264 mA)"),
            non_actuating_source=Source.published(f"{UL943} Class A (no time delay: no minimum non-actuating time)"),
        ),
        # UL 943C's trip level, threshold and trip time are confirmed here for Classes C and D; Class E is taken to
        # share them (from memory), hence the label.
        Device(
            "spgfci",
            "Special-purpose GFCI Class C/D/E",
            Family.SPECIAL,
            20.0,
            15.0,
            Source.published(f"{UL943C} Class C/D (trips at 20 mA; tripping threshold 15-20 mA)"),
            Source.published(f"{UL943C} Class C/D (tripping threshold 15-20 mA: no trip below 15 mA)"),
            "us",
            inverse_time=UL943C_CURVE,
            break_time_source=Source.published(
                f"{UL943C} Class C/D (break within T = (20/I)^1.43 s from 20 mA, not required below 20 ms)"
            ),
            non_actuating_source=Source.published(f"{UL943C} Class C/D (no minimum non-actuating time)"),
        ),
        Device(
            "egfpd-30",
            "Equipment ground-fault protective device, 30 mA",
            Family.EQUIPMENT,
            30.0,
            15.0,
            Source.common_practice(
                "30 mA setting of an equipment ground-fault protective device (NEC 426.28 / 427.22 require the "
                "protection, not the level)"
            ),
            Source.from_memory("no-trip at 50 % of setting (typical, from memory)"),
            "us",
            inverse_time=EGFPD_CURVE,
            break_time_source=Source.from_memory(
                "break time: the UL 943 inverse-time curve from the 30 mA setting (typical, from memory)"
            ),
            non_actuating_source=Source.from_memory("no time delay (typical, from memory)"),
        ),
        *(_rcd(ma) for ma in (10, 30, 100, 300, 500)),
        *(_rcd(ma, time_delayed=True) for ma in (100, 300)),
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
    MARGINAL = "marginal"  # within budget, but its switch-on trip likelihood is above the Switch-on limit
    OVER_BUDGET = "over-budget"
    TRIP_RISK = "trip-risk"
    UNPROTECTED = "unprotected"


def budget_ma(dev: Device, fraction: float, of: str = TRIP_LEVEL) -> float:
    """Standing-leakage budget [mA] = fraction × trip level (BS 7671:2018 reg. 531.3.2 uses 0.30 × IΔn), or
    fraction × no-trip level with ``of`` = "no-trip level" (the Budget of setting)."""
    return fraction * (dev.no_trip_ma if of == NO_TRIP_LEVEL else dev.trip_ma)


def budget_source(dev: Device, fraction: float, fraction_from_user: bool, of: str = TRIP_LEVEL) -> Source:
    """Where a circuit's budget comes from, given the device and whether the user chose the fraction."""
    if of == NO_TRIP_LEVEL:
        return Source(Kind.USER, f"budget fraction {fraction:g} × no-trip level (Budget of setting)")
    if fraction_from_user and abs(fraction - BUDGET_FRACTION_DEFAULT) > 1e-12:
        return Source(Kind.USER, f"budget fraction {fraction:g} × trip level (user setting)")
    if dev.family is Family.RCD:
        return BUDGET_FRACTION_SOURCE
    return BUDGET_FRACTION_SOURCE_UL


def status(dev: Device, standing_ma: float, budget: float) -> Status:
    """Status band of a circuit: ok (≤ budget), over-budget (< no-trip), trip-risk (≥ no-trip), unprotected.

    The budget bands only: whether a circuit within budget is marginal depends on its trip likelihood, which the
    check decides.
    """
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


# ---------------------------------------------------------------------------------- operating bands by waveform

RCD_TYPES = ("AC", "A", "F", "B")  # IEC 60755 / IEC 62423; BS 7671:2018 reg. 531.3.3
# Residual-current waveforms, the same words as the catalogue's Waveform column.
SINE, PULSATING_DC, HIGH_FREQUENCY, SMOOTH_DC = WAVEFORMS = ("sine", "pulsating-dc", "high-frequency", "smooth-dc")


@dataclass(frozen=True, slots=True)
class OperatingBand:
    """Where a device of one RCD type operates on one waveform, as fractions of IΔn.

    Below ``low`` × IΔn it must not operate (the no-trip level for that waveform); at ``high`` × IΔn it must.
    """

    low: float
    high: float
    source: Source


_SINE_BAND = OperatingBand(0.5, 1.0, Source.published(f"{IEC_RCD} (sine residual current: operates 0.5-1 IΔn)"))
_PULSATING_NOTE = (
    "IEC 61008-1 / IEC 60755 (pulsating DC residual current: operates 0.35-1.4 IΔn at 0° current-delay angle; "
    "lower limit 0.25 IΔn at 90° and 0.11 IΔn at 135°; upper limit {upper:g} IΔn{small}), band from memory"
)
_PULSATING_BAND = OperatingBand(0.35, 1.4, Source.from_memory(_PULSATING_NOTE.format(upper=1.4, small="")))
# For IΔn ≤ 10 mA the upper limit of the pulsating-DC band is 2 IΔn (IEC 61008-1, from memory).
_PULSATING_BAND_SMALL = OperatingBand(
    0.35, 2.0, Source.from_memory(_PULSATING_NOTE.format(upper=2.0, small=" for IΔn <= 10 mA"))
)
SMALL_RATED_MA = 10.0

OPERATING_BANDS: dict[tuple[str, str], OperatingBand] = {
    **{(t, SINE): _SINE_BAND for t in RCD_TYPES},
    **{(t, PULSATING_DC): _PULSATING_BAND for t in ("A", "F", "B")},
    ("F", HIGH_FREQUENCY): OperatingBand(
        0.5,
        1.4,
        Source.from_memory("IEC 62423 Type F (composite residual current: operates 0.5-1.4 IΔn), band from memory"),
    ),
    ("B", HIGH_FREQUENCY): OperatingBand(
        0.5,
        14.0,
        Source.from_memory(
            "IEC 62423 Type B (sine residual current at 1 kHz: operates 0.5-14 IΔn; 2.4 IΔn at 150 Hz, 6 IΔn at "
            "400 Hz), band from memory"
        ),
    ),
    ("B", SMOOTH_DC): OperatingBand(
        0.5,
        2.0,
        Source.from_memory("IEC 62423 Type B (smooth DC residual current: operates 0.5-2 IΔn), band from memory"),
    ),
}


def _rcd_type(rcd_type: str) -> str:
    t = rcd_type.strip().upper()
    if t not in RCD_TYPES:
        raise KeyError(f"unknown RCD type {rcd_type!r}; one of {', '.join(RCD_TYPES)}")
    return t


def operating_band(rcd_type: str, waveform: str, rated_ma: float | None = None) -> tuple[float, float, Source] | None:
    """(low, high, source): a device of ``rcd_type`` operates on ``waveform`` between low × IΔn and high × IΔn.

    None where the type is not made to detect that waveform (Type AC on anything but sine; Types A and F on
    smooth DC, which blinds them, see :func:`smooth_dc_limit_ma`; Type A on high-frequency leakage). ``rated_ma``
    (IΔn) selects the wider pulsating-DC band of devices of 10 mA and below. Raises KeyError for an unknown type
    or waveform.
    """
    t = _rcd_type(rcd_type)
    if waveform not in WAVEFORMS:
        raise KeyError(f"unknown waveform {waveform!r}; one of {', '.join(WAVEFORMS)}")
    band = OPERATING_BANDS.get((t, waveform))
    if band is None:
        return None
    if waveform == PULSATING_DC and rated_ma is not None and rated_ma <= SMALL_RATED_MA:
        band = _PULSATING_BAND_SMALL
    return band.low, band.high, band.source


# Smooth DC residual current above which a device stops operating as specified (is "blinded").
SMOOTH_DC_LIMITS: dict[str, tuple[float | None, Source]] = {
    "AC": (
        0.0,
        Source(
            Kind.DEFAULT,
            "modelling choice: Type AC is specified for sine residual current only (IEC 61008-1), so any smooth "
            "DC is taken to impair it",
        ),
    ),
    "A": (6.0, Source.published("BS 7671:2018 reg. 531.3.3 note 1 (Type A: operates with up to 6 mA smooth DC)")),
    "F": (10.0, Source.published("BS 7671:2018 reg. 531.3.3 note 2 (Type F: operates with up to 10 mA smooth DC)")),
    "B": (None, Source.published("BS 7671:2018 reg. 531.3.3 (Type B: detects smooth DC residual current)")),
}


def smooth_dc_limit(rcd_type: str) -> tuple[float | None, Source]:
    """(limit_ma, source): smooth DC above limit_ma blinds a device of ``rcd_type``; None: it detects smooth DC."""
    return SMOOTH_DC_LIMITS[_rcd_type(rcd_type)]


def smooth_dc_limit_ma(rcd_type: str) -> float | None:
    """Smooth DC [mA] above which ``rcd_type`` is blinded: A 6, F 10, AC 0; None for Type B (it detects it)."""
    return smooth_dc_limit(rcd_type)[0]
