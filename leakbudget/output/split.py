"""Split plans as plain data: the JSON document of ``leakbudget split --json`` and the ``Split plan`` sheet.

Circuits are described as the check describes them (:func:`leakbudget.output.check.circuit_dict`, after the plan),
with the figures before the plan beside them.
"""

from __future__ import annotations

import math
from collections import Counter
from typing import Any

from leakbudget.about import CAUTION, __version__
from leakbudget.checking import CheckResult
from leakbudget.input.schema import SPLIT_PLAN
from leakbudget.output.check import _num, circuit_dict, device_dict
from leakbudget.planner.plan import SplitPlan
from leakbudget.workbook.apply import PlannedCopy, WrittenCell
from leakbudget.xlsx.package import SheetData, WriteResult


def change(a: Any) -> str:
    """What happens to one load: moved, placed, stays, or left unplaced."""
    if a.moved:
        return "moved"
    if a.placed:
        return "placed"
    return "left unplaced" if a.to_id is None else "stays"


def assignment_dict(a: Any) -> dict[str, Any]:
    load = a.load
    return {
        "load": load.name,
        "row": load.row,
        "room": load.room,
        "stays": load.stays,
        "group": load.group,
        "from": a.from_id,
        "to": a.to_id,
        "moved": a.moved,
        "placed": a.placed,
        "change": change(a),
        "leakage_ma": _num(a.leakage_ma),
        "current_a": _num(a.current_a),
        "current_source": a.current_source,
    }


def _capacity(value: float | None) -> float | None:
    return None if value is None or math.isinf(value) else _num(value)


def circuits_list(plan: SplitPlan) -> list[dict[str, Any]]:
    """Every circuit after the plan (as the check reports it), with its figures before the plan."""
    before = {c.circuit.circuit_id: c for c in plan.before.circuits}
    new = {n.circuit.circuit_id: n for n in plan.new_circuits}
    out = []
    for c in plan.after.circuits:
        cid = c.circuit.circuit_id
        d = circuit_dict(c)
        b = before.get(cid)
        d.update(
            {
                "new": cid in new,
                "purpose": c.circuit.purpose,
                "template": new[cid].template if cid in new else None,
                "before_load_count": b.load_count if b else None,
                "before_leakage_ma": _num(b.leakage_ma) if b else None,
                "before_gate_ma": _num(b.gate_ma) if b else None,
                "before_headroom_used": _num(b.headroom_used) if b else None,
                "before_status": b.status.value if b else None,
                "current_a": _num(plan.current_after_a.get(cid)),
                "before_current_a": _num(plan.current_before_a.get(cid)) if b else None,
                "current_limit_a": _capacity(plan.capacity_a.get(cid)),
                "current_warnings": plan.current_warnings.get(cid, []),
                "tightened_budget_ma": _num(plan.tightened_budget_ma.get(cid)),
                "within_likelihood_cap": (
                    None if plan.likelihood_cap is None or c.risk is None else c.risk.switch_on <= plan.likelihood_cap
                ),
            }
        )
        out.append(d)
    return out


def current_limit_words(plan: SplitPlan, purpose: str | None) -> str:
    """What a circuit's current limit is, in a few words: "rating, diversity 40 %" or "0.8 × rating"."""
    rule = plan.current_rule
    if rule.all_on and purpose != "dedicated":
        return f"{rule.load_factor:g} × rating, every load on"
    if rule.all_on:
        return "rating, dedicated"
    return f"rating, the largest load and {rule.diversity:.0%} of the others"


def summary(plan: SplitPlan) -> str:
    """One sentence on what the plan does and how good it is proven to be."""
    what = f"{plan.new_count} new circuit(s), {plan.moves} load(s) moved, {plan.placed} placed"
    if plan.board is not None:
        what += (
            f", {plan.board.circuit_moves - plan.board.new_devices} circuit(s) moved to another device and "
            f"{plan.board.new_devices} given a device of their own (the board plan"
            + (", proven optimal)" if plan.board.optimal else ")")
        )
    if plan.optimal:
        proof = (
            f"proven optimal: no plan needs fewer new circuits (lower bound {plan.lower_bound_new_circuits}) "
            f"or, with as many, fewer moves"
        )
        proof += "; headroom on the tightest circuit proven best too" if plan.headroom_optimal else ""
    else:
        proof = (
            f"not proven optimal within the time limit: at least {plan.lower_bound_new_circuits} new "
            f"circuit(s) are needed (gap {plan.gap}), at least {plan.moves_lower_bound} move(s)"
        )
    if plan.tightened_budget_ma:
        proof += " (for the budgets the trip-likelihood cap tightened, not for the cap itself)"
    return f"{what}; {proof}."


