"""Check results as plain data: JSON documents and the rows of the result sheets.

One place decides what a circuit or load result is called at the edges (unit-suffixed keys, column headers
with units), so the JSON, the workbook sheets and the report agree.
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Iterable, Iterator, Sequence
from typing import Any

from leakbudget.about import CAUTION, __version__
from leakbudget.checking import CheckResult
from leakbudget.estimate import CircuitResult, LoadResult
from leakbudget.input.schema import CIRCUIT_RESULTS, DEVICE_RESULTS, LOAD_RESULTS, READING_RESULTS
from leakbudget.output.palette import BUDGET_COLOUR, NO_TRIP_COLOUR, SEGMENT_COLOURS
from leakbudget.protection import DeviceResult
from leakbudget.readings import COVERAGE, THRESHOLDS, ReadingResult
from leakbudget.risk import TripProbability, likelihood_text
from leakbudget.xlsx.package import ChartSpec, SheetData
from leakbudget.xlsx.rows import ColumnRows

PROBABILITY_DIGITS = 6
ROUNDING_BLOCK = 4096  # values rounded together by _rounded


def _num(value: float | None, digits: int = 4) -> float | None:
    if value is None or (isinstance(value, float) and (math.isnan(value) or math.isinf(value))):
        return None
    return round(float(value), digits)


def risk_dict(p: TripProbability | None) -> dict[str, Any]:
    """The four likelihood keys of a circuit (None when unprotected)."""
    return {
        "trip_probability": _num(p.dry, PROBABILITY_DIGITS) if p else None,
        "trip_probability_se": _num(p.dry_se, PROBABILITY_DIGITS) if p else None,
        "trip_probability_switch_on": _num(p.switch_on, PROBABILITY_DIGITS) if p else None,
        "trip_probability_switch_on_se": _num(p.switch_on_se, PROBABILITY_DIGITS) if p else None,
        "trip_probability_text": likelihood_text(p),
        "trip_probability_switch_on_text": likelihood_text(p, switch_on=True),
    }


def reading_dict(rr: ReadingResult, c: CircuitResult) -> dict[str, Any]:
    """One reading beside its circuit's estimate and, when calibrated, the calibrated figures."""
    reading = rr.reading
    cal = rr.calibration
    return {
        "circuit": reading.circuit_id,
        "row": reading.row,
        "reading_ma": _num(reading.reading_ma),
        "conditions": reading.conditions,
        "date": reading.date,
        "estimate_phasor_ma": _num(rr.estimate_ma),
        "estimate_low_ma": _num(rr.low_ma),
        "estimate_median_ma": _num(rr.median_ma),
        "estimate_high_ma": _num(rr.high_ma),
        "coverage": COVERAGE,
        "reading_to_median": _num(reading.reading_ma / rr.median_ma if rr.median_ma > 0 else None),
        "flag": rr.flag,
        "message": rr.message,
        "calibrate": reading.calibrate,
        "calibration": rr.calibration_note,
        "estimate_gate_ma": _num(c.gate_ma),
        "estimate_status": c.status.value,
        **{f"estimate_{k}": v for k, v in risk_dict(c.risk).items()},
        "calibration_factor": _num(cal.factor) if cal else None,
        "calibrated_leakage_ma": _num(cal.leakage_ma) if cal else None,
        "calibrated_phasor_ma": _num(cal.phasor_ma) if cal else None,
        "calibrated_gate_ma": _num(cal.gate_ma) if cal else None,
        "calibrated_headroom_used": _num(cal.headroom_used) if cal else None,
        "calibrated_status": cal.status.value if cal else None,
        **{f"calibrated_{k}": v for k, v in risk_dict(cal.risk if cal else None).items()},
        "note": reading.note,
    }


def phase_deg(r: LoadResult) -> float | None:
    if abs(r.phasor_ma) == 0:
        return None
    return round(math.degrees(cmath.phase(r.phasor_ma)), 1)


