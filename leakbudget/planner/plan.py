"""One plan: the packing problem built, solved by room group, applied to a copy of the project and verified.

The method is described in :mod:`leakbudget.planner`.
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass, field

import numpy as np

from leakbudget.checking import CheckResult, check
from leakbudget.devices import DEVICES
from leakbudget.devices import device as find_device
from leakbudget.errors import LeakbudgetError
from leakbudget.model import Circuit, Load, Project
from leakbudget.planner.board import BoardPlan, apply_board, plan_board
from leakbudget.planner.build import Blocker, Figures, RoomGroup, build
from leakbudget.planner.current import CurrentRule
from leakbudget.planner.packing.bounds import packing_bound
from leakbudget.planner.packing.heuristic import Unplaceable, improve
from leakbudget.planner.packing.problem import Packing
from leakbudget.planner.rules import load_current_a, load_kind, verify_plan
from leakbudget.progress import Progress

NEW_PREFIX = "NEW-"
DEFAULT_TIME_LIMIT_S = 20.0
EXACT_MAX_ITEMS = 250  # room groups up to this many movable loads are solved exactly (a house or a floor)
LP_BOUND_MAX_PAIRS = 200_000  # the LP bound only below this many (load, circuit) pairs
MIN_EXACT_S = 0.05  # below this share of the time limit a group keeps its heuristic plan [s]
EXACT_ROUNDS = 3  # rounds of exact solving; a group that ran out of time is tried again with what is left

STAGE_FIRST = "Planning room groups"
STAGE_EXACT = "Proving the best plan"
STAGE_HEADROOM = "Widening headroom"
STAGE_CHECK = "Checking the plan"


class PlannerError(LeakbudgetError):
    """A split option the user gave cannot be used (unknown device key, bad rating or time limit)."""


@dataclass(frozen=True, slots=True)
class SplitOptions:
    time_limit_s: float = DEFAULT_TIME_LIMIT_S  # for the whole plan [s]
    new_device: str | None = None  # device key for new circuits (default: copy the room's circuits)
    new_rating_a: float | None = None  # rating of new circuits [A] (default: copy the room's circuits)
    exact_max_items: int = EXACT_MAX_ITEMS
    max_trip_likelihood: float | None = None  # cap on switch-on likelihood (default: the setting) [fraction]
    keep: tuple[str, ...] = ()  # names of loads that stay where they are (--keep), as typed
    avoid: tuple[str, ...] = ()  # ids of circuits that take no new load (--avoid), as typed


@dataclass(slots=True)
class Assignment:
    load: Load
    from_id: str | None
    to_id: str | None
    leakage_ma: float  # on the circuit it ends on [mA]; NaN when it stays unplaced
    current_a: float  # on the circuit it ends on [A]; NaN when it stays unplaced
    current_source: str

    @property
    def moved(self) -> bool:
        return self.from_id is not None and self.to_id != self.from_id

    @property
    def placed(self) -> bool:
        return self.from_id is None and self.to_id is not None


@dataclass(slots=True)
class NewCircuit:
    circuit: Circuit
    template: str  # in words: what it copies
    kind_key: tuple[str | None, str] | None = None  # (room key, purpose) of the new-circuit kind it is


@dataclass
class SplitPlan:
    before: CheckResult
    after: CheckResult  # the check of the planned project (new circuits included)
    assignments: list[Assignment]  # every load, in sheet order
    new_circuits: list[NewCircuit]
    blockers: list[Blocker]
    lower_bound_new_circuits: int
    moves_lower_bound: int  # on moved loads (placements not counted)
    optimal: bool  # new circuits, then moves, proven optimal in every room group
    headroom_optimal: bool  # the tightest circuit's headroom proven best too
    groups: int
    exact_groups: int
    elapsed_s: float
    load_factor: float
    current_before_a: dict[str, float] = field(default_factory=dict)  # Σ load current per circuit id [A]
    current_after_a: dict[str, float] = field(default_factory=dict)
    capacity_a: dict[str, float] = field(default_factory=dict)  # the current rule's limit per circuit id [A]
    current_rule: CurrentRule = field(default_factory=CurrentRule)
    current_warnings: dict[str, list[str]] = field(default_factory=dict)  # limits broken after the plan, per circuit
    notes: list[str] = field(default_factory=list)
    likelihood_cap: float | None = None  # cap on each protected circuit's switch-on trip likelihood [fraction]
    likelihood_cap_source: str | None = None
    likelihood_iterations: int = 0  # plans made under the cap (1: the first plan met it)
    tightened_budget_ma: dict[str, float] = field(default_factory=dict)  # budgets the cap lowered, per circuit id
    board: BoardPlan | None = None  # circuits moved between shared devices (Protection sheet), when needed

    @property
    def feasible(self) -> bool:
        return not self.blockers

    @property
    def new_count(self) -> int:
        return len(self.new_circuits)

    @property
    def moves(self) -> int:
        return sum(a.moved for a in self.assignments)

    @property
    def placed(self) -> int:
        return sum(a.placed for a in self.assignments)

    @property
    def gap(self) -> int:
        return self.new_count - self.lower_bound_new_circuits


def check_options(options: SplitOptions) -> None:
    if options.new_device is not None:
        key = options.new_device.strip().lower()
        if key not in DEVICES or not find_device(key).protected:
            raise PlannerError(
                f"--new-device '{options.new_device}' is not a protective device key; use one of "
                f"{', '.join(k for k in DEVICES if k != 'none')} (see `leakbudget devices`)."
            )
    if options.new_rating_a is not None and not options.new_rating_a > 0:
        raise PlannerError(f"--new-rating {options.new_rating_a:g} A must be greater than zero.")
    if not options.time_limit_s > 0:
        raise PlannerError(f"--time-limit {options.time_limit_s:g} s must be greater than zero.")
    cap = options.max_trip_likelihood
    if cap is not None and not 0 < cap <= 1:
        raise PlannerError(f"--max-trip-likelihood {cap:g} must be a fraction between 0 and 1 (type 0.01 or 1 %).")


def plan_once(
    project: Project,
    options: SplitOptions,
    progress: Progress | None = None,
    limits_ma: dict[tuple[str, str | None], float] | None = None,
) -> SplitPlan:
    """One plan on the budget rule's budgets, lowered where ``limits_ma`` says (see
    :func:`leakbudget.planner.build.build`); the trip-likelihood cap is not looked at."""
    started = time.monotonic()
    before = check(project)
    # keep time for the check of the planned project and its verification at the end (about two checks)
    deadline = started + options.time_limit_s - 2 * (time.monotonic() - started)
    setup = build(
        project,
        before.loads,
        options.new_device.strip().lower() if options.new_device else None,
        options.new_rating_a,
        limits_ma,
        keep=frozenset(k.strip().lower() for k in options.keep),
        avoid=frozenset(a.strip().lower() for a in options.avoid),
    )
    loads, circuits = project.loads, project.circuits
    groups = setup.groups
    _solve_groups(groups, deadline, options, progress)
    blockers = list(setup.blockers)
    left_alone = set(setup.left_alone)
    blocked_ids = {circuits[j].circuit_id for j in setup.frozen}
    for g in groups:
        if g.solution is None:
            names = [f"'{loads[i].name}'" for m in g.members for i in m]
            shown = ", ".join(names[:6]) + (f" and {len(names) - 6} more" if len(names) > 6 else "")
            where = ", ".join(circuits[j].circuit_id for j in g.bins) or "any circuit"
            blockers.append(
                Blocker(
                    None,
                    tuple(loads[i].name for m in g.members for i in m),
                    f"the loads {shown} cannot all be placed on {where}, and no new circuit that "
                    f"may take them can take the rest",
                )
            )
            left_alone |= {loads[i].row for m in g.members for i in m}
            blocked_ids |= {circuits[j].circuit_id for j in g.bins}
    if progress is not None:
        progress(STAGE_CHECK, 0, 1)
    planned, new_circuits = _apply(project, groups, loads, circuits)
    after = check(planned)
    problems = verify_plan(project, after, blocked_ids, left_alone, frozenset(a.strip().lower() for a in options.avoid))
    if problems:
        raise RuntimeError("the split planner produced a plan that breaks a limit (a bug): " + "; ".join(problems))
    board = plan_board(planned, after, limits_ma) if planned.protection else None
    if board is not None:
        planned = apply_board(planned, board)
        after = check(planned)
        blockers += [Blocker(None, (), text) for text in board.problems]
    for d in after.devices:
        if d.shared.circuit_id is None and d.gate_ma > d.budget_ma and (board is None or board.feasible):
            blockers.append(
                Blocker(
                    None,
                    (),
                    f"{d.device_id} carries {d.gate_ma:.3f} mA, above its budget of "
                    f"{d.budget_ma:.3f} mA, and the board plan cannot move it below",
                )
            )
    if progress is not None:
        progress(STAGE_CHECK, 1, 1)
    assignments = _assignments(project, planned, setup.figures)
    factor = float(project.settings["Load factor"])
    rule = CurrentRule.from_settings(project.settings)
    current_after = _currents(planned, setup.figures, rule)
    current_warnings = _current_warnings(planned, setup.figures, rule)
    if rule.strict:  # a current limit the plan leaves broken fails it (once per circuit, beside any blocker it has)
        named = {b.circuit_id for b in blockers}
        blockers += [
            Blocker(cid, (), f"{'; '.join(texts)} (Current rule strict)")
            for cid, texts in current_warnings.items()
            if cid not in named
        ]
    unplaced_movable = sum(int((g.packing.start < 0).sum()) for g in groups if g.solution is not None)
    return SplitPlan(
        before=before,
        after=after,
        assignments=assignments,
        new_circuits=new_circuits,
        blockers=blockers,
        lower_bound_new_circuits=sum(g.bound for g in groups if g.solution is not None),
        moves_lower_bound=sum(g.moves_bound for g in groups if g.solution is not None) - unplaced_movable,
        optimal=all(g.proven for g in groups),
        headroom_optimal=all(g.headroom_proven for g in groups),
        groups=len(groups),
        exact_groups=sum(g.exact for g in groups),
        elapsed_s=time.monotonic() - started,
        load_factor=factor,
        current_before_a=_currents(project, setup.figures, rule),
        current_after_a=current_after,
        capacity_a={c.circuit_id: rule.limit_a(c) for c in planned.circuits},
        current_rule=rule,
        current_warnings=current_warnings,
        notes=_notes(project, assignments, planned),
        board=board,
    )


def _circuit_loads(project: Project, figures: Figures) -> dict[str, list[tuple[str, float, str]]]:
    """Every circuit's loads as (name, current [A], kind), by circuit id."""
    circuits = {c.circuit_id: c for c in project.circuits}
    out: dict[str, list[tuple[str, float, str]]] = {cid: [] for cid in circuits}
    for load in project.loads:
        if load.circuit_id is not None:
            circuit = circuits[load.circuit_id]
            appliance = figures.appliance(load)
            out[load.circuit_id].append((load.name, figures.amps_a(load, circuit), load_kind(load, appliance, circuit)))
    return out


