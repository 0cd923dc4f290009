"""What a split plan must respect, stated once: used to build the planner's problem and to verify its answer.

- Leakage: by the check itself (:func:`leakbudget.estimate.check` on the planned project): every protected circuit
  within its budget (BS 7671:2018 reg. 531.3.2, 30 % of IΔn by default).
- Current: the ``Current rule`` (:mod:`leakbudget.planner.current`): a single plug load within 80 % of the rating,
  a dedicated appliance within its rating, the circuit's total after diversity (or every load at once). A load's
  current is its ``Current``, else ``Power`` ÷ the voltage it runs at, else the catalogue's typical power ÷ that
  voltage; the voltage is line-to-neutral for a one-leg load, 2 V (split phase) or √3 V (three phase) for a
  line-to-line load. Each load counts once however many conductors it uses (conservative for split- and
  three-phase circuits). A plan never leaves a circuit above both its limit and the total it carries today.
- Purpose: a plug load (or one whose connection is unknown) goes only on a ``sockets`` or ``mixed`` circuit, a
  luminaire only on a ``lighting`` or ``mixed`` one, other hard-wired equipment only on a ``mixed`` one; a
  ``dedicated`` circuit keeps its one appliance and takes nothing else.
- Rooms: a load goes only on a circuit that serves its room when both say.
- Legs: a load's leg (L1, L1-L2 …) must exist on the circuit's system.
- Groups: loads of one ``Group`` move together or not at all.
- Loads marked Stays (or named in ``--keep``), loads on unprotected or dedicated circuits and loads on circuits no
  plan can fix stay where they are; circuits named in ``--avoid`` take no load they do not carry already.

:func:`verify_plan` re-checks a finished plan from the planned project alone, without any solver state.
"""

from __future__ import annotations

import math
from typing import Protocol, TypeVar

from leakbudget.catalogue import Appliance
from leakbudget.checking import CheckResult
from leakbudget.devices import Status
from leakbudget.leakage import line_to_line_factor, parse_leg
from leakbudget.model import Circuit, Load, Project
from leakbudget.planner.current import CURRENT_TOLERANCE_A, HARD_WIRED, LUMINAIRE, PLUG, UNKNOWN, CurrentRule


class _Kind(Protocol):
    prototype: Circuit  # a new circuit of this kind, as the planner would add it


K = TypeVar("K", bound=_Kind)
CURRENT_GIVEN = "your Current value"
NO_CURRENT = "no Current, Power or catalogue power: counted as 0 A"


WITHIN_BUDGET = (Status.OK, Status.MARGINAL)  # marginal: within budget, its likelihood is the cap's business


def line_voltage_v(load: Load, circuit: Circuit) -> float:
    """Voltage the load runs at on ``circuit`` [V]: line-to-neutral, or line-to-line for a two-leg load."""
    if len(load.leg) < 2:
        return circuit.voltage_v
    return circuit.voltage_v * line_to_line_factor(circuit.system)


def load_current_a(load: Load, appliance: Appliance | None, circuit: Circuit) -> tuple[float, str]:
    """Current the load (all its units) draws on ``circuit`` [A], and where the figure comes from."""
    if load.current_a is not None:
        return load.current_a * load.quantity, CURRENT_GIVEN
    v = line_voltage_v(load, circuit)
    if load.power_w is not None:
        return load.power_w * load.quantity / v, f"computed: your Power ÷ {v:g} V"
    if appliance is not None and appliance.typical_power_w:
        rated = appliance.rated_voltage_v if appliance.line_to_line == (len(load.leg) == 2) else None
        v_used = rated or v
        return (
            appliance.typical_power_w * load.quantity / v_used,
            f"computed: catalogue '{appliance.key}' typical power {appliance.typical_power_w:g} W "
            f"(typical, from memory) ÷ {v_used:g} V" + (" (its rated voltage)" if rated else ""),
        )
    return 0.0, NO_CURRENT


def current_capacity_a(circuit: Circuit, load_factor: float) -> float:
    """Rating × load factor [A]; infinite when the circuit gives no rating."""
    return circuit.rating_a * load_factor if circuit.rating_a else math.inf


def room_key(room: str | None) -> str | None:
    """A room name for comparison: trimmed, lower case; None when blank."""
    return room.strip().lower() if room and room.strip() else None


def serves_room(circuit: Circuit, room: str | None) -> bool:
    """A circuit serves a room unless both say and differ (case-insensitive)."""
    key = room_key(room)
    if key is None or not circuit.rooms:
        return True
    return key in {room_key(r) for r in circuit.rooms}


def leg_fits(load: Load, circuit: Circuit) -> bool:
    try:
        parse_leg(load.leg_text, circuit.system)
    except ValueError:
        return False
    return True