def circuit_dict(c: CircuitResult) -> dict[str, Any]:
    circuit = c.circuit
    levels = c.guarding_device or circuit.device  # a circuit under a shared device only: that device's levels
    dev = circuit.device
    return {
        "circuit": circuit.circuit_id,
        "device": dev.key,
        "device_label": dev.label,
        "rcd_type": circuit.rcd_type,
        "system": circuit.system,
        "voltage_v": circuit.voltage_v,
        "frequency_hz": circuit.frequency_hz,
        "supply_source": str(circuit.supply_source),
        "rating_a": circuit.rating_a,
        "rooms": list(circuit.rooms),
        "load_count": c.load_count,
        "cable_leakage_ma": _num(c.cable_ma),
        "leakage_ma": _num(c.leakage_ma),
        "phasor_ma": _num(c.phasor_ma),
        "gate_ma": _num(c.gate_ma),
        "budget_ma": _num(c.budget_ma),
        "budget_source": str(c.budget_source) if levels.protected else None,
        "no_trip_ma": _num(levels.no_trip_ma),
        "no_trip_source": str(levels.no_trip_source) if levels.protected else None,
        "trip_ma": _num(levels.trip_ma),
        "trip_source": str(levels.trip_source) if levels.protected else None,
        "headroom_used": _num(c.headroom_used),
        "status": c.status.value,
        "largest_contributor": c.largest,
        "largest_contributor_ma": _num(c.largest_ma),
        **risk_dict(c.risk),
        "pulsating_dc_ma": _num(c.pulsating_dc_ma),
        "high_frequency_ma": _num(c.high_frequency_ma),
        "smooth_dc_ma": _num(c.smooth_dc_ma),
        "trip_equivalent_ma": _num(c.trip_equivalent_ma),
        "dc_blinded": c.dc_blinded,
        "note": circuit.note,
    }


def tree_keys(c: CircuitResult) -> dict[str, Any]:
    """The protection tree's keys of a circuit (only in workbooks with a Protection sheet)."""
    return {
        "protected_by": c.protected_by,
        "device_status": c.device_status.value if c.device_status is not None else None,
        "phase": c.circuit.phase,
        "purpose": c.circuit.purpose,
    }


def device_dict(d: DeviceResult) -> dict[str, Any]:
    """One shared device of the Protection sheet, with everything below it."""
    shared = d.shared
    dev = shared.device
    return {
        "id": shared.device_id,
        "device": dev.key,
        "device_label": dev.label,
        "rcd_type": shared.rcd_type,
        "upstream": shared.upstream_id,
        "inside_circuit": shared.circuit_id,
        "board": shared.board,
        "system": shared.system,
        "rating_a": shared.rating_a,
        "circuits": d.circuits,
        "below": d.below,
        "load_count": d.load_count,
        "leakage_ma": _num(d.leakage_ma),
        "phasor_ma": _num(d.phasor_ma),
        "gate_ma": _num(d.gate_ma),
        "trip_equivalent_ma": _num(d.trip_equivalent_ma),
        "smooth_dc_ma": _num(d.smooth_dc_ma),
        "dc_blinded": d.dc_blinded,
        "budget_ma": _num(d.budget_ma),
        "budget_source": str(d.budget_source),
        "no_trip_ma": _num(dev.no_trip_ma),
        "no_trip_source": str(dev.no_trip_source),
        "trip_ma": _num(dev.trip_ma),
        "trip_source": str(dev.trip_source),
        "headroom_used": _num(d.headroom_used),
        "status": d.status.value,
        "largest_contributor": d.largest,
        "largest_contributor_ma": _num(d.largest_ma),
        **risk_dict(d.risk),
        "circuits_lost_on_trip": d.lost,
        "note": shared.note,
    }


