"""The split planner under a cap on the nuisance-trip likelihood: plan, check, tighten, plan again.

The cap (``--max-trip-likelihood``, else the ``Max trip likelihood`` setting) bounds each protected circuit's
switch-on likelihood, the larger of the two scenarios (heating elements' draws are multiplied by the switch-on
factor ≥ 1, the rest are the same draws), so the dry likelihood is within it too. Method:

1. Plan as without a cap (:func:`leakbudget.planner.plan.plan_once`). The plan's check
   (:func:`leakbudget.estimate.check`, which runs :func:`leakbudget.risk.assess` with the workbook's Monte Carlo
   settings: samples and seed) gives every circuit's likelihood.
2. For every protected circuit above the cap, lower its leakage budget to ``TIGHTEN`` × its planned arithmetic
   sum (a new circuit: the budget of every new circuit of its room's kind), never below what must stay on it,
   and plan again from the original project.
3. Stop when every circuit is within the cap, or when no tightening helps: the circuit carries only loads that
   must stay, the tighter plan leaves loads with nowhere to go, or ``MAX_PLANS`` plans were made. Then the
   last plan within every budget is returned with the circuits above the cap named as blockers (not feasible,
   exit code 1): a plan that breaks the cap is never reported as one that meets it.

The likelihoods tested are exactly the plan's check results (the same estimator, samples and seed ``check``
uses). The optimality the plan reports (fewest new circuits, then moves) holds for the tightened budgets, not
for the likelihood cap itself: a plan with fewer changes might meet the cap with other budgets.
"""

from __future__ import annotations

from leakbudget.estimate import CircuitResult
from leakbudget.model import Project
from leakbudget.planner.board import device_limit_key
from leakbudget.planner.build import Blocker, cable_ma, circuit_limit_key, kind_limit_key
from leakbudget.planner.packing.problem import MARGIN_MA
from leakbudget.planner.plan import SplitOptions, SplitPlan, plan_once
from leakbudget.progress import Progress
from leakbudget.protection import DeviceResult
from leakbudget.risk import likelihood_text
from leakbudget.settings import Settings

TIGHTEN = 0.9  # each pass lowers an over-cap circuit's budget to 90 % of its planned sum (a step size, a choice)
MAX_PLANS = 20  # plans made at most under a cap
LimitKey = tuple[str, str | None]


def likelihood_cap(settings: Settings, options: SplitOptions) -> tuple[float, str]:
    """The cap and its source: the option, else the setting (the caller knows one is given)."""
    if options.max_trip_likelihood is not None:
        return options.max_trip_likelihood, "--max-trip-likelihood"
    return float(settings["Max trip likelihood"]), str(settings.sources["Max trip likelihood"])


def over_cap(plan: SplitPlan, cap: float) -> list[CircuitResult]:
    """Protected circuits with a device of their own whose switch-on likelihood after the plan is above ``cap``
    (a circuit under a shared device only has that device's likelihood: :func:`devices_over_cap`)."""
    return [
        c for c in plan.after.circuits if c.risk is not None and c.circuit.device.protected and c.risk.switch_on > cap
    ]


def devices_over_cap(plan: SplitPlan, cap: float) -> list[DeviceResult]:
    """Shared devices of a board whose switch-on likelihood after the plan is above ``cap``."""
    return [
        d for d in plan.after.devices if d.shared.circuit_id is None and d.risk is not None and d.risk.switch_on > cap
    ]