def _currents(project: Project, figures: Figures, rule: CurrentRule) -> dict[str, float]:
    """Each circuit's current by the current rule [A], by circuit id."""
    return {cid: rule.demand_a([a for _, a, _ in on]) for cid, on in _circuit_loads(project, figures).items()}


def _current_warnings(project: Project, figures: Figures, rule: CurrentRule) -> dict[str, list[str]]:
    """The limits of the current rule each circuit with a rating breaks after the plan, in words, by circuit id."""
    circuits = {c.circuit_id: c for c in project.circuits}
    out = {}
    for cid, on in _circuit_loads(project, figures).items():
        if found := rule.findings(circuits[cid], on):
            out[cid] = found
    return out


def _solve_groups(groups: list[RoomGroup], deadline: float, options: SplitOptions, progress: Progress | None) -> None:
    """Three passes over the room groups, so the time goes to what matters most first: (1) a heuristic plan and
    bounds for every group; (2) the exact MILP (new circuits, then moves) for the small groups the bounds do not
    prove; (3) the headroom stage for the small groups proven on (1) and (2)."""
    from leakbudget.planner.packing.milp import best_headroom

    def share(k: int, todo: list[RoomGroup]) -> float:
        remaining = max(deadline - time.monotonic(), 0.0)
        return remaining * len(todo[k].items) / max(sum(len(g.items) for g in todo[k:]), 1)

    def tell(stage: str, done: int, total: int) -> None:
        if progress is not None and total:
            progress(stage, done, total)

    for k, g in enumerate(groups):
        tell(STAGE_FIRST, k, len(groups))
        _first_plan(g, share(k, groups), options)
    tell(STAGE_FIRST, len(groups), len(groups))
    small = [g for g in groups if g.packing.n_items <= options.exact_max_items]
    unproven = [g for g in small if not g.proven]
    todo = unproven
    for _ in range(EXACT_ROUNDS):  # groups that ran out of time get another go with the time others left
        retry = []
        for k, g in enumerate(todo):
            tell(STAGE_EXACT, len(unproven) - len(todo) + k, len(unproven))
            left = share(k, todo)
            if left >= MIN_EXACT_S and _exact_plan(g, left):
                retry.append(g)
        todo = retry
        if not todo or deadline - time.monotonic() < MIN_EXACT_S * len(todo):
            break
    tell(STAGE_EXACT, len(unproven), len(unproven))
    polish = [g for g in small if g.proven and not g.headroom_proven and g.solution is not None]
    for k, g in enumerate(polish):
        tell(STAGE_HEADROOM, k, len(polish))
        left = max(deadline - time.monotonic(), 0.0) / (len(polish) - k)
        p = g.packing
        assert g.solution is not None
        if g.solution.max_use(p) <= _floor_use(p) + 1e-9:
            g.headroom_proven = True  # the tightest circuit is one no plan changes
        elif left >= MIN_EXACT_S:
            g.solution, g.headroom_proven = best_headroom(p, g.solution, left)
    tell(STAGE_HEADROOM, len(polish), len(polish))