def load_dict(r: LoadResult) -> dict[str, Any]:
    load = r.load
    return {
        "load": r.name,
        "kind": "load" if load is not None else "cable",
        "circuit": r.circuit_id,
        "appliance": r.appliance.key if r.appliance else None,
        "quantity": r.quantity,
        "per_unit_ma": _num(r.per_unit_ma),
        "leakage_ma": _num(r.leakage_ma),
        "phase_deg": phase_deg(r),
        "basis": r.basis,
        "source": r.source,
        "voltage_v": r.voltage_v,
        "frequency_hz": r.frequency_hz,
        "leg": load.leg_text if load else None,
        "room": load.room if load else None,
        "stays": load.stays if load else None,
        "row": load.row if load else None,
        "model": load.model if load else None,
        "measured_on": r.measured_on,
    }


def settings_dict(result: CheckResult) -> dict[str, Any]:
    s = result.project.settings
    return {name: {"value": s.values[name], "source": str(s.sources[name])} for name in s.values}


def to_json(result: CheckResult, with_loads: bool = True) -> dict[str, Any]:
    """The document ``leakbudget check --json`` prints (``with_loads=False``: its ``circuits`` and ``loads`` lists
    left empty, for :func:`json_chunks`)."""
    project = result.project
    return {
        "tool": f"leakbudget {__version__}",
        "file": str(project.path),
        "all_ok": result.all_ok,
        "sum_rule": project.settings.sum_rule,
        "basis": project.settings.basis,
        "settings": settings_dict(result),
        "defaults_used": project.defaults_used,
        "warnings": project.warnings,
        "caution": CAUTION,
        "circuits": [_circuit_record(result, c) for c in result.circuits] if with_loads else [],
        "devices": [device_dict(d) for d in result.devices],
        "loads": [load_dict(r) for r in result.loads] if with_loads else [],
        "risk": risk_summary(result),
        "readings": readings_list(result),
    }


def _circuit_record(result: CheckResult, c: CircuitResult) -> dict[str, Any]:
    return {**circuit_dict(c), **tree_keys(c)} if result.project.protection else circuit_dict(c)


def json_chunks(result: CheckResult, extra: dict[str, Any]) -> Iterator[str]:
    """The text of ``json.dumps(to_json(result) | extra, indent=2, ensure_ascii=False)``, made a piece at a time:
    the circuits and the loads (the bulk of a big workbook's document) are turned into text one by one, never held
    as dicts or as one text all at once, so ``check --json`` needs little more memory than the check itself."""
    import json
    import textwrap

    def records(items: Iterable[dict[str, Any]]) -> Iterator[str]:
        for i, item in enumerate(items):
            text = json.dumps(item, indent=2, ensure_ascii=False, allow_nan=False)
            yield ("," if i else "") + "\n" + textwrap.indent(text, "    ")

    doc = {**to_json(result, with_loads=False), **extra}
    text = json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False)
    head, rest = text.split('\n  "circuits": []', 1)
    middle, tail = rest.split('\n  "loads": []', 1)
    del text, rest
    yield head + '\n  "circuits": ['
    yield from records(_circuit_record(result, c) for c in result.circuits)
    yield ("\n  ]" if result.circuits else "]") + middle + '\n  "loads": ['
    yield from records(load_dict(r) for r in result.loads)
    yield ("\n  ]" if result.loads else "]") + tail


def risk_summary(result: CheckResult) -> dict[str, Any] | None:
    """How the trip likelihoods were computed (samples, seed, model sentences)."""
    risk = result.risk
    if risk is None:
        return None
    return {"samples": risk.samples, "seed": risk.seed, "sum_rule": risk.sum_rule, "method": risk.method}


def readings_list(result: CheckResult) -> list[dict[str, Any]]:
    index = result.project.circuit_index()
    return [reading_dict(rr, result.circuits[index[rr.reading.circuit_id.lower()]]) for rr in result.readings]


