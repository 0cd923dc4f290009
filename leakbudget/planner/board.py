"""The board plan: move whole circuits between the shared devices of one board, or give a circuit a device of its
own, so that every shared device is within its budget.

On a dual-RCD board the usual cure for an over-budget RCD is to move a circuit to the other RCD; where no move is
enough, a circuit gets an RCBO of its own (a new device, counted like a new circuit). Order of what is minimised:
new devices, then circuits moved. Constraints, on the arithmetic sum (the conservative figure, as for loads):

* every shared device of the board within its budget (budget fraction × its trip level);
* a single-pole circuit only under a device that carries its phase;
* a circuit with smooth-DC leakage only under a device that operates with it (Type B; Type A up to 6 mA, Type F
  up to 10 mA of smooth DC in total, BS 7671:2018 reg. 531.3.3 notes);
* where the board has two or more devices and two or more lighting circuits, the lighting circuits spread over at
  least two of them (BS 7671:2018 reg. 314.1; common practice on dual-RCD boards);
* an RCBO of its own only for a circuit within that RCBO's budget (the shared device's kind);
* never under a less sensitive device than the one it hangs under now (a larger trip level): moving a socket
  circuit from a 30 mA RCD to a 100 mA time-delayed one above it would cure the trips by taking away its
  additional protection (BS 7671:2018 reg. 411.3.3 asks for 30 mA on socket-outlets; never up-rate protection to
  cure trips).

* every shared device with a ``Rating`` within it by the current rule (:mod:`leakbudget.planner.current`): under
  ``diversity`` the largest circuit's current (itself after diversity) in full and the Diversity share of the
  others, in the sufficient linear form Σ I ≤ (rating − (1 − d) × I_max) / d; under ``all-on`` and ``strict`` every
  load at once within rating × Load factor; a device may keep what it carries today, except under ``strict``;
* under a trip-likelihood cap, a device's budget lowered where a plan left it above the cap
  (:mod:`leakbudget.planner.likelihood_cap`).

Exact: a small MILP (scipy's HiGHS), proven optimal.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from leakbudget.checking import CheckResult
from leakbudget.devices import budget_ma, device, smooth_dc_limit_ma
from leakbudget.estimate import load_waveform
from leakbudget.leakage import LEG_ANGLES_DEG
from leakbudget.model import Circuit, Project, SharedDevice
from leakbudget.planner.current import CURRENT_TOLERANCE_A, CurrentRule
from leakbudget.planner.rules import load_current_a
from leakbudget.protection import DeviceResult

NEW_DEVICE_COST = 1000  # one new device outweighs any number of moves


@dataclass(slots=True)
class CircuitMove:
    """Where one circuit hangs before and after the board plan (``to_id`` None with ``own_device``: an RCBO)."""

    circuit: str
    from_id: str | None
    to_id: str | None
    own_device: str | None = None  # the device key of a new RCBO of its own

    @property
    def moved(self) -> bool:
        return self.own_device is not None or self.from_id != self.to_id


@dataclass(slots=True)
class BoardPlan:
    moves: list[CircuitMove]  # every circuit under a shared device of a board that needed a plan
    feasible: bool
    optimal: bool
    problems: list[str]

    @property
    def circuit_moves(self) -> int:
        return sum(m.moved for m in self.moves)

    @property
    def new_devices(self) -> int:
        return sum(m.own_device is not None for m in self.moves)


def _board(d: SharedDevice) -> str:
    return (d.board or "").strip().lower()


def _may_hang_under(circuit: Circuit, d: SharedDevice) -> bool:
    return circuit.system != "single" or circuit.phase in LEG_ANGLES_DEG[d.system]


def _as_sensitive(target: SharedDevice, now: SharedDevice) -> bool:
    """Whether a circuit under ``now`` may move under ``target``: its trip level is no larger."""
    return target.device.trip_ma <= now.device.trip_ma


def device_limit_key(device_id: str) -> tuple[str, str | None]:
    """Key of a shared device in the planner's lowered budgets (the trip-likelihood cap)."""
    return "device", device_id.lower()


def circuit_current_a(project: Project, circuit: Circuit, rule: CurrentRule) -> float:
    """A circuit's current as a device above it counts it [A]: its own current by the rule (after diversity)."""
    currents = [
        load_current_a(ld, project.catalogue.appliances.get(ld.appliance_key or ""), circuit)[0]
        for ld in project.loads
        if ld.circuit_id == circuit.circuit_id
    ]
    return rule.demand_a(currents)