# What each purpose takes (see the module's text); a new circuit for a kind of load gets the first purpose of its
# class, the purpose it is built for.
PURPOSE_TAKES = {
    "sockets": frozenset({PLUG, UNKNOWN}),
    "lighting": frozenset({LUMINAIRE}),
    "mixed": frozenset({PLUG, UNKNOWN, LUMINAIRE, HARD_WIRED}),
    "dedicated": frozenset(),
}
NEW_PURPOSE = {PLUG: "sockets", UNKNOWN: "sockets", LUMINAIRE: "lighting", HARD_WIRED: "mixed"}
KIND_WORDS = {
    PLUG: "a plug load",
    UNKNOWN: "a load of unknown connection (taken as a plug load)",
    LUMINAIRE: "a luminaire",
    HARD_WIRED: "hard-wired equipment",
}
PURPOSE_RULE = {
    PLUG: "plug loads go on sockets or mixed circuits",
    UNKNOWN: "a load whose connection is unknown goes on sockets or mixed circuits, like a plug load",
    LUMINAIRE: "luminaires go on lighting or mixed circuits",
    HARD_WIRED: "hard-wired equipment goes on mixed circuits (or a new circuit of its own)",
}


def load_kind(load: Load, appliance: Appliance | None, circuit: Circuit | None) -> str:
    """plug, luminaire, hard-wired or unknown: the catalogue's Luminaire flag or a load on a lighting circuit is a
    luminaire; else the Loads row's Connection, else the catalogue's."""
    if (appliance is not None and appliance.luminaire) or (circuit is not None and circuit.purpose == "lighting"):
        return LUMINAIRE
    connection = load.connection or (appliance.connection if appliance is not None else None)
    if connection == "plug":
        return PLUG
    if connection == "fixed":
        return HARD_WIRED
    return UNKNOWN


def purpose_takes(circuit: Circuit, kind: str) -> bool:
    return kind in PURPOSE_TAKES.get(circuit.purpose, PURPOSE_TAKES["mixed"])


def may_go_on(load: Load, circuit: Circuit, kind: str | None = None) -> bool:
    """A load may be put on a protected circuit that serves its room, has its leg and (``kind`` given) takes its
    kind of load."""
    return (
        circuit.device.protected
        and serves_room(circuit, load.room)
        and leg_fits(load, circuit)
        and (kind is None or purpose_takes(circuit, kind))
    )


def why_not(load: Load, circuit: Circuit, kind: str, avoided: bool = False) -> str | None:
    """Why the load may not be put on the circuit, in words (None when it may, leakage and current aside)."""
    if not circuit.device.protected:
        return f"{circuit.circuit_id} has no GFCI/RCD"
    if not serves_room(circuit, load.room):
        return f"{circuit.circuit_id} does not serve room '{load.room}'"
    if not leg_fits(load, circuit):
        return f"{circuit.circuit_id} ({circuit.system}) has no {load.leg_text} for its {load.leg_text} leg"
    if circuit.purpose == "dedicated":
        return f"{circuit.circuit_id} is a dedicated circuit (it keeps its one appliance)"
    if not purpose_takes(circuit, kind):
        return f"{circuit.circuit_id} is a {circuit.purpose} circuit ({PURPOSE_RULE[kind]})"
    if avoided:
        return f"{circuit.circuit_id} is named in --avoid"
    return None


class Eligibility:
    """Which of some circuits each load may go on: the answer of :func:`may_go_on`, from an index on rooms.

    ``usable`` are the indices (into ``circuits``) of the circuits loads may be put on; ``avoid`` those that take
    no load they do not carry already (``--avoid``); a load may always stay on the circuit it is on (``at``) when
    that is usable.
    """

    def __init__(self, circuits: list[Circuit], usable: list[int], avoid: set[int] | None = None) -> None:
        self.circuits = circuits
        self.usable = [j for j in usable if circuits[j].device.protected]
        self.usable_set = set(self.usable)
        self.avoid = avoid or set()
        self.by_room: dict[str, list[int]] = {}
        self.roomless: list[int] = []
        for j in self.usable:
            keys = {room_key(r) for r in circuits[j].rooms}
            if not keys - {None}:
                self.roomless.append(j)
            for k in keys:
                if k is not None:
                    self.by_room.setdefault(k, []).append(j)
        self._legs: dict[tuple[str, str], bool] = {}

    def serving(self, key: str | None) -> list[int]:
        """Circuits that name the room; if none does, those that name no room; every one for a roomless load."""
        if key is None:
            return list(self.usable)
        return list(self.by_room.get(key, [])) or list(self.roomless)

    def _leg(self, load: Load, j: int) -> bool:
        k = (load.leg_text, self.circuits[j].system)
        if k not in self._legs:
            self._legs[k] = leg_fits(load, self.circuits[j])
        return self._legs[k]

    def circuits_for(self, load: Load, at: int, kind: str = UNKNOWN) -> list[int]:
        """Indices of the circuits the load (of ``kind``) may go on (sorted)."""
        key = room_key(load.room)
        candidates = self.usable if key is None else sorted(self.by_room.get(key, []) + self.roomless)
        out = [
            j
            for j in candidates
            if j not in self.avoid and purpose_takes(self.circuits[j], kind) and self._leg(load, j)
        ]
        if at in self.usable_set and at not in out:
            out = sorted([*out, at])
        return out

    def kinds_for(self, load: Load, kinds: dict[tuple[str | None, str], K | None], kind: str = UNKNOWN) -> list[K]:
        """The new-circuit kinds the load may go on: its room's for its class of load (any room's for a roomless
        load)."""
        key = room_key(load.room)
        purpose = NEW_PURPOSE[kind]
        keys = [(key, purpose)] if key is not None else [k for k in kinds if k[1] == purpose]
        out: list[K] = []
        for k in keys:
            new = kinds.get(k)
            if new is not None and may_go_on(load, new.prototype, kind) and all(new is not o for o in out):
                out.append(new)
        return out


