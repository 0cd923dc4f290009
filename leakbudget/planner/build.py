"""From a project to the split planner's packings: what stays, what may move, new-circuit kinds, room groups.

1. Loads that stay: loads marked Stays or named in ``--keep``, loads on unprotected or dedicated circuits, and the
   other members of a group one of whose members stays. A protected circuit whose staying loads and cable already
   break its budget (or, under the strict current rule, its current limit) is frozen (reported by name, left as it
   is, with all its loads).
2. Loads that fit on no circuit they may use, even alone on a new one, stay too (reported with the reason of each
   circuit of their room); that may freeze their circuit, so 1 and 2 repeat until nothing changes.
3. The movable loads become packing items, a group's members one item; the items and the circuits they may use
   form connected room groups; each becomes a :class:`~leakbudget.planner.packing.problem.Packing` with one column
   per existing circuit and per new-circuit kind (a room's kind per class of load: sockets, lighting, mixed).

A load's leakage on a circuit is the check's own estimate at that circuit's supply (:class:`Figures`, arithmetic
magnitude × quantity); its current follows :func:`leakbudget.planner.rules.load_current_a`, its limits
:mod:`leakbudget.planner.current`.
"""

from __future__ import annotations

import dataclasses
import math
from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from leakbudget.catalogue import Appliance
from leakbudget.devices import budget_ma
from leakbudget.devices import device as find_device
from leakbudget.estimate import LoadResult, cable_result, leakage_on
from leakbudget.leakage import rescale, split_by_nature
from leakbudget.model import Circuit, Load, Project
from leakbudget.planner.current import CURRENT_TOLERANCE_A, PLUG, PLUG_SOURCE, CurrentRule
from leakbudget.planner.packing.problem import MARGIN_MA, Packing, Solution
from leakbudget.planner.rules import NEW_PURPOSE, Eligibility, load_current_a, load_kind, room_key, why_not
from leakbudget.provenance import Source
from leakbudget.settings import IEC_SUPPLY, US_SUPPLY

# Current a plan may put on a circuit above rating × load factor: half the rule's rounding tolerance, so that a
# solver plan (SOLVER_TOLERANCE_A more) still keeps within it.
CURRENT_ALLOWANCE_A = CURRENT_TOLERANCE_A / 2


@dataclass(slots=True)
class Blocker:
    """Why no plan can meet every limit: a circuit whose staying loads break it, or a load that fits nowhere."""

    circuit_id: str | None
    loads: tuple[str, ...]
    message: str


KindKey = tuple[str | None, str]  # (room key, purpose) of a new-circuit kind; room None for loads without a room


@dataclass(slots=True)
class NewKind:
    """The kind of new circuit a room's loads of one class get: a prototype circuit, what it copies, its budget."""

    key: KindKey
    prototype: Circuit
    template: str  # in words: what it copies
    cable_ma: float
    budget_ma: float


@dataclass(slots=True)
class RoomGroup:
    """One independent sub-problem and what the solver found for it."""

    items: list[int]  # one load index per packing item (the first of its members)
    bins: list[int]  # circuit indices (the packing's existing bins, in order)
    kinds: list[NewKind]  # the packing's new-circuit types, in order
    packing: Packing
    solution: Solution | None = None
    bound: int = 0  # lower bound on new circuits
    moves_bound: int = 0  # lower bound on the packing's moves (placements included)
    proven: bool = False
    headroom_proven: bool = False
    exact: bool = False
    members: list[tuple[int, ...]] = field(default_factory=list)  # the load indices of each packing item


@dataclass
class Setup:
    groups: list[RoomGroup]
    blockers: list[Blocker]
    frozen: set[int]  # circuit indices left as they are
    left_alone: set[int]  # rows of loads reported as impossible to place or move (they stay)
    figures: Figures
    notes: list[str] = field(default_factory=list)


