"""The protection tree: every shared device sees everything downstream of it.

A Protection-sheet device protects several circuits of a board (a split-load board's RCD), other devices (a
time-delayed RCD at the origin of a TT installation) or some loads inside one circuit (a GFCI receptacle, a cord
set's own interrupting device). Each one sees the protective conductor current of everything below it, so
BS 7671:2018 reg. 531.3.2 applies to that accumulated total, not per circuit.

Per device:

* the arithmetic sum and the phasor sum of every load and cable run below it; a single-pole circuit's phasors are
  turned to the board line it takes (its ``Phase``: on a three-phase four-pole RCD, equal capacitive leakage on
  circuits of L1, L2 and L3 cancels; on split phase, L2 is 180° from L1). A device inside a circuit sees only the
  loads that name it, not the circuit's cable run (its downstream length is not known);
* budget = budget fraction × its trip level (or no-trip level, ``Budget of``), status as for circuits (the gate sum
  against the budget; each waveform's part against its own operating band for the no-trip level);
* the likelihood of a trip, from the same distributions as its circuits' (:mod:`leakbudget.risk`), and the
  circuits lost with it when it trips.

A circuit with no device of its own under a shared device is protected: it takes its nearest device's budget and
status, and its own sums are its share of that device's budget.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass, field

import numpy as np

from leakbudget import risk
from leakbudget.devices import Status, budget_ma, budget_source, smooth_dc_limit_ma, status
from leakbudget.estimate import CircuitResult, Estimate, LoadResult, device_trip_weight, load_waveform
from leakbudget.leakage import LEG_ANGLES_DEG
from leakbudget.model import Circuit, Project, SharedDevice
from leakbudget.provenance import Source
from leakbudget.risk import TripProbability


@dataclass
class DeviceResult:
    """One shared device's accumulated total, against its levels."""

    shared: SharedDevice
    circuits: list[str]  # every circuit below it, directly or through devices under it (sheet order)
    below: list[str]  # ids of the shared devices directly under it
    leakage_ma: float  # arithmetic sum of everything below [mA]
    phasor_ma: float  # magnitude of the phasor sum, each circuit turned to its board line [mA]
    gate_ma: float  # the sum that gates the budget (Sum setting) [mA]
    trip_equivalent_ma: float  # the gate sum with each waveform scaled by its operating band [mA]
    smooth_dc_ma: float
    budget_ma: float
    budget_source: Source
    status: Status
    headroom_used: float  # gate / budget
    largest: str | None  # the circuit (or load, inside a circuit) contributing most
    largest_ma: float
    load_count: int
    dc_blinded: bool = False
    risk: TripProbability | None = None
    lost: list[str] = field(default_factory=list)  # circuits that go dark when it trips

    @property
    def device_id(self) -> str:
        return self.shared.device_id


def board_rotation(circuit: Circuit, shared: SharedDevice) -> complex:
    """Unit phasor turning a circuit's own frame (its L1 at 0°) to the board device's: a single-pole circuit
    takes its ``Phase`` line of the device's system; a multi-pole circuit's L1 is the board's L1."""
    if circuit.system != "single":
        return 1.0 + 0j
    angle = LEG_ANGLES_DEG[shared.system].get(circuit.phase, 0.0)
    return cmath.exp(1j * math.radians(angle))


def chain(project: Project, start: str | None) -> list[SharedDevice]:
    """The shared device ``start`` and every device above it, nearest first."""
    by_id = {d.device_id.lower(): d for d in project.protection}
    out: list[SharedDevice] = []
    node = by_id.get(start.lower()) if start else None
    while node is not None:
        out.append(node)
        node = by_id.get(node.upstream_id.lower()) if node.upstream_id else None
    return out


def _seen_by(project: Project, r: LoadResult, circuits: dict[str, Circuit]) -> list[SharedDevice]:
    """The shared devices that see a placed load or cable run, nearest first."""
    assert r.circuit_id is not None
    circuit = circuits[r.circuit_id]
    inside = chain(project, r.load.protected_by) if r.load is not None and r.load.protected_by else []
    return inside[:1] + chain(project, circuit.protected_by)