def plan_board(
    project: Project, result: CheckResult, limits_ma: dict[tuple[str, str | None], float] | None = None
) -> BoardPlan | None:
    """The board plan for ``result`` (a check of ``project``), or None when every shared device is within budget
    (``limits_ma``: budgets lowered by the trip-likelihood cap, :func:`device_limit_key`)."""
    limits_ma = limits_ma or {}

    def budget_of(d: DeviceResult) -> float:
        return min(d.budget_ma, limits_ma.get(device_limit_key(d.device_id), d.budget_ma))

    over = [d for d in result.devices if d.shared.circuit_id is None and d.gate_ma > budget_of(d)]
    if not over:
        return None
    settings = project.settings
    rule = CurrentRule.from_settings(settings)
    fraction, of = settings.budget_fraction, settings.budget_of
    devices = {d.device_id: d for d in result.devices if d.shared.circuit_id is None}
    circuits = {c.circuit.circuit_id: c for c in result.circuits}
    smooth = _smooth_dc(result)
    moves: list[CircuitMove] = []
    problems: list[str] = []
    optimal = True
    for board in sorted({_board(d.shared) for d in over}):
        # the devices of this board that circuits hang under directly (siblings may trade circuits)
        members = [d for d in devices.values() if _board(d.shared) == board]
        ids = [d.device_id for d in members]
        movable = [c for c in project.circuits if c.protected_by in ids]
        m = len(members)
        load = np.array([circuits[c.circuit_id].leakage_ma for c in movable])
        fixed = np.array([d.gate_ma for d in members])  # what each device carries now …
        for k, c in enumerate(movable):
            fixed[ids.index(c.protected_by or "")] -= load[k]  # … less the movable circuits under it
        budget = np.array([budget_of(d) for d in members])
        allowed = np.array(
            [
                [
                    _may_hang_under(c, d.shared)
                    and _dc_fits(smooth[c.circuit_id], d.shared)
                    and _as_sensitive(d.shared, devices[c.protected_by or ""].shared)
                    for d in members
                ]
                for c in movable
            ]
        ).reshape(len(movable), m)
        current = [ids.index(c.protected_by) for c in movable]  # type: ignore[arg-type]
        amps = np.array([circuit_current_a(project, c, rule) for c in movable])
        capacity = _current_capacity(members, allowed, amps, current, rule)
        own_budget = np.array([budget_ma(devices[c.protected_by].shared.device, fraction, of) for c in movable])  # type: ignore[index]
        rcbo_ok = load <= own_budget
        lighting = [k for k, c in enumerate(movable) if c.purpose == "lighting"]
        solved = _solve(
            load,
            fixed,
            budget,
            allowed,
            rcbo_ok,
            current,
            lighting if m >= 2 and len(lighting) >= 2 else [],
            amps,
            capacity,
        )
        if solved is None:
            problems.append(
                f"board '{board or 'main'}': no arrangement of its circuits under {', '.join(ids)}, even with "
                "RCBOs for circuits within their own budget, keeps every device within its budget and its rated "
                "current"
            )
            optimal = False
            continue
        for k, c in enumerate(movable):
            to, rcbo = solved[k]
            if rcbo:
                up = devices[c.protected_by].shared  # type: ignore[index]
                moves.append(CircuitMove(c.circuit_id, c.protected_by, up.upstream_id, up.device.key))
            else:
                moves.append(CircuitMove(c.circuit_id, c.protected_by, ids[to]))
    return BoardPlan(moves, not problems, optimal, problems)


def _current_capacity(
    members: list[DeviceResult], allowed: np.ndarray, amps: np.ndarray, current: list[int], rule: CurrentRule
) -> np.ndarray:
    """The most circuit current each device may carry [A] (infinite without a Rating): the rule's linear form
    with the largest circuit that may hang under it, or what it carries today (not under the strict rule)."""
    out = np.full(len(members), np.inf)
    on = np.asarray(current, dtype=np.int64)
    for k, d in enumerate(members):
        rating = d.shared.rating_a
        if not rating:
            continue
        if rule.all_on:
            linear = rating * rule.load_factor
        else:
            could = amps[allowed[:, k]] if len(amps) else np.zeros(0)
            biggest = float(could.max()) if could.size else 0.0
            linear = max((rating - (1.0 - rule.diversity) * biggest) / rule.diversity, 0.0)
        today = 0.0 if rule.strict else float(amps[on == k].sum()) if len(amps) else 0.0
        out[k] = max(linear, today) + CURRENT_TOLERANCE_A / 2
    return out


