"""From a project to the split planner's packings: what stays, what may move, new-circuit kinds, room groups.

1. Loads that stay: loads marked Stays, loads on unprotected circuits. A protected circuit whose staying loads and cable
   already break its budget or current limit is frozen (reported by name, left as it is, with all its loads).
2. Loads that fit on no circuit they may use, even alone on a new one, stay too (reported by name); that may
   freeze their circuit, so 1 and 2 repeat until nothing changes.
3. The remaining loads and the circuits they may use form connected room groups; each becomes a
   :class:`~leakbudget.planner.packing.problem.Packing` with one column per existing circuit and per new-circuit kind.

A load's leakage on a circuit is the check's own estimate at that circuit's supply (:class:`Figures`, arithmetic
magnitude × quantity); its current follows :func:`leakbudget.planner.rules.load_current_a`.
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
from leakbudget.planner.packing.problem import MARGIN_MA, Packing, Solution
from leakbudget.planner.rules import CURRENT_TOLERANCE_A, Eligibility, current_capacity_a, load_current_a, room_key
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


@dataclass(slots=True)
class NewKind:
    """The kind of new circuit a room gets: a prototype circuit, what it copies, its budget and limits."""

    key: str | None  # room key; None for loads without a room
    prototype: Circuit
    template: str  # in words: what it copies
    cable_ma: float
    budget_ma: float
    capacity_a: float


@dataclass(slots=True)
class RoomGroup:
    """One independent sub-problem and what the solver found for it."""

    items: list[int]  # load indices
    bins: list[int]  # circuit indices (the packing's existing bins, in order)
    kinds: list[NewKind]  # the packing's new-circuit types, in order
    packing: Packing
    solution: Solution | None = None
    bound: int = 0  # lower bound on new circuits
    moves_bound: int = 0  # lower bound on the packing's moves (placements included)
    proven: bool = False
    headroom_proven: bool = False
    exact: bool = False


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
    new_device: str | None,
    new_rating_a: float | None,
    factor: float,
    serving: list[Circuit],
) -> NewKind | None:
    """The new-circuit kind for a room: the most common kind among the protected circuits serving it (of those,
    the longest cable run), with --new-device / --new-rating applied; None when nothing says what to build."""
    if serving:
        kinds = Counter(_signature(c) for c in serving)
        top = max(kinds.values())
        kind = next(_signature(c) for c in serving if kinds[_signature(c)] == top)
        base = max((c for c in serving if _signature(c) == kind), key=lambda c: cable_ma(c, project))
        text = f"copies {base.circuit_id}"
        proto = dataclasses.replace(base, rooms=(room_text,) if room_text else (), note=None)
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
        )
        text = f"device {new_device} (--new-device; no protected circuit serves the room), no cable run counted"
    else:
        return None
    if new_rating_a is not None:
        proto = dataclasses.replace(proto, rating_a=new_rating_a)
        text += f", rating {new_rating_a:g} A (--new-rating)"
    budget = budget_ma(proto.device, project.settings.budget_fraction, project.settings.budget_of)
    return NewKind(room, proto, text, cable_ma(proto, project), budget, current_capacity_a(proto, factor))


def circuit_limit_key(circuit_id: str) -> tuple[str, str | None]:
    """Key of an existing circuit in ``build``'s ``limits_ma``."""
    return "circuit", circuit_id.lower()


def kind_limit_key(room: str | None) -> tuple[str, str | None]:
    """Key of a room's new-circuit kind in ``build``'s ``limits_ma``."""
    return "kind", room