def likelihood_line(plan: SplitPlan) -> str:
    """One sentence on the trip-likelihood cap: its value and source, the plans made, the budgets it lowered."""
    assert plan.likelihood_cap is not None
    tightened = ", ".join(f"{cid} {ma:.3f} mA" for cid, ma in plan.tightened_budget_ma.items())
    met = sum(1 for c in plan.after.circuits if c.risk is not None and c.risk.switch_on <= plan.likelihood_cap)
    total = sum(1 for c in plan.after.circuits if c.risk is not None)
    return (
        f"switch-on likelihood capped at {100 * plan.likelihood_cap:g} % ({plan.likelihood_cap_source}); "
        f"{met} of {total} protected circuit(s) within it after {plan.likelihood_iterations} plan(s) "
        f"(the check's Monte Carlo, seed {plan.after.risk.seed if plan.after.risk else '-'}); "
        + (f"budgets tightened: {tightened}." if tightened else "no budget needed tightening.")
    )


def to_json(plan: SplitPlan) -> dict[str, Any]:
    """The document ``leakbudget split --json`` prints."""
    project = plan.before.project
    return {
        "tool": f"leakbudget {__version__}",
        "file": str(project.path),
        "feasible": plan.feasible,
        "new_circuits": plan.new_count,
        "moves": plan.moves,
        "placed": plan.placed,
        "optimal": plan.optimal,
        "headroom_optimal": plan.headroom_optimal,
        "lower_bound_new_circuits": plan.lower_bound_new_circuits,
        "gap_new_circuits": plan.gap,
        "moves_lower_bound": plan.moves_lower_bound,
        "summary": summary(plan),
        "sum_rule": project.settings.sum_rule,
        "planned_on": "arithmetic sum",
        "load_factor": plan.load_factor,
        "load_factor_source": str(project.settings.sources["Load factor"]),
        "current_rule": plan.current_rule.rule,
        "current_rule_text": plan.current_rule.describe(),
        "diversity": plan.current_rule.diversity,
        "current_warnings": [
            {"circuit": cid, "message": text} for cid, texts in plan.current_warnings.items() for text in texts
        ],
        "likelihood_cap": plan.likelihood_cap,
        "likelihood_cap_source": plan.likelihood_cap_source,
        "likelihood_capped_scenario": "switch-on" if plan.likelihood_cap is not None else None,
        "likelihood_iterations": plan.likelihood_iterations,
        "optimal_for": "tightened budgets" if plan.tightened_budget_ma else "budgets",
        "room_groups": plan.groups,
        "exact_groups": plan.exact_groups,
        "time_s": round(plan.elapsed_s, 3),
        "blocked": [{"circuit": b.circuit_id, "loads": list(b.loads), "message": b.message} for b in plan.blockers],
        "new_circuit_details": [
            {
                "circuit": n.circuit.circuit_id,
                "template": n.template,
                "device": n.circuit.device.key,
                "rating_a": n.circuit.rating_a,
                "voltage_v": n.circuit.voltage_v,
                "system": n.circuit.system,
                "purpose": n.circuit.purpose,
                "rooms": list(n.circuit.rooms),
            }
            for n in plan.new_circuits
        ],
        "assignments": [assignment_dict(a) for a in plan.assignments],
        "circuit_moves": plan.board.circuit_moves if plan.board is not None else 0,
        "circuit_assignments": [
            {"circuit": m.circuit, "from": m.from_id, "to": m.to_id, "own_device": m.own_device, "moved": m.moved}
            for m in (plan.board.moves if plan.board is not None else [])
        ],
        "devices": [device_dict(d) for d in plan.after.devices],
        "circuits": circuits_list(plan),
        "notes": plan.notes,
        "warnings": project.warnings,
        "caution": CAUTION,
    }


# One table for the loads, then one for the circuits in the same columns: column 7 is always mA, 8 always A.
LOAD_HEADER = ("Load", "Row", "Room", "Stays", "From", "To", "Change", "Leakage (mA)", "Current (A)", "Current source")
CIRCUIT_HEADER = (
    "Circuit",
    "Device",
    "Rooms",
    "New",
    "Loads before → after",
    "Status before → after",
    "Budget used before → after",
    "Leakage after (mA)",
    "Current after (A)",
    "Limits",
)


def _arrow(before: Any, after: Any) -> str:
    return f"{'-' if before is None else before} → {'-' if after is None else after}"


def _percent(value: float | None) -> str | None:
    return None if value is None else f"{100 * value:.0f}%"