def _smooth_dc(result: CheckResult) -> dict[str, float]:
    out: dict[str, float] = {c.circuit.circuit_id: 0.0 for c in result.circuits}
    for r in result.loads:
        if r.circuit_id is not None and load_waveform(r) == "smooth-dc":
            out[r.circuit_id] += r.leakage_ma
    return out


def _dc_fits(smooth_ma: float, d: SharedDevice) -> bool:
    if smooth_ma <= 0.0 or not d.rcd_type:
        return True
    limit = smooth_dc_limit_ma(d.rcd_type)
    return limit is None or smooth_ma <= limit


def _add(rows: list[np.ndarray], lo: list[float], hi: list[float], a: np.ndarray, low: float, high: float) -> None:
    rows.append(a)
    lo.append(low)
    hi.append(high)


def _solve(
    load: np.ndarray,
    fixed: np.ndarray,
    budget: np.ndarray,
    allowed: np.ndarray,
    rcbo_ok: np.ndarray,
    current: list[int],
    lighting: list[int],
    amps: np.ndarray | None = None,
    capacity: np.ndarray | None = None,
) -> list[tuple[int, bool]] | None:
    """Exact MILP: x[c, d] (circuit c under device d), r[c] (an RCBO of its own), y[d] (d carries lighting).
    Minimise NEW_DEVICE_COST × Σr + Σ moves; None when infeasible."""
    from scipy.optimize import Bounds, LinearConstraint, milp

    n, m = allowed.shape
    nx, nr, ny = n * m, n, m
    size = nx + nr + ny

    def x(c: int, d: int) -> int:
        return c * m + d

    cost = np.zeros(size)
    for c in range(n):
        for d in range(m):
            cost[x(c, d)] = 0.0 if d == current[c] else 1.0
        cost[nx + c] = NEW_DEVICE_COST
    rows: list[np.ndarray] = []
    lo: list[float] = []
    hi: list[float] = []
    for c in range(n):  # each circuit: one device, or an RCBO of its own
        a = np.zeros(size)
        a[[x(c, d) for d in range(m)]] = 1.0
        a[nx + c] = 1.0
        _add(rows, lo, hi, a, 1.0, 1.0)
    for d in range(m):  # every device within its budget
        a = np.zeros(size)
        for c in range(n):
            a[x(c, d)] = load[c]
        _add(rows, lo, hi, a, -np.inf, budget[d] - fixed[d])
    if amps is not None and capacity is not None:  # every device with a rating within it
        for d in range(m):
            if np.isfinite(capacity[d]):
                a = np.zeros(size)
                for c in range(n):
                    a[x(c, d)] = amps[c]
                _add(rows, lo, hi, a, -np.inf, float(capacity[d]))
    if lighting:  # lighting over at least two devices
        for d in range(m):
            a = np.zeros(size)
            a[[x(c, d) for c in lighting]] = 1.0
            a[nx + nr + d] = -1.0
            _add(rows, lo, hi, a, 0.0, np.inf)
        a = np.zeros(size)
        a[nx + nr :] = 1.0
        _add(rows, lo, hi, a, 2.0, np.inf)
    upper = np.ones(size)
    for c in range(n):
        for d in range(m):
            if not allowed[c, d]:
                upper[x(c, d)] = 0.0
        if not rcbo_ok[c]:
            upper[nx + c] = 0.0
    if not lighting:
        upper[nx + nr :] = 0.0
    res = milp(
        cost,
        constraints=LinearConstraint(np.array(rows), np.array(lo), np.array(hi)),
        integrality=np.ones(size),
        bounds=Bounds(np.zeros(size), upper),
    )
    if res.status != 0 or res.x is None:
        return None
    sol = np.round(res.x).astype(int)
    out = []
    for c in range(n):
        if sol[nx + c]:
            out.append((current[c], True))
        else:
            out.append((next(d for d in range(m) if sol[x(c, d)]), False))
    return out


def apply_board(project: Project, plan: BoardPlan) -> Project:
    """A copy of ``project`` with the board plan applied (circuits re-hung; RCBOs of their own)."""
    moves = {m.circuit: m for m in plan.moves}
    circuits = []
    for c in project.circuits:
        move = moves.get(c.circuit_id)
        if move is None or not move.moved:
            circuits.append(c)
        elif move.own_device is not None:
            shared = next(d for d in project.protection if d.device_id == move.from_id)
            circuits.append(
                dataclasses.replace(
                    c, device=device(move.own_device), rcd_type=shared.rcd_type, protected_by=move.to_id
                )
            )
        else:
            circuits.append(dataclasses.replace(c, protected_by=move.to_id))
    return dataclasses.replace(project, circuits=circuits)