class Figures:
    """Leakage and current of each load on a given circuit, as the check estimates them (cached per supply).

    On the supply the check used for a load (its circuit's, or a room's for an unplaced load) the leakage is the
    check's own figure (``LoadResult.leakage_ma``, which includes readings on identical units). On another supply
    it is estimated by the check's own formula (:func:`leakbudget.estimate.leakage_on`); a reading on an identical
    unit is rescaled (resistive part ∝ V, capacitive part ∝ V·f, split by the catalogue row's nature).
    """

    def __init__(self, project: Project, estimates: list[LoadResult]) -> None:
        self.project = project
        self.estimates = estimates  # the check's results, loads in sheet order first
        self.basis = project.settings.basis
        self.first_line = float(project.settings["Line imbalance"])
        self._leak: dict[tuple[int, float, float], float] = {}

    def appliance(self, load: Load) -> Appliance | None:
        return self.project.catalogue.appliances.get(load.appliance_key) if load.appliance_key else None

    def leak_ma(self, index: int, load: Load, circuit: Circuit) -> float:
        """Arithmetic leakage of all the load's units on ``circuit`` [mA]."""
        key = (index, circuit.voltage_v, circuit.frequency_hz)
        if key not in self._leak:
            self._leak[key] = self._estimate(index, load, circuit)
        return self._leak[key]

    def _estimate(self, index: int, load: Load, circuit: Circuit) -> float:
        known = self.estimates[index]
        if (known.voltage_v, known.frequency_hz) == (circuit.voltage_v, circuit.frequency_hz):
            return known.leakage_ma
        appliance = self.appliance(load)
        if known.measured_on is None or appliance is None:
            return leakage_on(load, appliance, circuit, self.basis, self.first_line)
        resistive, capacitive = split_by_nature(known.per_unit_ma, appliance.nature)
        r, c = rescale(
            resistive, capacitive, known.voltage_v, known.frequency_hz, circuit.voltage_v, circuit.frequency_hz
        )
        return abs(complex(float(r), float(c))) * load.quantity

    def amps_a(self, load: Load, circuit: Circuit) -> float:
        return load_current_a(load, self.appliance(load), circuit)[0]


def cable_ma(circuit: Circuit, project: Project) -> float:
    """The circuit's cable-run leakage [mA] (0 without a run)."""
    line = cable_result(circuit, project)
    return line.leakage_ma if line is not None else 0.0


def _signature(c: Circuit) -> tuple[object, ...]:
    return c.device.key, c.system, c.rating_a, c.voltage_v, c.frequency_hz, c.rcd_type


def new_kind(
    project: Project,
    room: str | None,
    room_text: str | None,
    purpose: str,
    new_device: str | None,
    new_rating_a: float | None,
    serving: list[Circuit],
) -> NewKind | None:
    """The new-circuit kind for a room's loads of one class (``purpose``: sockets, lighting or mixed): the most
    common kind among the protected circuits serving the room that take that class (else among all serving it),
    of those the longest cable run, built for ``purpose``, with --new-device / --new-rating applied; None when
    nothing says what to build."""
    fit = [c for c in serving if c.purpose in (purpose, "mixed") and c.purpose != "dedicated"]
    pool = fit or [c for c in serving if c.purpose != "dedicated"] or serving
    if pool:
        kinds = Counter(_signature(c) for c in pool)
        top = max(kinds.values())
        kind = next(_signature(c) for c in pool if kinds[_signature(c)] == top)
        base = max((c for c in pool if _signature(c) == kind), key=lambda c: cable_ma(c, project))
        text = f"copies {base.circuit_id}"
        if base.purpose != purpose:
            text += f", as a {purpose} circuit"
        proto = dataclasses.replace(base, rooms=(room_text,) if room_text else (), note=None, purpose=purpose)
        if new_device is not None:
            proto = dataclasses.replace(proto, device=find_device(new_device))
            text += f", device {new_device} (--new-device)"
    elif new_device is not None:
        dev = find_device(new_device)
        anyone = [c for c in project.circuits if room is None or room in {room_key(r) for r in c.rooms}]
        if anyone:
            v, f, src = anyone[0].voltage_v, anyone[0].frequency_hz, anyone[0].supply_source
        else:
            v, f = US_SUPPLY if dev.market == "us" else IEC_SUPPLY
            src = Source.common_practice(f"{v:g} V {f:g} Hz default supply for {dev.label}")
        proto = Circuit(
            circuit_id="",
            device=dev,
            rcd_type=None,
            voltage_v=v,
            frequency_hz=f,
            supply_source=src,
            system="single",
            rating_a=None,
            cable_length_m=None,
            cable_key=str(project.settings["Default cable"]),
            rooms=(room_text,) if room_text else (),
            note=None,
            row=0,
            purpose=purpose,
        )
        text = (
            f"a {purpose} circuit, device {new_device} (--new-device; no protected circuit serves the room), no "
            "cable run counted"
        )
    else:
        return None
    if new_rating_a is not None:
        proto = dataclasses.replace(proto, rating_a=new_rating_a)
        text += f", rating {new_rating_a:g} A (--new-rating)"
    budget = budget_ma(proto.device, project.settings.budget_fraction, project.settings.budget_of)
    return NewKind((room, purpose), proto, text, cable_ma(proto, project), budget)


