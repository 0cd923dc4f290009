"""Measured readings: reconcile circuit readings with the estimate, and calibrate the estimate with them.

The Readings sheet is parsed by :mod:`leakbudget.workbook.readings`; a Leakage measured on one unit standing for
identical units is part of the estimate (:func:`leakbudget.estimate.stand_in_readings`).

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
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Protocol

from leakbudget import risk
from leakbudget.devices import Status, status
from leakbudget.estimate import CATALOGUE, CircuitResult, LoadResult
from leakbudget.model import IDLE, Project, Reading
from leakbudget.provenance import Source
from leakbudget.risk import RiskResult, TripProbability

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


# --- Reconciliation and calibration ------------------------------------------------------------------------------
class _CheckedEstimate(Protocol):
    """The estimate with its trip likelihoods, as :class:`leakbudget.checking.CheckResult` holds them."""

    project: Project
    circuits: list[CircuitResult]
    loads: list[LoadResult]
    risk: RiskResult | None


@dataclass
class Calibration:
    """A circuit's estimate with its catalogue values scaled by ``factor`` to match a reading."""

    factor: float  # k: calibrated catalogue value = k × estimated catalogue value [dimensionless]
    leakage_ma: float  # arithmetic sum [mA]
    phasor_ma: float  # magnitude of the phasor sum (equals the reading) [mA]
    gate_ma: float  # the sum that gates the budget (Sum setting) [mA]
    headroom_used: float  # gate / budget; NaN when unprotected
    status: Status
    risk: TripProbability | None


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


def reading_verdict(
    reading_ma: float, conditions: str, low_ma: float, high_ma: float, meter_accuracy: float
) -> tuple[str, str]:
    """Flag and message for a reading against the estimate's 95 % interval [mA] (see the module notes)."""
    if reading_ma * (1.0 - meter_accuracy) > high_ma:
        return FAR_ABOVE, (
            "far above the estimate: a load is probably faulty (leaking far above its kind) or a "
            "load is missing from the Loads sheet; find it before relying on the estimate"
        )
    if reading_ma * (1.0 + meter_accuracy) < low_ma:
        if conditions == IDLE:
            return CONSISTENT, "below the estimate, as expected with loads idle (not flagged)"
        return FAR_BELOW, (
            "far below the estimate: the catalogue values are probably too high for this site; " + CALIBRATE_ADVICE
        )
    return CONSISTENT, "consistent with the estimate"


def calibration_factor(fixed: complex, catalogue: complex, reading_ma: float) -> float | None:
    """k ≥ 0 with |fixed + k·catalogue| = reading (phasors in mA), or None when no such k exists.

    Larger root of |C|²k² + 2 Re(F C̄) k + |F|² − r² = 0.
    """
    a = abs(catalogue) ** 2
    if a == 0.0:
        return None
    b = 2.0 * (fixed * catalogue.conjugate()).real
    c = abs(fixed) ** 2 - reading_ma**2
    disc = b * b - 4.0 * a * c
    if disc < 0.0:
        return None
    k = (-b + math.sqrt(disc)) / (2.0 * a)
    return k if k >= 0.0 else None


def _calibrate(result: _CheckedEstimate, reading: Reading) -> tuple[Calibration | None, str]:
    index = result.project.circuit_index()[reading.circuit_id.lower()]
    circuit_result = result.circuits[index]
    mine = [r for r in result.loads if r.circuit_id == reading.circuit_id]
    fixed = sum((r.phasor_ma for r in mine if r.basis != CATALOGUE), 0j)
    catalogue = sum((r.phasor_ma for r in mine if r.basis == CATALOGUE), 0j)
    k = calibration_factor(fixed, catalogue, reading.reading_ma)
    if k is None:
        why = (
            "the circuit has no catalogue values to calibrate"
            if catalogue == 0
            else "no scaling of the catalogue values reaches the reading (the measured and computed parts alone "
            "exceed it); check the reading and the measured values"
        )
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
        circuit = circuit_result.circuit
        key = risk.stream_key(circuit.circuit_id) if circuit.protected_by else 0  # the draws its check used
        for r in mine:
            d = risk.distribution(r, params)._replace(stream=key)
            if r.basis == CATALOGUE:
                d = d._replace(
                    shape=risk.UNIFORM, centre_ma=k * r.leakage_ma, spread=params.meter_accuracy, cap=math.inf
                )
            loads.append(d)
        samples = result.risk.samples if result.risk is not None else risk.SAMPLES_MAX
        probability = risk.trip_probability(loads, dev, sum_rule=risk.LIKELIHOOD_SUM, samples=samples, seed=params.seed)
    calibration = Calibration(
        factor=k,
        leakage_ma=arithmetic,
        phasor_ma=phasor,
        gate_ma=gate,
        headroom_used=gate / budget if dev.protected and budget > 0 else math.nan,
        status=status(dev, gate, budget),
        risk=probability,
    )
    how = (
        f"catalogue values × {k:.3g} so that the phasor sum equals the reading (Readings row {reading.row}); "
        "measured and computed values kept; calibrated values taken as measured for the likelihood"
    )
    return calibration, how


def reconcile(result: _CheckedEstimate) -> list[ReadingResult]:
    """Compare every reading with its circuit's estimate; calibrate where asked."""
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
            q = risk.leakage_quantiles(
                loads, (tail, 0.5, 1.0 - tail), sum_rule="phasor", samples=samples, seed=params.seed
            )
            intervals[cid] = (float(q[0]), float(q[1]), float(q[2]))
        low, median, high = intervals[cid]
        flag, message = reading_verdict(reading.reading_ma, reading.conditions, low, high, params.meter_accuracy)
        calibration, note = _calibrate(result, reading) if reading.calibrate else (None, None)
        if flag == FAR_BELOW and calibration is not None:
            message = message.replace(CALIBRATE_ADVICE, "calibrated with this reading")
        out.append(
            ReadingResult(
                reading,
                result.circuits[index[cid.lower()]].phasor_ma,
                low,
                median,
                high,
                flag,
                message,
                calibration,
                note,
            )
        )
    return out
