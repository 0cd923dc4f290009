"""Check results as plain data: JSON documents and the rows of the result sheets.

One place decides what a circuit or load result is called at the edges (unit-suffixed keys, column headers
with units), so the JSON, the workbook sheets and the report agree.
"""

from __future__ import annotations

import cmath
import math
from typing import Any

from leakbudget import CAUTION, __version__
from leakbudget.estimate import CheckResult, CircuitResult, LoadResult
from leakbudget.xlsx_package import ChartSpec, SheetData
from leakbudget.schema import CIRCUIT_RESULTS, LOAD_RESULTS


def _num(value: float | None, digits: int = 4) -> float | None:
    if value is None or (isinstance(value, float) and (math.isnan(value) or math.isinf(value))):
        return None
    return round(float(value), digits)


def phase_deg(r: LoadResult) -> float | None:
    if abs(r.phasor_ma) == 0:
        return None
    return round(math.degrees(cmath.phase(r.phasor_ma)), 1)


def circuit_dict(c: CircuitResult) -> dict[str, Any]:
    circuit = c.circuit
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
        "budget_source": str(c.budget_source) if dev.protected else None,
        "no_trip_ma": _num(dev.no_trip_ma),
        "no_trip_source": str(dev.no_trip_source) if dev.protected else None,
        "trip_ma": _num(dev.trip_ma),
        "trip_source": str(dev.trip_source) if dev.protected else None,
        "headroom_used": _num(c.headroom_used),
        "status": c.status.value,
        "largest_contributor": c.largest,
        "largest_contributor_ma": _num(c.largest_ma),
        "note": circuit.note,
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
        "fixed": load.fixed if load else None,
        "row": load.row if load else None,
    }


def settings_dict(result: CheckResult) -> dict[str, Any]:
    s = result.project.settings
    return {name: {"value": s.values[name], "source": str(s.sources[name])} for name in s.values}


def to_json(result: CheckResult) -> dict[str, Any]:
    """The document ``leakbudget check --json`` prints."""
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
        "circuits": [circuit_dict(c) for c in result.circuits],
        "loads": [load_dict(r) for r in result.loads],
    }


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
)


def _sheet(name: str, columns: tuple[tuple[str, str, str | None], ...], records: list[dict[str, Any]],
           footer: list[str], chart: ChartSpec | None = None) -> SheetData:
    rows: list[list[Any]] = [[rec.get(key) for _, key, _ in columns] for rec in records]
    if footer:
        rows.append([None] * len(columns))
        rows.extend([[line] + [None] * (len(columns) - 1) for line in footer])
    return SheetData(
        name=name,
        header=[h for h, _, _ in columns],
        rows=rows,
        number_formats={i: fmt for i, (_, _, fmt) in enumerate(columns) if fmt},
        column_widths={i: (60.0 if "source" in h.lower() or h == "Note" else max(10.0, len(h) + 2.0))
                       for i, (h, _, _) in enumerate(columns)},
        chart=chart,
    )


def result_sheets(result: CheckResult) -> list[SheetData]:
    """The ``Circuit results`` and ``Load results`` sheets for write-back."""
    doc = to_json(result)
    footer = [f"Written by leakbudget {__version__}; this sheet is replaced on every run.",
              *(f"Default used: {d}" for d in doc["defaults_used"]),
              *(f"Warning: {w}" for w in doc["warnings"]),
              f"Caution: {CAUTION}"]
    headers = [h for h, _, _ in CIRCUIT_COLUMNS]
    chart = ChartSpec(
        title="Standing leakage against budget and no-trip level",
        category_column=0,
        value_columns=(headers.index("Leakage, arithmetic (mA)"), headers.index("Budget (mA)"),
                       headers.index("No-trip level (mA)")),
        y_axis_title="mA",
        anchor=f"B{len(doc['circuits']) + len(footer) + 4}",
        data_rows=len(doc["circuits"]),
    ) if doc["circuits"] else None
    return [
        _sheet(CIRCUIT_RESULTS, CIRCUIT_COLUMNS, doc["circuits"], footer, chart),
        _sheet(LOAD_RESULTS, LOAD_COLUMNS, doc["loads"], footer[:1]),
    ]