def verify_plan(
    before: Project,
    after: CheckResult,
    blocked: set[str],
    left_alone: set[int],
    avoid: frozenset[str] = frozenset(),
) -> list[str]:
    """Every broken rule of a planned project, in words (empty for a valid plan).

    ``after`` is the check of the planned project; ``blocked`` the ids of circuits reported as impossible to fix
    (they may stay over budget); ``left_alone`` the rows of loads reported as impossible to place or move; ``avoid``
    the lower-case ids of circuits that may take no new load.
    """
    planned = after.project
    rule = CurrentRule.from_settings(planned.settings)
    problems: list[str] = []
    circuits = {c.circuit_id: c for c in planned.circuits}
    circuits_before = {c.circuit_id: c for c in before.circuits}
    old = {(ld.row, ld.name): ld for ld in before.loads}
    for result in after.circuits:
        cid = result.circuit.circuit_id
        if result.circuit.device.protected and cid not in blocked and result.status not in WITHIN_BUDGET:
            problems.append(
                f"{cid} is {result.status.value} ({result.gate_ma:.4f} mA, budget {result.budget_ma:.4f} mA)"
            )
    amps_after: dict[str, list[float]] = {}
    amps_before: dict[str, float] = {}
    groups: dict[str, set[str | None]] = {}
    for load in planned.loads:
        prev = old.get((load.row, load.name))
        if prev is None:
            problems.append(f"load '{load.name}' (row {load.row}) is not in the workbook")
            continue
        appliance = planned.catalogue.appliances.get(load.appliance_key) if load.appliance_key else None
        if prev.circuit_id is not None:
            was = circuits_before[prev.circuit_id]
            amps_before[was.circuit_id] = amps_before.get(was.circuit_id, 0.0) + load_current_a(prev, appliance, was)[0]
        if load.group and prev.circuit_id is not None:
            groups.setdefault(load.group.strip().lower(), set()).add(load.circuit_id)
        if load.circuit_id is None:
            if load.row not in left_alone:
                problems.append(f"'{load.name}' (row {load.row}) is left without a circuit")
            continue
        circuit = circuits[load.circuit_id]
        amps = load_current_a(load, appliance, circuit)[0]
        amps_after.setdefault(circuit.circuit_id, []).append(amps)
        if load.circuit_id == prev.circuit_id:
            continue
        kind = load_kind(prev, appliance, circuits_before.get(prev.circuit_id or ""))
        if prev.circuit_id is not None:
            if load.stays:
                problems.append(f"load '{load.name}' marked Stays was moved")
            if not circuits[prev.circuit_id].device.protected:
                problems.append(f"'{load.name}' was moved off unprotected circuit {prev.circuit_id}")
            if circuits[prev.circuit_id].purpose == "dedicated":
                problems.append(f"'{load.name}' was moved off dedicated circuit {prev.circuit_id}")
            if prev.circuit_id in blocked or load.row in left_alone:
                problems.append(f"'{load.name}' was moved although it was to stay")
        built_for = circuit.circuit_id not in circuits_before and circuit.purpose == "dedicated" and kind == HARD_WIRED
        if (not may_go_on(load, circuit, kind) and not built_for) or circuit.circuit_id.lower() in avoid:
            problems.append(
                f"'{load.name}' was put on {circuit.circuit_id}: "
                f"{why_not(load, circuit, kind, circuit.circuit_id.lower() in avoid) or 'not allowed'}"
            )
        if kind == PLUG and amps > rule.plug_limit_a(circuit) + CURRENT_TOLERANCE_A:
            problems.append(
                f"plug load '{load.name}' ({amps:.2f} A) was put on {circuit.circuit_id}, above its plug limit"
            )
    for name, where in groups.items():
        if len(where) > 1:
            problems.append(f"the loads of group '{name}' were split over {', '.join(sorted(map(str, where)))}")
    for cid, currents in amps_after.items():
        circuit = circuits[cid]
        if not circuit.device.protected or cid in blocked:
            continue
        demand, limit = rule.demand_a(currents), rule.limit_a(circuit)
        worse = rule.strict or sum(currents) > amps_before.get(cid, 0.0) + CURRENT_TOLERANCE_A
        if demand > limit + CURRENT_TOLERANCE_A and worse:
            problems.append(f"{cid} draws {demand:.3f} A by the {rule.rule} current rule, above {limit:.3f} A")
    return problems