def circuit_limit_key(circuit_id: str) -> tuple[str, str | None]:
    """Key of an existing circuit in ``build``'s ``limits_ma``."""
    return "circuit", circuit_id.lower()


def kind_limit_key(key: KindKey) -> tuple[str, str | None]:
    """Key of a room's new-circuit kind (room key, purpose) in ``build``'s ``limits_ma``."""
    return "kind", f"{key[1]}:{key[0] or ''}"


def build(
    project: Project,
    estimates: list[LoadResult],
    new_device: str | None,
    new_rating_a: float | None,
    limits_ma: Mapping[tuple[str, str | None], float] | None = None,
    keep: frozenset[str] = frozenset(),
    avoid: frozenset[str] = frozenset(),
) -> Setup:
    """Everything the solver needs (see the module docstring); ``estimates`` are the check's load results.

    ``limits_ma`` lowers budgets below the budget rule's [mA]: per existing circuit (:func:`circuit_limit_key`)
    and per room's new-circuit kind (:func:`kind_limit_key`); the trip-likelihood cap uses it. ``keep`` are the
    lower-case names of loads that stay (``--keep``), ``avoid`` the lower-case ids of circuits that take no new
    load (``--avoid``)."""
    limits_ma = limits_ma or {}
    settings = project.settings
    rule = CurrentRule.from_settings(settings)
    figures = Figures(project, estimates)
    circuits = project.circuits
    loads = project.loads
    index = project.circuit_index()
    budgets = [
        min(
            budget_ma(c.device, settings.budget_fraction, settings.budget_of),
            limits_ma.get(circuit_limit_key(c.circuit_id), math.inf),
        )
        if c.device.protected
        else math.nan
        for c in circuits
    ]
    limit = [rule.limit_a(c) for c in circuits]
    cable = [cable_ma(c, project) for c in circuits]
    on = [index[ld.circuit_id.lower()] if ld.circuit_id else -1 for ld in loads]
    kind = [load_kind(ld, figures.appliance(ld), circuits[on[i]] if on[i] >= 0 else None) for i, ld in enumerate(loads)]
    stays = [
        ld.circuit_id is not None
        and (
            ld.stays
            or ld.name.strip().lower() in keep
            or not circuits[on[i]].device.protected
            or circuits[on[i]].purpose == "dedicated"
        )
        for i, ld in enumerate(loads)
    ]
    members_of: dict[str, list[int]] = {}
    for i, ld in enumerate(loads):
        if ld.group and ld.group.strip():
            members_of.setdefault(ld.group.strip().lower(), []).append(i)
    protected = [j for j, c in enumerate(circuits) if c.device.protected]
    avoided = {index[a] for a in avoid if a in index}
    all_protected = Eligibility(circuits, protected)
    kinds: dict[KindKey, NewKind | None] = {}
    frozen: set[int] = set()
    stuck_messages: list[Blocker] = []
    while True:
        base_leak = np.array(cable, dtype=float)
        base_currents: list[list[float]] = [[] for _ in circuits]
        for i, ld in enumerate(loads):
            if on[i] >= 0 and (stays[i] or on[i] in frozen):
                base_leak[on[i]] += figures.leak_ma(i, ld, circuits[on[i]])
                base_currents[on[i]].append(figures.amps_a(ld, circuits[on[i]]))
        newly = [
            j
            for j in protected
            if j not in frozen
            and (
                base_leak[j] > budgets[j]
                or (rule.strict and rule.demand_a(base_currents[j]) > limit[j] + CURRENT_TOLERANCE_A)
            )
        ]
        frozen.update(newly)
        movable = {i for i in range(len(loads)) if not stays[i] and (on[i] < 0 or on[i] not in frozen)}
        grouped = False
        for members in members_of.values():  # a group moves whole: one member that stays keeps the placed others
            if any(on[i] >= 0 and i not in movable for i in members):
                for i in members:
                    if on[i] >= 0 and i in movable:
                        stays[i], grouped = True, True
                        movable.discard(i)
        if grouped:
            continue
        bundles = _bundles(sorted(movable), loads, members_of)
        for i in sorted(movable):
            key = (room_key(loads[i].room), NEW_PURPOSE[kind[i]])
            if key not in kinds:
                new = kinds[key] = new_kind(
                    project,
                    key[0],
                    loads[i].room,
                    key[1],
                    new_device,
                    new_rating_a,
                    [circuits[j] for j in all_protected.serving(key[0])],
                )
                cap = limits_ma.get(kind_limit_key(key))
                if new is not None and cap is not None:
                    kinds[key] = dataclasses.replace(new, budget_ma=min(new.budget_ma, cap))
        usable = [j for j in protected if j not in frozen]
        spare_leak = np.full(len(circuits), -math.inf)
        for j in usable:
            spare_leak[j] = max(budgets[j] - base_leak[j] - MARGIN_MA, 0.0)
        context = _Context(loads, on, kind, circuits, figures, rule, spare_leak, budgets, base_leak, base_currents)
        groups = _groups(bundles, Eligibility(circuits, usable, avoided), kinds, context)
        stuck = [(g, r) for g in groups for r in np.flatnonzero(~g.packing.fits_alone().any(axis=1)).tolist()]
        if not stuck and not newly:
            break
        for g, r in stuck:
            for i in g.members[r]:
                stays[i] = True
            stuck_messages.append(_stuck_blocker(g, r, context, all_protected, avoided))
    blockers = [
        _frozen_blocker(j, circuits[j], loads, on, stays, budgets[j], cable[j], figures, rule) for j in sorted(frozen)
    ]
    left_alone = {
        ld.row
        for i, ld in enumerate(loads)
        if (stays[i] and not ld.stays and (on[i] < 0 or circuits[on[i]].device.protected)) or on[i] in frozen
    }
    return Setup(groups, blockers + stuck_messages, frozen, left_alone, figures)