CIRCUIT_COLUMNS: tuple[tuple[str, str, str | None], ...] = (
    # (header, json key, number format)
    ("Circuit", "circuit", None),
    ("Device", "device", None),
    ("RCD type", "rcd_type", None),
    ("System", "system", None),
    ("Voltage (V)", "voltage_v", "0"),
    ("Frequency (Hz)", "frequency_hz", "0"),
    ("Supply source", "supply_source", None),
    ("Loads", "load_count", "0"),
    ("Cable leakage (mA)", "cable_leakage_ma", "0.000"),
    ("Leakage, arithmetic (mA)", "leakage_ma", "0.000"),
    ("Leakage, phasor (mA)", "phasor_ma", "0.000"),
    ("Budget (mA)", "budget_ma", "0.000"),
    ("Budget source", "budget_source", None),
    ("No-trip level (mA)", "no_trip_ma", "0.000"),
    ("No-trip source", "no_trip_source", None),
    ("Trip level (mA)", "trip_ma", "0.000"),
    ("Trip source", "trip_source", None),
    ("Budget used", "headroom_used", "0%"),
    ("Status", "status", None),
    ("Largest contributor", "largest_contributor", None),
    ("Largest (mA)", "largest_contributor_ma", "0.000"),
    ("Trip likelihood, dry", "trip_probability", "0.00%"),
    ("± (dry)", "trip_probability_se", "0.00%"),
    ("Trip likelihood, switch-on", "trip_probability_switch_on", "0.00%"),
    ("± (switch-on)", "trip_probability_switch_on_se", "0.00%"),
    ("Likelihood (text)", "trip_probability_text", None),
    ("Pulsating DC (mA)", "pulsating_dc_ma", "0.000"),
    ("Smooth DC (mA)", "smooth_dc_ma", "0.000"),
    ("No-trip judged on (mA)", "trip_equivalent_ma", "0.000"),
    ("Note", "note", None),
)

DEVICE_COLUMNS: tuple[tuple[str, str, str | None], ...] = (
    ("Device id", "id", None),
    ("Device", "device", None),
    ("RCD type", "rcd_type", None),
    ("Upstream", "upstream", None),
    ("Inside circuit", "inside_circuit", None),
    ("Board", "board", None),
    ("Circuits", "circuits_text", None),
    ("Loads", "load_count", "0"),
    ("Leakage, arithmetic (mA)", "leakage_ma", "0.000"),
    ("Leakage, phasor (mA)", "phasor_ma", "0.000"),
    ("No-trip judged on (mA)", "trip_equivalent_ma", "0.000"),
    ("Budget (mA)", "budget_ma", "0.000"),
    ("Budget source", "budget_source", None),
    ("No-trip level (mA)", "no_trip_ma", "0.000"),
    ("Budget used", "headroom_used", "0%"),
    ("Status", "status", None),
    ("Largest contributor", "largest_contributor", None),
    ("Largest (mA)", "largest_contributor_ma", "0.000"),
    ("Trip likelihood, dry", "trip_probability", "0.00%"),
    ("Trip likelihood, switch-on", "trip_probability_switch_on", "0.00%"),
    ("Circuits lost on a trip", "lost_text", None),
    ("Note", "note", None),
)

LOAD_COLUMNS: tuple[tuple[str, str, str | None], ...] = (
    ("Load", "load", None),
    ("Row", "row", "0"),
    ("Circuit", "circuit", None),
    ("Appliance", "appliance", None),
    ("Quantity", "quantity", "0"),
    ("Per unit (mA)", "per_unit_ma", "0.0000"),
    ("Leakage (mA)", "leakage_ma", "0.0000"),
    ("Phase (deg)", "phase_deg", "0.0"),
    ("Basis", "basis", None),
    ("Source", "source", None),
    ("Voltage (V)", "voltage_v", "0"),
    ("Frequency (Hz)", "frequency_hz", "0"),
    ("Leg", "leg", None),
    ("Room", "room", None),
    ("Model", "model", None),
    ("Measured on", "measured_on", None),
)

