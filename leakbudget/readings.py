"""Measured readings: reconcile circuit readings with the estimate, calibrate, and let one unit stand for others.

* Readings sheet: one clamp reading of a circuit's residual (protective conductor) current per row. A leakage
  clamp around the line and neutral conductors sees the phasor sum, so the reading is compared with the
  distribution of the estimate's phasor sum (Monte Carlo, :mod:`leakbudget.risk`). Thresholds: the reading is
  *far above* when even its lowest value within the meter's accuracy, reading × (1 − a), lies above the 97.5th
  percentile of the estimate; *far below* when reading × (1 + a) lies under the 2.5th percentile. The 2.5th and
  97.5th percentiles bound the 95 % coverage interval of JCGM 101:2008 clause 7.7 (95 % is the conventional
  coverage probability); a is the ``Meter accuracy`` setting. Far above: a load is probably faulty (leaking far
  above its kind), or a load is missing from the Loads sheet. Far below: the catalogue values are too high for
  this site. An ``idle`` reading (loads connected but not running) is only checked for *far above*: switched
  parts leak nothing when off, so a low idle reading proves nothing.

* Calibration (``Calibrate`` = yes on an ``all on`` reading): the circuit's catalogue-based loads are multiplied
  by one factor k ≥ 0 chosen so that the phasor sum of the point estimates equals the reading,
  |F + k·C| = reading, where F is the phasor sum of the measured and computed parts (kept as they are) and C
  that of the catalogue parts. The calibrated values are then treated as measured (uniform within the meter
  accuracy) for the trip likelihood. The results show the estimate and the calibrated figures side by side.

* Identical units: a load with no leakage figure of its own takes the ``Leakage`` measured on loads with the same
  ``Appliance`` key and ``Model`` (the mean if several were measured), rescaled to its own supply by the row's
  nature (capacitive part ∝ V·f, resistive part ∝ V); its source says which unit was measured.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import date, datetime
from typing import TYPE_CHECKING

from leakbudget import leakage as phys
from leakbudget.devices import Status, status
from leakbudget.model import Circuit, Project, Reading
from leakbudget.provenance import Source
from leakbudget.input.table import RawTable

if TYPE_CHECKING:
    from leakbudget.estimate import CheckResult, LoadResult
    from leakbudget.risk import TripProbability

ALL_ON = "all on"
IDLE = "idle"
CONDITION_WORDS = {"all on": ALL_ON, "all loads on": ALL_ON, "on": ALL_ON, "running": ALL_ON, "idle": IDLE,
                   "standby": IDLE}

CALIBRATE_ADVICE = "consider calibrating this circuit with the reading (Calibrate = yes)"
FAR_ABOVE = "far above"
FAR_BELOW = "far below"
CONSISTENT = "consistent"

COVERAGE = 0.95
COVERAGE_SOURCE = Source.common_practice("95 % coverage probability")
THRESHOLDS = (
    "far above when reading × (1 − meter accuracy) exceeds the 97.5th percentile of the estimate's phasor sum, "
    "far below when reading × (1 + meter accuracy) is under its 2.5th percentile: the 95 % coverage interval "
    "computed as in JCGM 101:2008 clause 7.7 (95 % by common practice); idle readings are only checked for far "
    "above."
)


def read_readings(table: RawTable, circuits: list[Circuit], defaults_used: list[str]) -> list[Reading]:
    """Parse the Readings sheet; every problem is a WorkbookError naming the cell."""
    by_id = {c.circuit_id.lower(): c for c in circuits}
    readings: list[Reading] = []
    calibrating: dict[str, int] = {}
    defaulted: list[str] = []
    for row in table.rows:
        cid = table.text(row, "Circuit")
        circuit = by_id.get(cid.lower()) if cid else None
        if circuit is None:
            raise table.error(row, "Circuit", f"'{cid or ''}' is not a circuit in the Circuits sheet",
                              hint="use a circuit id from the Circuits sheet")
        value = table.number(row, "Reading", "mA")
        if value is None:
            raise table.error(row, "Reading", "the reading is blank", hint="type the clamp reading, e.g. '1.2 mA'")
        words = table.text(row, "Conditions")
        if words is None:
            conditions = ALL_ON
            defaulted.append(str(row[0]))
        elif words.strip().lower() in CONDITION_WORDS:
            conditions = CONDITION_WORDS[words.strip().lower()]
        else:
            raise table.error(row, "Conditions", f"'{words}' is not 'all on' or 'idle'",
                              hint="type 'all on' (every load running) or 'idle' (connected, not running)")
        calibrate = bool(table.flag(row, "Calibrate"))
        if calibrate and conditions != ALL_ON:
            raise table.error(row, "Calibrate", "only an 'all on' reading can calibrate a circuit",
                              hint="set Calibrate to no, or measure with every load running")
        if calibrate and circuit.circuit_id in calibrating:
            raise table.error(row, "Calibrate", f"circuit '{circuit.circuit_id}' is already calibrated by row "
                              f"{calibrating[circuit.circuit_id]}", hint="mark one reading per circuit")
        if calibrate:
            calibrating[circuit.circuit_id] = row[0]
        raw_date = table.raw(row, "Date")
        readings.append(Reading(
            circuit_id=circuit.circuit_id, reading_ma=value, conditions=conditions,
            date=raw_date.date().isoformat() if isinstance(raw_date, datetime) else
            raw_date.isoformat() if isinstance(raw_date, date) else table.text(row, "Date"),
            calibrate=calibrate, note=table.text(row, "Note"), row=row[0],
        ))
    if defaulted:
        defaults_used.append(f"Readings conditions '{ALL_ON}' for row(s) {', '.join(defaulted)} (blank Conditions)")
    return readings


# --- Identical units -------------------------------------------------------------------------------------------
def _unit_key(appliance_key: str | None, model: str | None) -> tuple[str, str] | None:
    if not model:
        return None
    return (appliance_key or "", model.strip().lower())


def stand_in_readings(project: Project, results: list["LoadResult"]) -> None:
    """Give loads without a figure of their own the Leakage measured on an identical unit (same key and model).

    Changes ``results`` in place: basis becomes measured, ``measured_on`` names the unit(s) measured.
    """
    from leakbudget.estimate import CATALOGUE, MEASURED

    measured: dict[tuple[str, str], list[LoadResult]] = {}
    for r in results:
        load = r.load
        if load is not None and load.leakage_ma is not None:
            key = _unit_key(load.appliance_key, load.model)
            if key is not None:
                measured.setdefault(key, []).append(r)
    if not measured:
        return
    circuits = {c.circuit_id: c for c in project.circuits}
    for r in results:
        load = r.load
        key = _unit_key(load.appliance_key, load.model) if load is not None else None
        if load is None or r.basis != CATALOGUE or key not in measured:
            continue
        nature = r.appliance.nature if r.appliance is not None else "capacitive"
        per_unit = 0j
        for m in measured[key]:
            res, cap = phys.split_by_nature(m.load.leakage_ma, nature)  # type: ignore[union-attr]
            res, cap = phys.rescale(res, cap, m.voltage_v, m.frequency_hz, r.voltage_v, r.frequency_hz)
            per_unit += complex(float(res), float(cap)) / len(measured[key])
        circuit = circuits.get(load.circuit_id) if load.circuit_id else None
        rotation = phys.leg_rotation(load.leg, circuit.system) if circuit else 1.0
        units = ", ".join(f"'{m.name}' (Loads row {m.load.row})" for m in measured[key])  # type: ignore[union-attr]
        values = ", ".join(f"{m.load.leakage_ma:g} mA at {m.voltage_v:g} V {m.frequency_hz:g} Hz"  # type: ignore[union-attr]
                           for m in measured[key])
        r.per_unit_ma = abs(per_unit)
        r.leakage_ma = abs(per_unit) * r.quantity
        r.phasor_ma = per_unit * rotation * r.quantity
        r.basis = MEASURED
        r.measured_on = units
        mean = "mean of the readings on" if len(measured[key]) > 1 else "reading on"
        r.source = (f"measured on an identical unit: {mean} {units}, same appliance '{load.appliance_key or '-'}' "
                    f"and model '{load.model}' ({values})")
        if (measured[key][0].voltage_v, measured[key][0].frequency_hz) != (r.voltage_v, r.frequency_hz):
            r.source += f"; rescaled to {r.voltage_v:g} V {r.frequency_hz:g} Hz ({nature})"


# --- Reconciliation and calibration ------------------------------------------------------------------------------
@dataclass
class Calibration:
    """A circuit's estimate with its catalogue values scaled by ``factor`` to match a reading."""

    factor: float  # k: calibrated catalogue value = k × estimated catalogue value [dimensionless]
    leakage_ma: float  # arithmetic sum [mA]
    phasor_ma: float  # magnitude of the phasor sum (equals the reading) [mA]
    gate_ma: float  # the sum that gates the budget (Sum setting) [mA]
    headroom_used: float  # gate / budget; NaN when unprotected
    status: Status
    risk: "TripProbability | None"