def _bundles(movable: list[int], loads: list[Load], members_of: dict[str, list[int]]) -> list[tuple[int, ...]]:
    """The movable loads as packing items: a group's movable members together, every other load alone."""
    taken: set[int] = set()
    out: list[tuple[int, ...]] = []
    movable_set = set(movable)
    for i in movable:
        if i in taken:
            continue
        name = (loads[i].group or "").strip().lower()
        members = tuple(m for m in members_of[name] if m in movable_set) if name else (i,)
        taken.update(members)
        out.append(members)
    return out


@dataclass(slots=True)
class _Context:
    """What building the packings needs besides the bundles (shared by every room group)."""

    loads: list[Load]
    on: list[int]
    kind: list[str]
    circuits: list[Circuit]
    figures: Figures
    rule: CurrentRule
    spare_leak: np.ndarray
    budgets: list[float]
    base_leak: np.ndarray
    base_currents: list[list[float]]


def _bundle_eligibility(
    members: tuple[int, ...], eligibility: Eligibility, kinds: dict[KindKey, NewKind | None], ctx: _Context
) -> tuple[list[int], list[NewKind]]:
    """Circuits and new-circuit kinds every member of a bundle may go on (a group's: those all members share)."""
    circuits_on: set[int] | None = None
    new: list[NewKind] | None = None
    starts = {ctx.on[i] for i in members}
    at = next(iter(starts)) if len(starts) == 1 else -1
    for i in members:
        mine = set(eligibility.circuits_for(ctx.loads[i], at, ctx.kind[i]))
        circuits_on = mine if circuits_on is None else circuits_on & mine
        kinds_here = eligibility.kinds_for(ctx.loads[i], kinds, ctx.kind[i])
        new = kinds_here if new is None else [k for k in new if any(k is o for o in kinds_here)]
    return sorted(circuits_on or ()), new or []