READING_COLUMNS: tuple[tuple[str, str, str | None], ...] = (
    ("Circuit", "circuit", None),
    ("Row", "row", "0"),
    ("Reading (mA)", "reading_ma", "0.000"),
    ("Conditions", "conditions", None),
    ("Date", "date", None),
    ("Estimate, phasor (mA)", "estimate_phasor_ma", "0.000"),
    ("Estimate 2.5 % (mA)", "estimate_low_ma", "0.000"),
    ("Estimate median (mA)", "estimate_median_ma", "0.000"),
    ("Estimate 97.5 % (mA)", "estimate_high_ma", "0.000"),
    ("Reading / median", "reading_to_median", "0.00"),
    ("Flag", "flag", None),
    ("What it means", "message", None),
    ("Estimate status", "estimate_status", None),
    ("Estimate trip likelihood", "estimate_trip_probability_text", None),
    ("Calibration", "calibration", None),
    ("Factor", "calibration_factor", "0.000"),
    ("Calibrated sum (mA)", "calibrated_gate_ma", "0.000"),
    ("Calibrated status", "calibrated_status", None),
    ("Calibrated trip likelihood", "calibrated_trip_probability_text", None),
    ("Note", "note", None),
)


def _sheet(
    name: str,
    columns: tuple[tuple[str, str, str | None], ...],
    rows: list[Sequence[Any]] | ColumnRows,
    footer: list[str],
    chart: ChartSpec | None = None,
) -> SheetData:
    if footer:
        rows.append([None] * len(columns))
        rows.extend([[line] + [None] * (len(columns) - 1) for line in footer])
    return SheetData(
        name=name,
        header=[h for h, _, _ in columns],
        rows=rows,
        number_formats={i: fmt for i, (_, _, fmt) in enumerate(columns) if fmt},
        column_widths={
            i: (60.0 if "source" in h.lower() or h == "Note" else max(10.0, len(h) + 2.0))
            for i, (h, _, _) in enumerate(columns)
        },
        chart=chart,
    )


def _records_rows(columns: tuple[tuple[str, str, str | None], ...], records: list[dict[str, Any]]) -> list[Any]:
    return [[rec.get(key) for _, key, _ in columns] for rec in records]


def _columns_rows(columns: tuple[tuple[str, str, str | None], ...], values: dict[str, list[Any]]) -> ColumnRows:
    """Rows from a sheet's columns of values (one list per key of ``columns``), kept as columns."""
    return ColumnRows([values[key] for _, key, _ in columns])


def _rounded(values: list[float | None], digits: int = 4) -> list[float | None]:
    """:func:`_num` of each value (None for None, NaN and ±inf, else ``round(float(value), digits)``), a column at
    a time rather than a call per value, with the same results.

    ``round(x, n)`` rounds the exact binary value of x to n decimals (ties to even) and returns the double nearest
    that decimal (CPython, ``float.__round__``). Here y = x·10ⁿ is computed in floating point (its rounding error is
    at most 2⁻⁵³·|y|, IEEE 754) and rounded to an integer k; wherever y lies farther than 2⁻⁵⁰·|y| from a half-
    integer, the exact x·10ⁿ rounds to the same k, and k / 10ⁿ, one correctly rounded division of exact numbers,
    is the double nearest k·10⁻ⁿ, i.e. ``round(x, n)``. Values nearer a tie, |y| ≥ 2⁵⁰ and anything but floats
    and None go through :func:`_num` itself (computed, IEEE 754 arithmetic; tested against ``round``).
    """
    import numpy as np

    kinds = set(map(type, values))
    if not kinds <= {float, type(None)}:
        return [_num(v, digits) for v in values]
    if type(None) in kinds:
        values = [math.nan if v is None else v for v in values]  # NaN gives None too
    scale = 10.0**digits
    out: list[float | None] = []
    for start in range(0, len(values), ROUNDING_BLOCK):  # small arrays, reused from the heap and in the cache
        block = values[start : start + ROUNDING_BLOCK]
        with np.errstate(invalid="ignore", over="ignore"):
            y = np.array(block, dtype=float) * scale
            size = np.abs(y)
            exact = (size < 2.0**50) & (np.abs(y - np.floor(y) - 0.5) > 2.0**-50 * size)
        rounded: list[float | None] = (np.rint(y) / scale).tolist()
        for i in np.flatnonzero(~exact).tolist():
            rounded[i] = _num(block[i], digits)
        out += rounded
    return out