def evaluate_tree(result: Estimate, samples: int = risk.SAMPLES_MAX) -> list[DeviceResult]:
    """Sum, judge and (with the check's Monte Carlo settings) assess every shared device; also gives circuits under
    a shared device but with none of their own that device's budget and status."""
    project = result.project
    if not project.protection:
        return []
    circuits = {c.circuit_id: c for c in project.circuits}
    devices = project.protection
    index = {d.device_id.lower(): i for i, d in enumerate(devices)}
    n = len(devices)
    arithmetic = np.zeros(n)
    phasor = np.zeros(n, dtype=complex)
    weighted = np.zeros(n)
    weighted_phasor = np.zeros(n, dtype=complex)
    smooth = np.zeros(n)
    counts = np.zeros(n, dtype=int)
    contributions: list[dict[str, float]] = [{} for _ in range(n)]
    members: list[list[str]] = [[] for _ in range(n)]
    placed = [r for r in result.loads if r.circuit_id is not None]
    rows: list[tuple[int, int, complex]] = []  # (row in placed, device index, coefficient factor)
    for k, r in enumerate(placed):
        circuit = circuits[r.circuit_id]  # type: ignore[index]
        waveform = load_waveform(r)
        for d in _seen_by(project, r, circuits):
            i = index[d.device_id.lower()]
            turn = board_rotation(circuit, d) if d.circuit_id is None else 1.0 + 0j
            weight = device_trip_weight(d.device, d.rcd_type, waveform)
            arithmetic[i] += r.leakage_ma
            phasor[i] += r.phasor_ma * turn
            weighted[i] += r.leakage_ma * weight
            weighted_phasor[i] += r.phasor_ma * turn * weight
            if waveform == "smooth-dc":
                smooth[i] += r.leakage_ma
            counts[i] += r.load is not None
            name = circuit.circuit_id if d.circuit_id is None else r.name
            contributions[i][name] = contributions[i].get(name, 0.0) + r.leakage_ma
            if circuit.circuit_id not in members[i]:
                members[i].append(circuit.circuit_id)
            rows.append((k, i, turn * weight))
    settings = project.settings
    fraction = settings.budget_fraction
    phasor_gate = settings.sum_rule == "phasor"
    out: list[DeviceResult] = []
    for i, d in enumerate(devices):
        dev = d.device
        gate = float(abs(phasor[i]) if phasor_gate else arithmetic[i])
        equivalent = float(abs(weighted_phasor[i]) if phasor_gate else weighted[i])
        budget = budget_ma(dev, fraction, settings.budget_of)
        state = status(dev, gate, budget)
        if equivalent >= dev.no_trip_ma:
            state = Status.TRIP_RISK
        largest = max(contributions[i].items(), key=lambda kv: kv[1], default=(None, 0.0))
        dc_limit = smooth_dc_limit_ma(d.rcd_type) if d.rcd_type else None
        order = [c.circuit_id for c in project.circuits if c.circuit_id in members[i]]
        out.append(
            DeviceResult(
                shared=d,
                circuits=order,
                below=[x.device_id for x in devices if x.upstream_id and x.upstream_id.lower() == d.device_id.lower()],
                leakage_ma=float(arithmetic[i]),
                phasor_ma=float(abs(phasor[i])),
                gate_ma=gate,
                trip_equivalent_ma=equivalent,
                smooth_dc_ma=float(smooth[i]),
                budget_ma=budget,
                budget_source=budget_source(dev, fraction, "Budget fraction" in settings.from_user, settings.budget_of),
                status=state,
                headroom_used=gate / budget if budget > 0 else math.nan,
                largest=largest[0],
                largest_ma=float(largest[1]),
                load_count=int(counts[i]),
                dc_blinded=dc_limit is not None and float(smooth[i]) > dc_limit,
                lost=order if d.circuit_id is None else [],
            )
        )
    _assess(result, out, placed, rows, samples)
    _mark_marginal(project, out)
    _protect_circuits(project, result.circuits, out)
    return out


def _assess(
    result: Estimate,
    devices: list[DeviceResult],
    placed: list[LoadResult],
    rows: list[tuple[int, int, complex]],
    samples: int,
) -> None:
    """Each device's trip likelihood: the distributions of everything below it (turned to its board line and
    weighted by its operating bands), with the check's samples and seed."""
    if not rows:
        return
    project = result.project
    params = risk.RiskParameters.from_settings(project.settings)
    index = project.circuit_index()
    circuit_of = [index[r.circuit_id.lower()] for r in placed]  # type: ignore[union-attr]
    keys = risk.circuit_streams(project)
    # Each row as its circuit's check drew it (stream, positions), so every device sums its circuits' own draws.
    distributions = risk.with_circuit_draws(
        circuit_of, [d._replace(stream=int(keys[c])) for c, d in zip(circuit_of, risk.distributions(placed, params))]
    )
    groups = [i for _, i, _ in rows]
    loads = [distributions[k]._replace(coefficient=distributions[k].coefficient * f) for k, _, f in rows]
    levels = [(d.shared.device.no_trip_ma, d.shared.device.trip_ma) for d in devices]
    probabilities = risk.group_trip_probabilities(
        groups, loads, len(devices), levels, sum_rule=risk.LIKELIHOOD_SUM, samples=samples, seed=params.seed
    )
    for d, p in zip(devices, probabilities):
        d.risk = p


def _mark_marginal(project: Project, devices: list[DeviceResult]) -> None:
    limit = float(project.settings["Switch-on limit"])
    for d in devices:
        if d.status is Status.OK and d.risk is not None and d.risk.switch_on > limit:
            d.status = Status.MARGINAL


def _protect_circuits(project: Project, circuits: list[CircuitResult], devices: list[DeviceResult]) -> None:
    """A circuit with no device of its own under a shared one is protected by its nearest: its budget, status and
    likelihood are that device's, and "used" is the circuit's share of that device's budget."""
    by_id = {d.device_id.lower(): d for d in devices}
    for c in circuits:
        if c.circuit.protected_by is None:
            continue
        nearest = by_id[c.circuit.protected_by.lower()]
        c.protected_by = nearest.device_id
        c.device_status = nearest.status
        if c.circuit.device.protected:
            continue
        c.budget_ma = nearest.budget_ma
        c.budget_source = Source(nearest.budget_source.kind, f"{nearest.device_id}: {nearest.budget_source.text}")
        c.status = nearest.status
        c.guarding_device = nearest.shared.device
        c.headroom_used = c.gate_ma / nearest.budget_ma if nearest.budget_ma > 0 else math.nan
        c.risk = nearest.risk