def split_sheet(plan: SplitPlan, applied_from: str | None = None) -> SheetData:
    """The ``Split plan`` sheet: every load's assignment, then every circuit before → after, then the summary.

    ``applied_from`` names the source workbook when the sheet goes into the planned copy (``split --apply``)."""
    doc = to_json(plan)
    rows: list[list[Any]] = []
    for a in doc["assignments"]:
        rows.append(
            [
                a["load"],
                a["row"],
                a["room"],
                "yes" if a["stays"] else None,
                a["from"],
                a["to"],
                a["change"],
                a["leakage_ma"],
                a["current_a"],
                a["current_source"],
            ]
        )
    rows.append([None] * len(LOAD_HEADER))
    rows.append(list(CIRCUIT_HEADER))
    for c in doc["circuits"]:
        limits = f"budget {c['budget_ma']:.3f} mA" if c["budget_ma"] is not None else "unprotected"
        if c["current_limit_a"] is not None:
            limits += f"; {c['current_limit_a']:.1f} A ({current_limit_words(plan, c['purpose'])})"
        if c["template"]:
            limits += f"; new, {c['template']}"
        rows.append(
            [
                c["circuit"],
                c["device"],
                ", ".join(c["rooms"]),
                "new" if c["new"] else None,
                _arrow(c["before_load_count"], c["load_count"]),
                _arrow(c["before_status"], c["status"]),
                _arrow(_percent(c["before_headroom_used"]), _percent(c["headroom_used"])),
                c["leakage_ma"],
                c["current_a"],
                limits,
            ]
        )
    if doc["circuit_assignments"]:
        width = len(LOAD_HEADER)
        rows.append([None] * width)
        rows.append(["Circuit", None, None, None, "From device", "To device", "Change", None, None, "Device after"])
        after = {d["id"]: d for d in doc["devices"]}
        for m in doc["circuit_assignments"]:
            to = m["to"] if m["own_device"] is None else f"an RCBO of its own ({m['own_device']})"
            d = after.get(m["to"] or "")
            state = f"{d['id']}: {d['leakage_ma']:.3f} mA of {d['budget_ma']:.3f} mA, {d['status']}" if d else None
            rows.append(
                [m["circuit"], None, None, None, m["from"], to, "moved" if m["moved"] else "stays", None, None, state]
            )
    footer = [
        f"Written by leakbudget {__version__}; this sheet is replaced on every run of `leakbudget split`.",
        f"Plan: {doc['summary']}",
        *([f"Trip likelihood: {likelihood_line(plan)}"] if plan.likelihood_cap is not None else []),
        (
            f"This is the planned copy of {applied_from} (leakbudget split --apply): its Loads and Circuits sheets "
            f"hold the plan, new circuits are marked proposed in their Note; {applied_from} was not changed."
            if applied_from is not None
            else "Nothing else in the workbook was changed: move the loads in the Loads sheet yourself, then check "
            "again."
        ),
        *(f"No plan can meet every limit: {b['message']}." for b in doc["blocked"]),
        f"Current: {doc['current_rule_text']}",
        *(f"Current warning: {w['message']}." for w in doc["current_warnings"]),
        *(f"Note: {n}" for n in doc["notes"]),
        *(f"Warning: {w}" for w in doc["warnings"]),
        f"Caution: {CAUTION}",
    ]
    rows.append([None] * len(LOAD_HEADER))
    rows.extend([[line] + [None] * (len(LOAD_HEADER) - 1) for line in footer])
    return SheetData(
        name=SPLIT_PLAN,
        header=list(LOAD_HEADER),
        rows=rows,
        number_formats={1: "0", 7: "0.000", 8: "0.00"},
        column_widths={0: 24.0, 1: 8.0, 2: 16.0, 3: 8.0, 4: 14.0, 5: 14.0, 6: 24.0, 7: 14.0, 8: 14.0, 9: 60.0},
    )


def _cell_dict(cell: WrittenCell) -> dict[str, Any]:
    return {"sheet": cell.sheet, "row": cell.row, "column": cell.column, "cell": cell.cell, "value": cell.value}


def applied_dict(
    plan: SplitPlan, copy: PlannedCopy, result: CheckResult, written: WriteResult | None
) -> dict[str, Any]:
    """The ``applied`` object of ``leakbudget split --apply --json``: the copy, what was written into it, and the
    check of it."""
    new = {n.circuit.circuit_id: n for n in plan.new_circuits}
    fine = ("ok", "unprotected")
    return {
        "path": str(copy.path),
        "source": str(plan.before.project.path),
        "source_changed": False,
        "plan_feasible": plan.feasible,
        "moved_rows": [
            {
                "sheet": copy.loads_sheet,
                "row": a.load.row,
                "cell": copy.load_cells[a.load.row].cell,
                "load": a.load.name,
                "from": a.from_id,
                "to": a.to_id,
                "change": change(a),
            }
            for a in plan.assignments
            if a.load.row in copy.load_cells
        ],
        "new_circuits": [
            {
                "circuit": cid,
                "sheet": copy.circuits_sheet,
                "row": row,
                "template": new[cid].template if cid in new else None,
            }
            for cid, row in copy.new_circuit_rows.items()
        ],
        "circuit_cells": [
            {"circuit": cid, **_cell_dict(c)} for cid, cells in copy.updated_cells.items() for c in cells
        ],
        "added_columns": [_cell_dict(c) for c in copy.added_columns],
        "sheets_written": list(written.replaced + written.added) if written is not None else [],
        "check": {
            "all_ok": result.all_ok,
            "status_counts": dict(sorted(Counter(c.status.value for c in result.circuits).items())),
            "not_ok": [
                {"circuit": c.circuit.circuit_id, "status": c.status.value}
                for c in result.circuits
                if c.status.value not in fine
            ],
            "devices_not_ok": [
                {"device": d.device_id, "status": d.status.value} for d in result.devices if d.status.value not in fine
            ],
        },
    }