def _groups(
    bundles: list[tuple[int, ...]],
    eligibility: Eligibility,
    kinds: dict[KindKey, NewKind | None],
    ctx: _Context,
) -> list[RoomGroup]:
    """Split the bundles into connected room groups and build each group's packing."""
    parent: dict[object, object] = {}

    def find(a: object) -> object:
        parent.setdefault(a, a)
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    elig: dict[int, tuple[list[int], list[NewKind]]] = {}
    patterns: dict[tuple[tuple[int, ...], tuple[int, ...]], list[int]] = {}
    for b, bundle in enumerate(bundles):
        circuits_on, new = _bundle_eligibility(bundle, eligibility, kinds, ctx)
        elig[b] = (circuits_on, new)
        patterns.setdefault((tuple(circuits_on), tuple(id(k) for k in new)), []).append(b)
    for bins, new_ids in patterns:
        anchor = ("pattern", bins, new_ids)
        find(anchor)
        for node in [("circuit", j) for j in bins] + [("kind", k) for k in new_ids]:
            ra, rb = find(node), find(anchor)
            if ra != rb:
                parent[ra] = rb
    members: dict[object, list[int]] = {}
    for (bins, new_ids), items in patterns.items():
        members.setdefault(find(("pattern", bins, new_ids)), []).extend(items)
    groups = []
    for items in members.values():
        items.sort()
        group_bins = sorted({j for b in items for j in elig[b][0]})
        group_kinds: list[NewKind] = []
        for b in items:
            group_kinds += [k for k in elig[b][1] if all(k is not o for o in group_kinds)]
        groups.append(
            _packing_group([bundles[b] for b in items], group_bins, group_kinds, [elig[b] for b in items], ctx)
        )
    groups.sort(key=lambda g: min(ctx.loads[i].row for m in g.members for i in m))
    return groups