def _phases_deg(phasors: list[complex]) -> list[float | None]:
    """:func:`phase_deg` of each phasor [mA], a column at a time: None for a zero phasor, else its angle in
    degrees to one decimal (NaN stays NaN, as ``round`` keeps it)."""
    import numpy as np

    angles = _rounded(list(map(math.degrees, map(cmath.phase, phasors))), 1)
    values = np.array(phasors, dtype=complex)
    for i in np.flatnonzero(np.isnan(values)).tolist():  # an angle is finite or NaN; _rounded made NaN None
        angles[i] = math.nan if angles[i] is None else angles[i]
    for i in np.flatnonzero(values == 0).tolist():  # abs(p) == 0 exactly when both parts are zero
        angles[i] = None
    return angles


def _circuit_values(results: Sequence[CircuitResult]) -> dict[str, list[Any]]:
    """The values :func:`circuit_dict` gives each circuit under the keys of :data:`CIRCUIT_COLUMNS`, made a column
    at a time (a sheet of many circuits is written without a record per circuit)."""
    circuits = [c.circuit for c in results]
    levels = [c.guarding_device or c.circuit.device for c in results]
    protected = [d.protected for d in levels]
    risks = [c.risk for c in results]
    digits = PROBABILITY_DIGITS
    return {
        "circuit": [x.circuit_id for x in circuits],
        "device": [x.device.key for x in circuits],
        "rcd_type": [x.rcd_type for x in circuits],
        "system": [x.system for x in circuits],
        "voltage_v": [x.voltage_v for x in circuits],
        "frequency_hz": [x.frequency_hz for x in circuits],
        "supply_source": [str(x.supply_source) for x in circuits],
        "load_count": [c.load_count for c in results],
        "cable_leakage_ma": _rounded([c.cable_ma for c in results]),
        "leakage_ma": _rounded([c.leakage_ma for c in results]),
        "phasor_ma": _rounded([c.phasor_ma for c in results]),
        "budget_ma": _rounded([c.budget_ma for c in results]),
        "budget_source": [str(c.budget_source) if p else None for c, p in zip(results, protected)],
        "no_trip_ma": _rounded([d.no_trip_ma for d in levels]),
        "no_trip_source": [str(d.no_trip_source) if p else None for d, p in zip(levels, protected)],
        "trip_ma": _rounded([d.trip_ma for d in levels]),
        "trip_source": [str(d.trip_source) if p else None for d, p in zip(levels, protected)],
        "headroom_used": _rounded([c.headroom_used for c in results]),
        "status": [c.status.value for c in results],
        "largest_contributor": [c.largest for c in results],
        "largest_contributor_ma": _rounded([c.largest_ma for c in results]),
        "trip_probability": _rounded([r.dry if r else None for r in risks], digits),
        "trip_probability_se": _rounded([r.dry_se if r else None for r in risks], digits),
        "trip_probability_switch_on": _rounded([r.switch_on if r else None for r in risks], digits),
        "trip_probability_switch_on_se": _rounded([r.switch_on_se if r else None for r in risks], digits),
        "trip_probability_text": [likelihood_text(r) for r in risks],
        "pulsating_dc_ma": _rounded([c.pulsating_dc_ma for c in results]),
        "smooth_dc_ma": _rounded([c.smooth_dc_ma for c in results]),
        "trip_equivalent_ma": _rounded([c.trip_equivalent_ma for c in results]),
        "note": [x.note for x in circuits],
    }