def _first_plan(g: RoomGroup, time_s: float, options: SplitOptions) -> None:
    """Heuristic plan and lower bounds; proven when the plan meets both bounds."""
    from leakbudget.planner.packing.milp import lp_bound

    p = g.packing
    small = p.n_items <= options.exact_max_items
    try:
        g.solution = improve(p, time.monotonic() + (0.05 if small else 0.5) * time_s)
    except Unplaceable:
        g.solution = None
    g.moves_bound = p.moves_lower_bound()
    if g.solution is None:
        return
    g.bound = packing_bound(p)
    if g.solution.new_count > g.bound and not small and p.allowed.sum() <= LP_BOUND_MAX_PAIRS:
        g.bound = max(g.bound, lp_bound(p, 0.3 * time_s))
    g.proven = g.solution.new_count == g.bound and g.solution.moves(p) == g.moves_bound


def _exact_plan(g: RoomGroup, time_s: float) -> bool:
    """The MILP for one group (stage 1, and stage 2 when stage 1 is proven), keeping the better plan; True when
    more time might still prove it."""
    from leakbudget.planner.packing.milp import solve_exact

    p = g.packing
    h = g.solution
    g.exact = True
    cap = h.new_count if h is not None else p.n_items
    slots = [min(int(p.allowed[:, p.n_existing + t].sum()), cap) for t in range(p.n_types)]
    result = solve_exact(p, slots, g.bound, g.moves_bound, 0.7 * time_s, 0.3 * time_s)
    sol = result.solution
    if sol is None or sol.violations(p, solver=True):
        return not result.infeasible
    better = h is None or sol.key(p) <= h.key(p)
    if better:
        g.solution = sol
    if result.proven:  # the solver's counts are the optimum; a heuristic plan with the same counts is optimal too
        g.proven = True
        g.headroom_proven = better and result.headroom_proven
        g.bound, g.moves_bound = sol.new_count, sol.moves(p)
    else:
        assert g.solution is not None  # sol, or the heuristic plan h that it did not beat
        g.bound = max(g.bound, min(result.new_bound, g.solution.new_count))
    return not g.proven