def _packing_group(
    bundles: list[tuple[int, ...]],
    bins: list[int],
    kinds: list[NewKind],
    elig: list[tuple[list[int], list[NewKind]]],
    ctx: _Context,
) -> RoomGroup:
    loads, circuits, figures, rule = ctx.loads, ctx.circuits, ctx.figures, ctx.rule
    n, e = len(bundles), len(bins)
    targets = [circuits[j] for j in bins] + [k.prototype for k in kinds]
    col_of = {j: c for c, j in enumerate(bins)}
    kind_col = {id(k): e + c for c, k in enumerate(kinds)}
    # leakage depends on the supply (V, f), current on (V, system): compute per distinct key, then spread
    supply_keys: dict[tuple[float, float], int] = {}
    volt_keys: dict[tuple[float, str], int] = {}
    supply_of = np.array(
        [supply_keys.setdefault((t.voltage_v, t.frequency_hz), len(supply_keys)) for t in targets], dtype=np.int64
    )
    volt_of = np.array([volt_keys.setdefault((t.voltage_v, t.system), len(volt_keys)) for t in targets], dtype=np.int64)
    at = np.asarray(bins, dtype=np.int64)
    sample_supply = {k: targets[int(np.flatnonzero(supply_of == k)[0])] for k in supply_keys.values()}
    sample_volt = {k: targets[int(np.flatnonzero(volt_of == k)[0])] for k in volt_keys.values()}
    leak_by = np.array(
        [
            [sum(figures.leak_ma(i, loads[i], sample_supply[k]) for i in m) for k in range(len(supply_keys))]
            for m in bundles
        ]
    ).reshape(n, len(supply_keys))
    member_amps = [
        np.array([[figures.amps_a(loads[i], sample_volt[k]) for k in range(len(volt_keys))] for i in m])
        for m in bundles
    ]
    amps_by = np.array([a.sum(axis=0) for a in member_amps]).reshape(n, len(volt_keys))
    largest_by = np.array([a.max(axis=0) for a in member_amps]).reshape(n, len(volt_keys))
    amps = amps_by[:, volt_of]
    largest = largest_by[:, volt_of]
    allowed = np.zeros((n, e + len(kinds)), dtype=bool)
    for r, (circuits_on, new) in enumerate(elig):
        allowed[r, [col_of[j] for j in circuits_on] + [kind_col[id(k)] for k in new]] = True
    start = np.array([_start(m, ctx.on, col_of) for m in bundles], dtype=np.int64)
    # one plug load above its share of a circuit's rating may not be moved there (it may stay where it is)
    plug_limit = np.array([rule.plug_limit_a(t) for t in targets])
    for r, m in enumerate(bundles):
        for i in m:
            if ctx.kind[i] != PLUG:
                continue
            own = np.array([figures.amps_a(loads[i], sample_volt[int(k)]) for k in volt_of])
            over = own > plug_limit + CURRENT_TOLERANCE_A
            if start[r] >= 0:
                over[start[r]] = False
            allowed[r, over] = False
    # current: the rule's linear form on every column, with the largest load that could end there; an existing
    # circuit may always keep what it carries today (not under the strict rule, whose limits a plan must meet)
    spare_amps = np.empty(e + len(kinds))
    for c, t in enumerate(targets):
        could = largest[allowed[:, c], c]
        if c < e:
            j = bins[c]
            base = ctx.base_currents[j]
            biggest = max([*base, *could.tolist(), 0.0])
            today = 0.0 if rule.strict else float(amps[start == c, c].sum())  # strict: today's overload is fixed
            spare_amps[c] = max(rule.linear_capacity_a(t, biggest) - sum(base), today, 0.0) + CURRENT_ALLOWANCE_A
        else:
            biggest = float(could.max()) if could.size else 0.0
            spare_amps[c] = rule.linear_capacity_a(t, biggest) + CURRENT_ALLOWANCE_A
    packing = Packing(
        leak_ma=leak_by[:, supply_of],
        amps_a=amps,
        allowed=allowed,
        spare_leak_ma=np.concatenate(
            [ctx.spare_leak[at], [max(k.budget_ma - k.cable_ma - MARGIN_MA, 0.0) for k in kinds]]
        ),
        spare_amps_a=spare_amps,
        budget_ma=np.array([ctx.budgets[j] for j in bins] + [k.budget_ma for k in kinds]),
        base_ma=np.concatenate([ctx.base_leak[at], [k.cable_ma for k in kinds]]),
        start=start,
        n_existing=e,
    )
    return RoomGroup([m[0] for m in bundles], bins, kinds, packing, members=bundles)


def _start(members: tuple[int, ...], on: list[int], col_of: dict[int, int]) -> int:
    """The packing column a bundle starts on: its members' one circuit, else −1 (unplaced, or split today)."""
    starts = {on[i] for i in members}
    if len(starts) != 1:
        return -1
    return col_of.get(next(iter(starts)), -1)


def _figures_text(load_index: int, ctx: _Context, candidates: list[int]) -> str:
    """The load's leakage and current on its circuit (else on the first circuit that might take it), in words."""
    where = ctx.on[load_index] if ctx.on[load_index] >= 0 else (candidates[0] if candidates else -1)
    if where < 0:
        return "no circuit to estimate it on"
    circuit = ctx.circuits[where]
    load = ctx.loads[load_index]
    return f"{ctx.figures.leak_ma(load_index, load, circuit):.3f} mA, {ctx.figures.amps_a(load, circuit):.2f} A"