def build(
    project: Project,
    estimates: list[LoadResult],
    new_device: str | None,
    new_rating_a: float | None,
    limits_ma: Mapping[tuple[str, str | None], float] | None = None,
) -> Setup:
    """Everything the solver needs (see the module docstring); ``estimates`` are the check's load results.

    ``limits_ma`` lowers budgets below the budget rule's [mA]: per existing circuit (:func:`circuit_limit_key`)
    and per room's new-circuit kind (:func:`kind_limit_key`); the trip-likelihood cap uses it."""
    limits_ma = limits_ma or {}
    settings = project.settings
    factor = float(settings["Load factor"])
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
    capacity = [current_capacity_a(c, factor) for c in circuits]
    cable = [cable_ma(c, project) for c in circuits]
    on = [index[ld.circuit_id.lower()] if ld.circuit_id else -1 for ld in loads]
    stays = [
        ld.circuit_id is not None and (ld.stays or not circuits[on[i]].device.protected) for i, ld in enumerate(loads)
    ]
    protected = [j for j, c in enumerate(circuits) if c.device.protected]
    all_protected = Eligibility(circuits, protected)
    kinds: dict[str | None, NewKind | None] = {}
    frozen: set[int] = set()
    stuck_messages: list[Blocker] = []
    while True:
        base_leak = np.array(cable, dtype=float)
        base_amps = np.zeros(len(circuits))
        for i, ld in enumerate(loads):
            if on[i] >= 0 and (stays[i] or on[i] in frozen):
                base_leak[on[i]] += figures.leak_ma(i, ld, circuits[on[i]])
                base_amps[on[i]] += figures.amps_a(ld, circuits[on[i]])
        newly = [
            j
            for j in protected
            if j not in frozen and (base_leak[j] > budgets[j] or base_amps[j] > capacity[j] + CURRENT_TOLERANCE_A)
        ]
        frozen.update(newly)
        movable = [i for i in range(len(loads)) if not stays[i] and (on[i] < 0 or on[i] not in frozen)]
        for i in movable:
            key = room_key(loads[i].room)
            if key not in kinds:
                kind = kinds[key] = new_kind(
                    project,
                    key,
                    loads[i].room,
                    new_device,
                    new_rating_a,
                    factor,
                    [circuits[j] for j in all_protected.serving(key)],
                )
                limit = limits_ma.get(kind_limit_key(key))
                if kind is not None and limit is not None:
                    kinds[key] = dataclasses.replace(kind, budget_ma=min(kind.budget_ma, limit))
        usable = [j for j in protected if j not in frozen]
        spare_leak = np.full(len(circuits), -math.inf)
        spare_amps = np.full(len(circuits), -math.inf)
        for j in usable:
            spare_leak[j] = max(budgets[j] - base_leak[j] - MARGIN_MA, 0.0)
            spare_amps[j] = max(capacity[j] - base_amps[j] + CURRENT_ALLOWANCE_A, 0.0)
        groups = _groups(
            movable,
            loads,
            on,
            Eligibility(circuits, usable),
            kinds,
            circuits,
            figures,
            spare_leak,
            spare_amps,
            budgets,
            base_leak,
        )
        stuck = [(g, r) for g in groups for r in np.flatnonzero(~g.packing.fits_alone().any(axis=1)).tolist()]
        if not stuck and not newly:
            break
        for g, r in stuck:
            i = g.items[r]
            stays[i] = True
            stuck_messages.append(_stuck_blocker(loads[i], g, r, circuits))
    blockers = [
        _frozen_blocker(j, circuits[j], loads, on, stays, budgets[j], capacity[j], cable[j], figures, factor)
        for j in sorted(frozen)
    ]
    left_alone = {
        ld.row
        for i, ld in enumerate(loads)
        if (stays[i] and not ld.stays and (on[i] < 0 or circuits[on[i]].device.protected)) or on[i] in frozen
    }
    return Setup(groups, blockers + stuck_messages, frozen, left_alone, figures)


def _groups(
    movable: list[int],
    loads: list[Load],
    on: list[int],
    eligibility: Eligibility,
    kinds: dict[str | None, NewKind | None],
    circuits: list[Circuit],
    figures: Figures,
    spare_leak: np.ndarray,
    spare_amps: np.ndarray,
    budgets: list[float],
    base_leak: np.ndarray,
) -> list[RoomGroup]:
    """Split the movable loads into connected room groups and build each group's packing."""
    parent: dict[object, object] = {}

    def find(a: object) -> object:
        parent.setdefault(a, a)
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    elig: dict[int, tuple[list[int], list[NewKind]]] = {}
    patterns: dict[tuple[tuple[int, ...], tuple[int, ...]], list[int]] = {}
    for i in movable:
        circuits_on = eligibility.circuits_for(loads[i], on[i])
        new = list(eligibility.kinds_for(loads[i], kinds))
        elig[i] = (circuits_on, new)
        patterns.setdefault((tuple(circuits_on), tuple(id(k) for k in new)), []).append(i)
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
        group_bins = sorted({j for i in items for j in elig[i][0]})
        group_kinds: list[NewKind] = []
        for i in items:
            group_kinds += [k for k in elig[i][1] if all(k is not o for o in group_kinds)]
        groups.append(
            _packing_group(
                items,
                group_bins,
                group_kinds,
                elig,
                loads,
                on,
                circuits,
                figures,
                spare_leak,
                spare_amps,
                budgets,
                base_leak,
            )
        )
    groups.sort(key=lambda g: min(loads[i].row for i in g.items))
    return groups