def _load_values(results: Sequence[LoadResult]) -> dict[str, list[Any]]:
    """The values :func:`load_dict` gives each load under the keys of :data:`LOAD_COLUMNS`, made a column at a
    time (the sheet of a big workbook's loads is written without a record per load)."""
    loads = [r.load for r in results]
    phases = _phases_deg([r.phasor_ma for r in results])
    return {
        "load": [r.name for r in results],
        "row": [x.row if x else None for x in loads],
        "circuit": [r.circuit_id for r in results],
        "appliance": [r.appliance.key if r.appliance else None for r in results],
        "quantity": [r.quantity for r in results],
        "per_unit_ma": _rounded([r.per_unit_ma for r in results]),
        "leakage_ma": _rounded([r.leakage_ma for r in results]),
        "phase_deg": phases,
        "basis": [r.basis for r in results],
        "source": [r.source for r in results],
        "voltage_v": [r.voltage_v for r in results],
        "frequency_hz": [r.frequency_hz for r in results],
        "leg": [x.leg_text if x else None for x in loads],
        "room": [x.room if x else None for x in loads],
        "model": [x.model if x else None for x in loads],
        "measured_on": [r.measured_on for r in results],
    }


def result_sheets(result: CheckResult) -> list[SheetData]:
    """The ``Circuit results`` and ``Load results`` sheets for write-back (and, when there are any, the shared
    devices' and the readings' sheets): the cells hold the values of the ``--json`` document's records."""
    project = result.project
    risk = risk_summary(result)
    footer = [
        f"Written by leakbudget {__version__}; this sheet is replaced on every run.",
        *(f"Default used: {d}" for d in project.defaults_used),
        *(f"Warning: {w}" for w in project.warnings),
        *(f"Trip likelihood: {line}" for line in (risk or {}).get("method", [])),
        f"Caution: {CAUTION}",
    ]
    headers = [h for h, _, _ in CIRCUIT_COLUMNS]
    circuits = result.circuits
    chart = (
        ChartSpec(
            title="Standing leakage against budget and no-trip level",
            category_column=0,
            value_columns=(
                headers.index("Leakage, arithmetic (mA)"),
                headers.index("Budget (mA)"),
                headers.index("No-trip level (mA)"),
            ),
            y_axis_title="mA",
            anchor=f"B{len(circuits) + len(footer) + 4}",
            data_rows=len(circuits),
            colours=(SEGMENT_COLOURS[0], BUDGET_COLOUR, NO_TRIP_COLOUR),  # the report's colours for the same things
        )
        if circuits
        else None
    )
    sheets = [
        _sheet(
            CIRCUIT_RESULTS, CIRCUIT_COLUMNS, _columns_rows(CIRCUIT_COLUMNS, _circuit_values(circuits)), footer, chart
        ),
        _sheet(LOAD_RESULTS, LOAD_COLUMNS, _columns_rows(LOAD_COLUMNS, _load_values(result.loads)), footer[:1]),
    ]
    if result.devices:
        records = [
            {**d, "circuits_text": ", ".join(d["circuits"]), "lost_text": ", ".join(d["circuits_lost_on_trip"])}
            for d in map(device_dict, result.devices)
        ]
        sheets.append(_sheet(DEVICE_RESULTS, DEVICE_COLUMNS, _records_rows(DEVICE_COLUMNS, records), footer[:1]))
    if result.readings:
        sheets.append(
            _sheet(
                READING_RESULTS,
                READING_COLUMNS,
                _records_rows(READING_COLUMNS, readings_list(result)),
                [footer[0], f"Thresholds: {THRESHOLDS}"],
            )
        )
    return sheets