def _floor_use(p: Packing) -> float:
    """Budget use no plan can lower: the highest (base ÷ budget) of an existing bin."""
    e = p.n_existing
    return float((p.base_ma[:e] / p.budget_ma[:e]).max()) if e else 0.0


def _apply(
    project: Project, groups: list[RoomGroup], loads: list[Load], circuits: list[Circuit]
) -> tuple[Project, list[NewCircuit]]:
    """The planned project: loads on their new circuits, the new circuits appended (named NEW-1, …)."""
    taken = {c.circuit_id.lower() for c in circuits}
    counter = 0
    target: dict[int, str] = {}
    new_circuits: list[NewCircuit] = []
    for g in groups:
        if g.solution is None:
            continue
        p = g.packing
        sol = g.solution
        names: list[str] = []
        for k, type_index in enumerate(sol.new_types):
            counter += 1
            while f"{NEW_PREFIX}{counter}".lower() in taken:
                counter += 1
            names.append(f"{NEW_PREFIX}{counter}")
            kind = g.kinds[type_index]
            rooms: list[str] = []
            on_it = [i for r in np.flatnonzero(sol.bin_of == p.n_existing + k).tolist() for i in g.members[r]]
            for i in on_it:
                room = loads[i].room
                if room and room.strip().lower() not in {x.lower() for x in rooms}:
                    rooms.append(room.strip())
            # hard-wired equipment alone on its new circuit: a dedicated circuit
            purpose = "dedicated" if kind.key[1] == "mixed" and len(on_it) == 1 else kind.prototype.purpose
            circuit = dataclasses.replace(
                kind.prototype,
                circuit_id=names[-1],
                rooms=tuple(rooms) or kind.prototype.rooms,
                note=f"new circuit proposed by leakbudget split ({kind.template})",
                row=0,
                purpose=purpose,
            )
            new_circuits.append(NewCircuit(circuit, kind.template, kind.key))
        for r, b in enumerate(sol.bin_of.tolist()):
            for i in g.members[r]:
                target[i] = circuits[g.bins[b]].circuit_id if b < p.n_existing else names[b - p.n_existing]
    planned_loads = [dataclasses.replace(ld, circuit_id=target.get(i, ld.circuit_id)) for i, ld in enumerate(loads)]
    planned = dataclasses.replace(
        project,
        circuits=[*circuits, *(n.circuit for n in new_circuits)],
        loads=planned_loads,
        warnings=list(project.warnings),
        defaults_used=list(project.defaults_used),
    )
    return planned, new_circuits