@dataclass
class ReadingResult:
    reading: Reading
    estimate_ma: float  # the estimate's phasor sum (point values) [mA]
    low_ma: float  # 2.5th percentile of the estimate's phasor sum [mA]
    median_ma: float  # [mA]
    high_ma: float  # 97.5th percentile [mA]
    flag: str  # far above / far below / consistent
    message: str
    calibration: Calibration | None
    calibration_note: str | None  # how it was calibrated, or why it could not be


def classify(reading_ma: float, conditions: str, low_ma: float, high_ma: float, meter_accuracy: float
             ) -> tuple[str, str]:
    """Flag and message for a reading against the estimate's 95 % interval [mA] (see the module notes)."""
    if reading_ma * (1.0 - meter_accuracy) > high_ma:
        return FAR_ABOVE, ("far above the estimate: a load is probably faulty (leaking far above its kind) or a "
                           "load is missing from the Loads sheet; find it before relying on the estimate")
    if reading_ma * (1.0 + meter_accuracy) < low_ma:
        if conditions == IDLE:
            return CONSISTENT, "below the estimate, as expected with loads idle (not flagged)"
        return FAR_BELOW, ("far below the estimate: the catalogue values are probably too high for this site; "
                           + CALIBRATE_ADVICE)
    return CONSISTENT, "consistent with the estimate"