def _packing_group(
    items: list[int],
    bins: list[int],
    kinds: list[NewKind],
    elig: dict[int, tuple[list[int], list[NewKind]]],
    loads: list[Load],
    on: list[int],
    circuits: list[Circuit],
    figures: Figures,
    spare_leak: np.ndarray,
    spare_amps: np.ndarray,
    budgets: list[float],
    base_leak: np.ndarray,
) -> RoomGroup:
    n, e = len(items), len(bins)
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
        [[figures.leak_ma(i, loads[i], sample_supply[k]) for k in range(len(supply_keys))] for i in items]
    ).reshape(n, len(supply_keys))
    amps_by = np.array(
        [[figures.amps_a(loads[i], sample_volt[k]) for k in range(len(volt_keys))] for i in items]
    ).reshape(n, len(volt_keys))
    allowed = np.zeros((n, e + len(kinds)), dtype=bool)
    for r, i in enumerate(items):
        allowed[r, [col_of[j] for j in elig[i][0]] + [kind_col[id(k)] for k in elig[i][1]]] = True
    packing = Packing(
        leak_ma=leak_by[:, supply_of],
        amps_a=amps_by[:, volt_of],
        allowed=allowed,
        spare_leak_ma=np.concatenate([spare_leak[at], [max(k.budget_ma - k.cable_ma - MARGIN_MA, 0.0) for k in kinds]]),
        spare_amps_a=np.concatenate([spare_amps[at], [k.capacity_a + CURRENT_ALLOWANCE_A for k in kinds]]),
        budget_ma=np.array([budgets[j] for j in bins] + [k.budget_ma for k in kinds]),
        base_ma=np.concatenate([base_leak[at], [k.cable_ma for k in kinds]]),
        start=np.array([col_of.get(on[i], -1) for i in items], dtype=np.int64),
        n_existing=e,
    )
    return RoomGroup(items, bins, kinds, packing)


def _stuck_blocker(load: Load, g: RoomGroup, r: int, circuits: list[Circuit]) -> Blocker:
    p = g.packing
    e = p.n_existing
    cols = np.flatnonzero(p.allowed[r])
    options = []
    for c in cols.tolist():
        name = circuits[g.bins[c]].circuit_id if c < e else f"a new circuit that {g.kinds[c - e].template}"
        options.append(f"{name} can take {p.spare_leak_ma[c]:.3f} mA and {p.spare_amps_a[c]:.1f} A")
    leak = float(p.leak_ma[r, cols].min()) if cols.size else math.nan
    amps = float(p.amps_a[r, cols].min()) if cols.size else math.nan
    if not options:
        where = f"no protected circuit serves room '{load.room}' and none can be added (give --new-device)"
        advice = "add a protected circuit for the room"
    else:
        where = "; ".join(options[:6]) + (f" and {len(options) - 6} more" if len(options) > 6 else "")
        too_leaky = bool(np.all(p.leak_ma[r, cols] > p.spare_leak_ma[cols]))
        advice = (
            "split it into smaller groups, or measure it (the estimate may be pessimistic) and have it "
            "repaired if it leaks far above its typical value"
            if too_leaky
            else "split it into smaller groups or give it a dedicated circuit sized for its current (the "
            "overcurrent rating, never the GFCI/RCD trip level)"
        )
    return Blocker(
        circuits[g.bins[p.start[r]]].circuit_id if p.start[r] >= 0 else None,
        (load.name,),
        f"'{load.name}' (row {load.row}, {leak:.3f} mA, {amps:.2f} A) fits on no circuit that may take "
        f"it: {where}; {advice}",
    )


def _frozen_blocker(
    j: int,
    circuit: Circuit,
    loads: list[Load],
    on: list[int],
    stays: list[bool],
    budget: float,
    capacity: float,
    cable: float,
    figures: Figures,
    factor: float,
) -> Blocker:
    staying = [i for i in range(len(loads)) if on[i] == j and stays[i]]
    leak_ma = cable + sum(figures.leak_ma(i, loads[i], circuit) for i in staying)
    amps_a = sum(figures.amps_a(loads[i], circuit) for i in staying)
    parts = [f"'{loads[i].name}' {figures.leak_ma(i, loads[i], circuit):.3f} mA" for i in staying]
    if cable:
        parts.append(f"cable run {cable:.3f} mA")
    reasons = []
    if leak_ma > budget:
        reasons.append(
            f"the loads that must stay and its cable need {leak_ma:.3f} mA ({', '.join(parts)}), above "
            f"its budget of {budget:.3f} mA"
        )
    if amps_a > capacity + CURRENT_TOLERANCE_A:
        amp_parts = ", ".join(f"'{loads[i].name}' {figures.amps_a(loads[i], circuit):.1f} A" for i in staying)
        reasons.append(
            f"the loads that must stay draw {amps_a:.1f} A ({amp_parts}), above {factor:g} × "
            f"{circuit.rating_a:g} A = {capacity:.1f} A"
        )
    return Blocker(
        circuit.circuit_id,
        tuple(loads[i].name for i in staying),
        f"{circuit.circuit_id}: {' and '.join(reasons)}; no plan can fix it while they stay there "
        f"(un-fix or split one of them, or measure them: the estimate may be pessimistic); it is left "
        f"as it is",
    )