def _assignments(project: Project, planned: Project, figures: Figures) -> list[Assignment]:
    circuits = {c.circuit_id: c for c in planned.circuits}
    out = []
    for i, (old, new) in enumerate(zip(project.loads, planned.loads)):
        circuit = circuits.get(new.circuit_id) if new.circuit_id else None
        if circuit is None:
            leak, amps, src = math.nan, math.nan, "not placed"
        else:
            leak = figures.leak_ma(i, new, circuit)
            amps, src = load_current_a(new, figures.appliance(new), circuit)
        out.append(Assignment(old, old.circuit_id, new.circuit_id, leak, amps, src))
    return out


def _notes(project: Project, assignments: list[Assignment], planned: Project) -> list[str]:
    notes = []
    if project.settings.sum_rule == "phasor":
        notes.append(
            "The plan keeps the arithmetic sum within budget (conservative); the check gates on the phasor "
            "sum, which is never larger."
        )
    zero = [a.load.name for a in assignments if a.current_source.startswith("no Current")]
    if zero:
        notes.append(
            f"No current figure for {', '.join(zero[:6])}{' …' if len(zero) > 6 else ''}: counted as 0 A; "
            "add a Power or Current value."
        )
    no_rating = [c.circuit_id for c in planned.circuits if c.device.protected and not c.rating_a]
    if no_rating:
        notes.append(f"No rating for {', '.join(no_rating)}: their current is not limited.")
    fixed_unplaced = [ld.name for ld in project.loads if ld.stays and ld.circuit_id is None]
    if fixed_unplaced:
        notes.append(f"{', '.join(fixed_unplaced)} marked Stays but on no circuit: placed like any other load.")
    if len(planned.circuits) > len(project.circuits):
        notes.append(
            "New circuits are assumed to have the cable run of the circuit they copy; correct the run "
            "before wiring and check again."
        )
    return notes