def calibration_factor(fixed: complex, catalogue: complex, reading_ma: float) -> float | None:
    """k ≥ 0 with |fixed + k·catalogue| = reading (phasors in mA), or None when no such k exists.

    Larger root of |C|²k² + 2 Re(F C̄) k + |F|² − r² = 0.
    """
    a = abs(catalogue) ** 2
    if a == 0.0:
        return None
    b = 2.0 * (fixed * catalogue.conjugate()).real
    c = abs(fixed) ** 2 - reading_ma ** 2
    disc = b * b - 4.0 * a * c
    if disc < 0.0:
        return None
    k = (-b + math.sqrt(disc)) / (2.0 * a)
    return k if k >= 0.0 else None


def _calibrate(result: "CheckResult", reading: Reading) -> tuple[Calibration | None, str]:
    from leakbudget import risk
    from leakbudget.estimate import CATALOGUE

    index = result.project.circuit_index()[reading.circuit_id.lower()]
    circuit_result = result.circuits[index]
    mine = [r for r in result.loads if r.circuit_id == reading.circuit_id]
    fixed = sum((r.phasor_ma for r in mine if r.basis != CATALOGUE), 0j)
    catalogue = sum((r.phasor_ma for r in mine if r.basis == CATALOGUE), 0j)
    k = calibration_factor(fixed, catalogue, reading.reading_ma)
    if k is None:
        why = ("the circuit has no catalogue values to calibrate" if catalogue == 0 else
               "no scaling of the catalogue values reaches the reading (the measured and computed parts alone "
               "exceed it); check the reading and the measured values")
        return None, f"not calibrated: {why}"
    settings = result.project.settings
    params = risk.RiskParameters.from_settings(settings)
    arithmetic = sum(r.leakage_ma * (k if r.basis == CATALOGUE else 1.0) for r in mine)
    phasor = abs(fixed + k * catalogue)
    gate = phasor if settings.sum_rule == "phasor" else arithmetic
    dev = circuit_result.circuit.device
    budget = circuit_result.budget_ma
    probability = None
    if dev.protected:
        loads = []
        for r in mine:
            d = risk.distribution(r, params)
            if r.basis == CATALOGUE:
                d = risk.LeakageDistribution(risk.UNIFORM, k * r.leakage_ma, params.meter_accuracy, d.coefficient,
                                             d.switch_on_factor)
            loads.append(d)
        samples = result.risk.samples if result.risk is not None else risk.SAMPLES_MAX
        probability = risk.trip_probability(loads, dev, sum_rule=settings.sum_rule, samples=samples,
                                            seed=params.seed)
    calibration = Calibration(
        factor=k, leakage_ma=arithmetic, phasor_ma=phasor, gate_ma=gate,
        headroom_used=gate / budget if dev.protected and budget > 0 else math.nan,
        status=status(dev, gate, budget),
        risk=probability,
    )
    how = (f"catalogue values × {k:.3g} so that the phasor sum equals the reading (Readings row {reading.row}); "
           "measured and computed values kept; calibrated values taken as measured for the likelihood")
    return calibration, how


def reconcile(result: "CheckResult") -> list[ReadingResult]:
    """Compare every reading with its circuit's estimate; calibrate where asked."""
    from leakbudget import risk

    project = result.project
    if not project.readings:
        return []
    params = risk.RiskParameters.from_settings(project.settings)
    samples = result.risk.samples if result.risk is not None else risk.SAMPLES_MAX
    index = project.circuit_index()
    tail = (1.0 - COVERAGE) / 2.0
    intervals: dict[str, tuple[float, float, float]] = {}
    out: list[ReadingResult] = []
    for reading in project.readings:
        cid = reading.circuit_id
        if cid not in intervals:
            loads = [risk.distribution(r, params) for r in result.loads if r.circuit_id == cid]
            q = risk.leakage_quantiles(loads, (tail, 0.5, 1.0 - tail), sum_rule="phasor", samples=samples,
                                       seed=params.seed)
            intervals[cid] = (float(q[0]), float(q[1]), float(q[2]))
        low, median, high = intervals[cid]
        flag, message = classify(reading.reading_ma, reading.conditions, low, high, params.meter_accuracy)
        calibration, note = _calibrate(result, reading) if reading.calibrate else (None, None)
        if flag == FAR_BELOW and calibration is not None:
            message = message.replace(CALIBRATE_ADVICE, "calibrated with this reading")
        out.append(ReadingResult(reading, result.circuits[index[cid.lower()]].phasor_ma, low, median, high, flag,
                                 message, calibration, note))
    return out
