"""What a split plan must respect, stated once: used to build the planner's problem and to verify its answer.

- Leakage: by the check itself (:func:`leakbudget.estimate.check` on the planned project): every protected circuit
  within its budget (BS 7671:2018 reg. 531.3.2, 30 % of IΔn by default).
- Current: on every protected circuit with a rating, Σ load current ≤ rating × the ``Load factor`` setting
  (default 0.8, common practice for continuous load), equality included (CURRENT_TOLERANCE_A absorbs rounding). A load's current is its ``Current``, else ``Power`` ÷ the
  voltage it runs at, else the catalogue's typical power ÷ that voltage; the voltage is line-to-neutral for a
  one-leg load, 2 V (split phase) or √3 V (three phase) for a line-to-line load. Each load counts once however
  many conductors it uses (conservative for split- and three-phase circuits).
- Rooms: a load goes only on a circuit that serves its room when both say.
- Legs: a load's leg (L1, L1-L2 …) must exist on the circuit's system.
- Loads marked Stays, loads on unprotected circuits and loads on circuits no plan can fix stay where they are.

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


class _Kind(Protocol):
    prototype: Circuit  # a new circuit of this kind, as the planner would add it


K = TypeVar("K", bound=_Kind)
CURRENT_TOLERANCE_A = 1e-3  # a sum within 1 mA above rating × load factor is at the limit (rounding, not load)
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


def may_go_on(load: Load, circuit: Circuit) -> bool:
    """A load may be put on a protected circuit that serves its room and has its leg."""
    return circuit.device.protected and serves_room(circuit, load.room) and leg_fits(load, circuit)


class Eligibility:
    """Which of some circuits each load may go on: the answer of :func:`may_go_on`, from an index on rooms.

    ``usable`` are the indices (into ``circuits``) of the circuits loads may be put on; a load may always stay on
    the circuit it is on (``at``) when that is usable.
    """

    def __init__(self, circuits: list[Circuit], usable: list[int]) -> None:
        self.circuits = circuits
        self.usable = [j for j in usable if circuits[j].device.protected]
        self.usable_set = set(self.usable)
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

    def circuits_for(self, load: Load, at: int) -> list[int]:
        """Indices of the circuits the load may go on (sorted)."""
        key = room_key(load.room)
        candidates = self.usable if key is None else sorted(self.by_room.get(key, []) + self.roomless)
        out = [j for j in candidates if self._leg(load, j)]
        if at in self.usable_set and at not in out:
            out = sorted([*out, at])
        return out

    def kinds_for(self, load: Load, kinds: dict[str | None, K | None]) -> list[K]:
        """The new-circuit kinds (by room key) the load may go on: its room's, or any kind for a roomless load."""
        key = room_key(load.room)
        keys = [key] if key is not None else list(kinds)
        out: list[K] = []
        for k in keys:
            kind = kinds.get(k)
            if kind is not None and may_go_on(load, kind.prototype) and all(kind is not o for o in out):
                out.append(kind)
        return out


def verify_plan(before: Project, after: CheckResult, blocked: set[str], left_alone: set[int]) -> list[str]:
    """Every broken rule of a planned project, in words (empty for a valid plan).

    ``after`` is the check of the planned project; ``blocked`` the ids of circuits reported as impossible to fix
    (they may stay over budget); ``left_alone`` the rows of loads reported as impossible to place or move.
    """
    planned = after.project
    problems: list[str] = []
    factor = float(planned.settings["Load factor"])
    circuits = {c.circuit_id: c for c in planned.circuits}
    old = {(ld.row, ld.name): ld for ld in before.loads}
    for result in after.circuits:
        cid = result.circuit.circuit_id
        if result.circuit.device.protected and cid not in blocked and result.status not in WITHIN_BUDGET:
            problems.append(
                f"{cid} is {result.status.value} ({result.gate_ma:.4f} mA, budget {result.budget_ma:.4f} mA)"
            )
    amps: dict[str, float] = {}
    for load in planned.loads:
        prev = old.get((load.row, load.name))
        if prev is None:
            problems.append(f"load '{load.name}' (row {load.row}) is not in the workbook")
            continue
        if load.circuit_id is None:
            if load.row not in left_alone:
                problems.append(f"'{load.name}' (row {load.row}) is left without a circuit")
            continue
        circuit = circuits[load.circuit_id]
        appliance = planned.catalogue.appliances.get(load.appliance_key) if load.appliance_key else None
        amps[circuit.circuit_id] = amps.get(circuit.circuit_id, 0.0) + load_current_a(load, appliance, circuit)[0]
        if load.circuit_id == prev.circuit_id:
            continue
        if prev.circuit_id is not None:
            if load.stays:
                problems.append(f"load '{load.name}' marked Stays was moved")
            if not circuits[prev.circuit_id].device.protected:
                problems.append(f"'{load.name}' was moved off unprotected circuit {prev.circuit_id}")
            if prev.circuit_id in blocked or load.row in left_alone:
                problems.append(f"'{load.name}' was moved although it was to stay")
        if not may_go_on(load, circuit):
            problems.append(
                f"'{load.name}' was put on {circuit.circuit_id}, which does not serve its room, lacks "
                f"its leg or is unprotected"
            )
    for cid, total in amps.items():
        circuit = circuits[cid]
        cap = current_capacity_a(circuit, factor)
        if circuit.device.protected and cid not in blocked and total > cap + CURRENT_TOLERANCE_A:
            problems.append(f"{cid} carries {total:.3f} A, above {cap:.3f} A")
    return problems