def _stuck_blocker(g: RoomGroup, r: int, ctx: _Context, all_protected: Eligibility, avoided: set[int]) -> Blocker:
    """Why one bundle fits nowhere: for each circuit of its room, the reason it may not take it (purpose, leg,
    --avoid, plug limit) or what it can still take, with the figures; never a figure that is not a number."""
    p = g.packing
    e = p.n_existing
    members = g.members[r]
    first = members[0]
    load = ctx.loads[first]
    figures = _figures_text(first, ctx, list(all_protected.serving(room_key(load.room))))
    name = (
        f"'{load.name}' (row {load.row}, {figures})"
        if len(members) == 1
        else f"group '{load.group}' ({', '.join(repr(ctx.loads[i].name) for i in members)}; {figures} for "
        f"'{load.name}', row {load.row})"
    )
    cols = np.flatnonzero(p.allowed[r])
    room = room_key(load.room)
    serving = all_protected.serving(room)
    reasons = []
    for j in serving:
        if j in g.bins and p.allowed[r, g.bins.index(j)]:
            continue
        why = next(
            (
                w
                for i in members
                if (w := why_not(ctx.loads[i], ctx.circuits[j], ctx.kind[i], j in avoided)) is not None
            ),
            None,
        )
        if why is None and j in g.bins:
            why = f"{ctx.circuits[j].circuit_id} is above its plug limit for it ({PLUG_SOURCE})"
        reasons.append(why or f"{ctx.circuits[j].circuit_id} cannot be used (its loads cannot be fixed)")
    options = []
    for c in cols.tolist():
        where = ctx.circuits[g.bins[c]].circuit_id if c < e else f"a new circuit that {g.kinds[c - e].template}"
        options.append(
            f"{where} can take {p.spare_leak_ma[c]:.3f} mA of its {p.leak_ma[r, c]:.3f} mA and "
            f"{p.spare_amps_a[c]:.1f} A of its {p.amps_a[r, c]:.1f} A"
        )
    parts = options[:6] + ([f"and {len(options) - 6} more"] if len(options) > 6 else [])
    parts += reasons[:6] + ([f"and {len(reasons) - 6} other circuits"] if len(reasons) > 6 else [])
    if not serving:
        parts.append(f"no protected circuit serves room '{load.room}' and none can be added (give --new-device)")
    elif not any(c >= e for c in cols.tolist()):
        parts.append("no new circuit of its room may take it (none of its room's circuits takes its kind of load)")
    too_leaky = bool(cols.size) and bool(np.all(p.leak_ma[r, cols] > p.spare_leak_ma[cols]))
    advice = (
        "measure it (the estimate may be pessimistic) and have it repaired if it leaks far above its typical value"
        if too_leaky
        else "give it a circuit that may take it (see the reasons), sized for its current (the overcurrent rating, "
        "never the GFCI/RCD trip level)"
    )
    return Blocker(
        ctx.circuits[g.bins[p.start[r]]].circuit_id if p.start[r] >= 0 else None,
        tuple(ctx.loads[i].name for i in members),
        f"{name} fits on no circuit that may take it: {'; '.join(parts)}; {advice}",
    )


def _frozen_blocker(
    j: int,
    circuit: Circuit,
    loads: list[Load],
    on: list[int],
    stays: list[bool],
    budget: float,
    cable: float,
    figures: Figures,
    rule: CurrentRule,
) -> Blocker:
    staying = [i for i in range(len(loads)) if on[i] == j and stays[i]]
    leak_ma = cable + sum(figures.leak_ma(i, loads[i], circuit) for i in staying)
    currents = [figures.amps_a(loads[i], circuit) for i in staying]
    parts = [f"'{loads[i].name}' {figures.leak_ma(i, loads[i], circuit):.3f} mA" for i in staying]
    if cable:
        parts.append(f"cable run {cable:.3f} mA")
    reasons = []
    if leak_ma > budget:
        reasons.append(
            f"the loads that must stay and its cable need {leak_ma:.3f} mA ({', '.join(parts)}), above "
            f"its budget of {budget:.3f} mA"
        )
    demand, limit = rule.demand_a(currents), rule.limit_a(circuit)
    if rule.strict and demand > limit + CURRENT_TOLERANCE_A:
        amp_parts = ", ".join(f"'{loads[i].name}' {a:.1f} A" for i, a in zip(staying, currents))
        of = f"{rule.load_factor:g} × {circuit.rating_a:g} A = " if circuit.purpose != "dedicated" else ""
        reasons.append(
            f"the loads that must stay draw {demand:.1f} A ({amp_parts}), above {of}{limit:.1f} A (Current rule strict)"
        )
    return Blocker(
        circuit.circuit_id,
        tuple(loads[i].name for i in staying),
        f"{circuit.circuit_id}: {' and '.join(reasons)}; no plan can fix it while they stay there "
        f"(un-mark or split one of them, or measure them: the estimate may be pessimistic); it is left "
        f"as it is",
    )