def plan_within_cap(project: Project, options: SplitOptions, progress: Progress | None = None) -> SplitPlan:
    """Plan so that every protected circuit's switch-on likelihood is within the cap (module docstring).

    A circuit that cannot be tightened (only loads that must stay on it) is set aside with its reason, and the
    others go on being tightened.
    """
    cap, source = likelihood_cap(project.settings, options)
    limits: dict[LimitKey, float] = {}
    plan = plan_once(project, options, progress)
    plans = 1
    why: dict[str, str] = {}
    while True:
        over = [c for c in over_cap(plan, cap) if c.circuit.circuit_id not in why]
        devices = [d for d in devices_over_cap(plan, cap) if d.device_id not in why]
        if not over and not devices:
            break
        tighter, stuck = _tighten(plan, over, limits)
        for d in devices:  # a shared device: a lower budget for the board plan
            key = device_limit_key(d.device_id)
            tighter[key] = min(tighter.get(key, TIGHTEN * d.leakage_ma), TIGHTEN * d.leakage_ma)
        why.update(stuck)
        names = [c.circuit.circuit_id for c in over] + [d.device_id for d in devices]
        if tighter == limits:
            break
        if plans >= MAX_PLANS:
            why.update(
                {
                    n: f"{MAX_PLANS} plans with ever tighter budgets did not bring it under"
                    for n in names
                    if n not in why
                }
            )
            break
        candidate = plan_once(project, options, progress, tighter)
        plans += 1
        if len(candidate.blockers) > len(plan.blockers):
            why.update(
                {
                    n: "a tighter budget leaves loads or circuits with nowhere that may take them"
                    for n in names
                    if n not in why
                }
            )
            break
        plan, limits = candidate, tighter
    plan.likelihood_cap, plan.likelihood_cap_source, plan.likelihood_iterations = cap, source, plans
    plan.tightened_budget_ma = _tightened(plan, limits)
    plan.blockers.extend(
        _blocker(plan, c, cap, source, why.get(c.circuit.circuit_id, "its budget could not be tightened further"))
        for c in over_cap(plan, cap)
    )
    plan.blockers.extend(
        Blocker(
            None,
            (),
            f"{d.device_id}: its switch-on trip likelihood {likelihood_text(d.risk, switch_on=True)} is above the cap "
            f"of {100 * cap:g} % ({source}) and "
            f"{why.get(d.device_id, 'no board plan with a tighter budget brings it under')}; measure its circuits "
            "(the estimate may be pessimistic) or move a circuit to another device or an RCBO of its own",
        )
        for d in devices_over_cap(plan, cap)
    )
    return plan


def _sums(plan: SplitPlan, circuit_id: str) -> tuple[float, float]:
    """Planned arithmetic sum on a circuit (cable included) and the part that may move [mA]."""
    stuck = {name for b in plan.blockers for name in b.loads}
    on = [a for a in plan.assignments if a.to_id == circuit_id]
    total = sum(a.leakage_ma for a in on)
    movable = sum(a.leakage_ma for a in on if not a.load.stays and a.load.name not in stuck)
    circuit = next(c.circuit for c in plan.after.circuits if c.circuit.circuit_id == circuit_id)
    return cable_ma(circuit, plan.after.project) + total, movable


def _tighten(
    plan: SplitPlan, over: list[CircuitResult], limits: dict[LimitKey, float]
) -> tuple[dict[LimitKey, float], dict[str, str]]:
    """Lower budgets for the circuits above the cap that can go lower, and why the others cannot (by id)."""
    new = {n.circuit.circuit_id: n for n in plan.new_circuits}
    blocked = {b.circuit_id for b in plan.blockers}
    tighter = dict(limits)
    why: dict[str, str] = {}
    for c in over:
        cid = c.circuit.circuit_id
        total, movable = _sums(plan, cid)
        target = max(TIGHTEN * total, total - movable + 2 * MARGIN_MA)
        if cid in blocked or target >= total:
            why[cid] = "only loads that must stay are on it (marked Stays, or left as they are)"
            continue
        kind_key = new[cid].kind_key if cid in new else None
        key = kind_limit_key(kind_key) if kind_key is not None else circuit_limit_key(cid)
        tighter[key] = min(tighter.get(key, target), target)
    return tighter, why


def _tightened(plan: SplitPlan, limits: dict[LimitKey, float]) -> dict[str, float]:
    """The lowered budget of every circuit and shared device of the plan that one applies to [mA], by id."""
    out = {}
    for c in plan.after.circuits:
        cid = c.circuit.circuit_id
        key = next(
            (kind_limit_key(n.kind_key) for n in plan.new_circuits if n.circuit.circuit_id == cid and n.kind_key),
            circuit_limit_key(cid),
        )
        if key in limits and c.budget_ma is not None and limits[key] < c.budget_ma:
            out[cid] = limits[key]
    for d in plan.after.devices:
        key = device_limit_key(d.device_id)
        if key in limits and limits[key] < d.budget_ma:
            out[d.device_id] = limits[key]
    return out


def _blocker(plan: SplitPlan, c: CircuitResult, cap: float, source: str, reason: str) -> Blocker:
    cid = c.circuit.circuit_id
    loads = tuple(a.load.name for a in plan.assignments if a.to_id == cid)
    return Blocker(
        cid,
        loads,
        f"{cid}: its switch-on trip likelihood {likelihood_text(c.risk, switch_on=True)} is "
        f"above the cap of {100 * cap:g} % ({source}) and {reason}; measure its loads (the "
        f"estimate may be pessimistic) or give it a dedicated circuit",
    )
