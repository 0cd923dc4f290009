"""Estimate each load's standing leakage and sum it per circuit.

Order of preference per load (the results say which was used):
1. ``Leakage`` given → measured (per unit, at the circuit's supply);
2. ``Y capacitance`` and/or ``Insulation resistance`` → computed, I = 2π f C V and I = V / R;
3. a ``Leakage`` measured on an identical unit (same ``Appliance`` and ``Model``) → measured, rescaled to this
   load's supply (:func:`stand_in_readings`);
4. catalogue row → typical or upper value (the ``Basis`` setting), rescaled from the row's reference supply
   (capacitive part ∝ V·f, resistive part ∝ V).
Times quantity. The cable run of each circuit adds its own computed line (capacitance to earth × length).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from leakbudget import leakage as phys
from leakbudget.catalogue import Appliance
from leakbudget.devices import (
    PULSATING_DC,
    SINE,
    SMOOTH_DC,
    WAVEFORMS,
    Device,
    Family,
    Status,
    budget_ma,
    budget_source,
    operating_band,
    smooth_dc_limit_ma,
    status,
)
from leakbudget.model import Circuit, Load, Project
from leakbudget.provenance import Source

if TYPE_CHECKING:
    from leakbudget.risk import TripProbability

MEASURED = "measured"
COMPUTED = "computed"
CATALOGUE = "catalogue"


@dataclass(slots=True)
class LoadResult:
    """One load's estimate (or a circuit's cable run, with ``load`` None)."""

    name: str
    circuit_id: str | None
    load: Load | None
    appliance: Appliance | None
    quantity: int
    per_unit_ma: float
    leakage_ma: float  # magnitude × quantity [mA]
    phasor_ma: complex  # × quantity, in the circuit's reference frame (line L1 voltage at 0°) [mA]
    basis: str  # measured / computed / catalogue
    source: str  # where the figure comes from, in words
    voltage_v: float
    frequency_hz: float
    measured_on: str | None = None  # the identical unit(s) whose Leakage reading this load takes
    # A line-to-line load's phasor moves by this per unit of its first line's share (∂ phasor_ma / ∂ Line imbalance,
    # × quantity): the likelihood draws the share; 0 for a load on one line [mA].
    imbalance_ma: complex = 0j


@dataclass(slots=True)
class CircuitResult:
    circuit: Circuit
    leakage_ma: float  # arithmetic sum incl. cable [mA]
    phasor_ma: float  # magnitude of the phasor sum incl. cable [mA]
    gate_ma: float  # the sum that gates the budget (Sum setting) [mA]
    cable_ma: float
    budget_ma: float
    budget_source: Source
    status: Status
    headroom_used: float  # gate / budget (1.0 = budget fully used); NaN when unprotected
    largest: str | None  # name of the largest contributor
    largest_ma: float
    load_count: int
    risk: TripProbability | None = None  # likelihood of a nuisance trip (None when unprotected)
    # The parts by waveform (arithmetic) and what the device's no-trip judgement sees of the gate sum: each part
    # scaled to sine by its operating band's lower limit (IEC 61008-1; Type A pulsating DC from 0.35 IΔn) [mA].
    pulsating_dc_ma: float = 0.0
    high_frequency_ma: float = 0.0
    smooth_dc_ma: float = 0.0
    trip_equivalent_ma: float = 0.0
    dc_blinded: bool = False  # smooth DC above what its RCD type operates with (BS 7671:2018 reg. 531.3.3 notes)
    protected_by: str | None = None  # the nearest shared device above it (Protection sheet)
    device_status: Status | None = None  # that device's status
    guarding_device: Device | None = None  # a circuit with no device of its own: the shared device judging it


@dataclass
class Estimate:
    """A project's estimate: every load's figure and every circuit's sums against its device's levels."""

    project: Project
    circuits: list[CircuitResult]
    loads: list[LoadResult]  # loads in sheet order, then cable lines


def _supply_text(v: float, f: float) -> str:
    return f"{v:g} V {f:g} Hz"


def _fallback_supply(project: Project, load: Load) -> tuple[float, float]:
    """Supply for an unplaced load: a circuit serving its room, else the first circuit, else 120 V 60 Hz."""
    if load.room:
        for c in project.circuits:
            if any(r.lower() == load.room.lower() for r in c.rooms):
                return c.voltage_v, c.frequency_hz
    if project.circuits:
        return project.circuits[0].voltage_v, project.circuits[0].frequency_hz
    return 120.0, 60.0


def cable_result(circuit: Circuit, project: Project) -> LoadResult | None:
    """The cable run's own computed line: one line conductor's C × length, for every line conductor."""
    if not circuit.cable_length_m:
        return None
    cable = project.catalogue.cables[circuit.cable_key]
    c_nf = cable.capacitance_pf_per_m * circuit.cable_length_m * 1e-3
    per_conductor = float(phys.capacitive_current_ma(c_nf, circuit.voltage_v, circuit.frequency_hz))
    n = len(phys.LEG_ANGLES_DEG[circuit.system])
    phasor = 1j * per_conductor * phys.conductor_rotation_sum(circuit.system)
    return LoadResult(
        name=f"cable run ({circuit.cable_length_m:.4g} m {cable.key})",
        circuit_id=circuit.circuit_id,
        load=None,
        appliance=None,
        quantity=n,
        per_unit_ma=per_conductor,
        leakage_ma=per_conductor * n,
        phasor_ma=phasor,
        basis=COMPUTED,
        source=(
            f"computed: 2πfCV per line conductor, {cable.capacitance_pf_per_m:g} pF/m × "
            f"{circuit.cable_length_m:.4g} m ({cable.source}) at {_supply_text(circuit.voltage_v, circuit.frequency_hz)}"
        ),
        voltage_v=circuit.voltage_v,
        frequency_hz=circuit.frequency_hz,
    )


def _catalogue_text(appliance: Appliance, basis: str, voltage_v: float, frequency_hz: float) -> str:
    value = appliance.upper_ma if basis == "upper" else appliance.typical_ma
    src = appliance.upper_source if basis == "upper" else appliance.typical_source
    text = f"catalogue '{appliance.key}' {basis} {value:g} mA: {src}"
    if (appliance.reference_voltage_v, appliance.reference_frequency_hz) != (voltage_v, frequency_hz):
        text += (
            f"; rescaled from {_supply_text(appliance.reference_voltage_v, appliance.reference_frequency_hz)}"
            f" ({appliance.nature})"
        )
        if appliance.waveform in NOT_MAINS_FREQUENCY and appliance.reference_frequency_hz != frequency_hz:
            text += f", with the voltage only ({appliance.waveform} leakage does not follow the mains frequency)"
    if appliance.origin != "built-in catalogue":
        text += f"; row from {appliance.origin}"
    return text


def _computed_text(load: Load, voltage_v: float, frequency_hz: float) -> str:
    parts = []
    if load.y_capacitance_nf is not None:
        parts.append(f"2πfCV, C = {load.y_capacitance_nf:g} nF")
    if load.insulation_resistance_mohm is not None:
        parts.append(f"V/R, R = {load.insulation_resistance_mohm:g} MΩ")
    return f"computed: {'; '.join(parts)} at {_supply_text(voltage_v, frequency_hz)}"


# Waveforms whose leakage does not follow the mains frequency: a drive's switching-frequency leakage and smooth DC
# scale with the voltage only (physics: neither flows through a capacitance at the mains frequency).
NOT_MAINS_FREQUENCY = ("high-frequency", "smooth-dc")


def _waveform(load: Load, appliance: Appliance | None) -> str:
    return load.waveform or (appliance.waveform if appliance is not None else "sine")


def _line_phasors(
    loads: Sequence[Load],
    appliances: Sequence[Appliance | None],
    voltage_v: np.ndarray,
    frequency_hz: np.ndarray,
    basis: str,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-unit leakage phasor of each load's figure at the given supply, relative to its own line voltage [mA],
    with which loads are measured and which computed (the rest are catalogue figures).

    Measured: the ``Leakage`` value, split into resistive and capacitive parts by the catalogue row's nature
    (capacitive without a row). Computed: I = 2πfCV for ``Y capacitance``, I = V/R for ``Insulation resistance``
    (per line to earth). Catalogue: the row's typical or upper value (``basis``), rescaled from the row's reference
    supply (capacitive part ∝ V·f, resistive part ∝ V; high-frequency and smooth-DC leakage ∝ V only). The real
    part is resistive (in phase), the imaginary part capacitive (leading by 90°).
    """
    nan = math.nan
    measured_ma = np.array([x.leakage_ma if x.leakage_ma is not None else nan for x in loads], dtype=float)
    y_cap_nf = np.array([x.y_capacitance_nf if x.y_capacitance_nf is not None else nan for x in loads], dtype=float)
    ins_mohm = np.array(
        [x.insulation_resistance_mohm if x.insulation_resistance_mohm is not None else nan for x in loads], dtype=float
    )
    angle = np.radians([phys.NATURE_ANGLE_DEG[a.nature] if a is not None else 90.0 for a in appliances])
    value_ma = np.array(
        [(a.upper_ma if basis == "upper" else a.typical_ma) if a is not None else 0.0 for a in appliances]
    )
    ref_v = np.array([a.reference_voltage_v if a is not None else 1.0 for a in appliances])
    ref_f = np.array([a.reference_frequency_hz if a is not None else 1.0 for a in appliances])
    mains = np.fromiter(
        (_waveform(x, a) not in NOT_MAINS_FREQUENCY for x, a in zip(loads, appliances)), dtype=bool, count=len(loads)
    )
    ref_f = np.where(mains, ref_f, frequency_hz)

    is_measured = ~np.isnan(measured_ma)
    is_computed = ~is_measured & (~np.isnan(y_cap_nf) | ~np.isnan(ins_mohm))
    cos, sin = np.cos(angle), np.sin(angle)
    with np.errstate(invalid="ignore", divide="ignore"):
        r_comp = np.nan_to_num(phys.resistive_current_ma(ins_mohm, voltage_v))
        c_comp = np.nan_to_num(phys.capacitive_current_ma(y_cap_nf, voltage_v, frequency_hz))
        r_cat, c_cat = phys.rescale(value_ma * cos, value_ma * sin, ref_v, ref_f, voltage_v, frequency_hz)
    resistive = np.where(is_measured, measured_ma * cos, np.where(is_computed, r_comp, r_cat))
    capacitive = np.where(is_measured, measured_ma * sin, np.where(is_computed, c_comp, c_cat))
    return resistive + 1j * capacitive, is_measured, is_computed


# A measured Leakage on a line-to-line load is the total of both lines (what an instrument on the appliance's
# protective conductor or its whole cord reads for the appliance); Y capacitance and insulation resistance are per
# line to earth; a catalogue row says which (its Leakage per column). The share of the figure each line carries:
SHARE_PER_LINE, SHARE_OF_TOTAL = 1.0, 0.5


def per_unit_leakage(
    loads: Sequence[Load],
    appliances: Sequence[Appliance | None],
    systems: Sequence[str],
    voltage_v: np.ndarray,
    frequency_hz: np.ndarray,
    basis: str,
    first_line: float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The one estimate formula: each load's per-unit leakage on its circuit, arithmetic [mA] and as a phasor in the
    circuit's frame (line L1 at 0°) [mA], with which loads are measured and which computed, and how a line-to-line
    load's phasor moves with its first line's share (∂ phasor / ∂ share) [mA].

    A load on one line: its figure (:func:`_line_phasors`) on that line. A line-to-line load: every line counts
    its share (:func:`leakbudget.leakage.line_shares`): the arithmetic sum both lines' shares, the phasor sum each
    share on its own line, ``first_line`` of the pair on the first (the Line imbalance setting); a catalogue row's
    line-to-neutral parts (a clock, a lamp, a 120 V motor) add on the first line.
    """
    line, is_measured, is_computed = _line_phasors(loads, appliances, voltage_v, frequency_hz, basis)
    n = len(loads)
    arithmetic_factor = np.ones(n)
    phasor_factor = np.ones(n, dtype=complex)
    first = np.ones(n, dtype=complex)
    imbalance_factor = np.zeros(n, dtype=complex)
    neutral_part = np.zeros(n)
    for i, (load, appliance, system) in enumerate(zip(loads, appliances, systems)):
        if len(load.leg) == 2:
            if is_measured[i]:
                share = SHARE_OF_TOTAL
            elif is_computed[i] or appliance is None or appliance.leakage_per == "line":
                share = SHARE_PER_LINE
            else:
                share = SHARE_OF_TOTAL
            if not (is_measured[i] or is_computed[i]) and appliance is not None and appliance.typical_ma > 0:
                neutral_part[i] = appliance.line_neutral_ma / appliance.typical_ma
        else:
            share = SHARE_PER_LINE
        arithmetic_factor[i], phasor_factor[i] = phys.line_shares(load.leg, system, share, first_line)
        first[i] = phys.line_shares(load.leg[:1], system, 1.0, 1.0)[1]
        if len(load.leg) == 2:
            imbalance_factor[i] = 2.0 * share * (first[i] - phys.line_shares(load.leg[1:], system, 1.0, 1.0)[1])
    neutral = line * neutral_part  # the row's line-to-neutral part, scaled with its value and supply like it
    arithmetic = np.abs(line) * arithmetic_factor + np.abs(neutral)
    phasor = line * phasor_factor + neutral * first
    return arithmetic, phasor, is_measured, is_computed, line * imbalance_factor


def _line_to_line_text(load: Load, appliance: Appliance | None, kind: str, first_line: float) -> str:
    """How a line-to-line load's figure was counted, for its source text ('' for a load on one line)."""
    if len(load.leg) != 2:
        return ""
    legs = "-".join(load.leg)
    if kind == MEASURED:
        how = "your Leakage is the total of both lines, half on each"
    elif kind == COMPUTED:
        how = "C and R are per line to earth, on each line"
    elif appliance is not None and appliance.leakage_per == "total":
        how = "the catalogue figure is the total of both lines, half on each"
    else:
        how = "the catalogue figure is per line to earth, on each line"
    text = (
        f"; line-to-line {legs}: {how}, every line counted in the arithmetic sum, {100 * first_line:g} % / "
        f"{100 * (1 - first_line):g} % on {load.leg[0]} / {load.leg[1]} in the phasor sum (Line imbalance)"
    )
    if kind == CATALOGUE and appliance is not None and appliance.line_neutral_ma > 0:
        text += f"; line-to-neutral parts {appliance.line_neutral_ma:g} mA on {load.leg[0]}"
    return text


def estimate(project: Project) -> list[LoadResult]:
    """Per-load estimates in sheet order, then one cable line per circuit with a cable length.

    Vectorised over loads with numpy (:func:`per_unit_leakage`); a Leakage measured on one unit then stands for
    identical units without a figure of their own (:func:`stand_in_readings`).
    """
    loads = project.loads
    n = len(loads)
    circuits = {c.circuit_id: c for c in project.circuits}
    appliances = project.catalogue.appliances
    settings = project.settings
    basis = settings.basis
    first_line = float(settings["Line imbalance"])
    volts: list[float] = [0.0] * n
    hertz: list[float] = [0.0] * n
    systems: list[str] = ["three"] * n  # an unplaced load's legs were read as on a three-phase circuit
    apps: list[Appliance | None] = [None] * n
    for i, load in enumerate(loads):
        circuit = circuits.get(load.circuit_id) if load.circuit_id else None
        if circuit is not None:
            volts[i], hertz[i] = circuit.voltage_v, circuit.frequency_hz
            systems[i] = circuit.system
        else:
            volts[i], hertz[i] = _fallback_supply(project, load)
        if load.appliance_key:
            apps[i] = appliances.get(load.appliance_key)
    voltage, frequency = np.array(volts, dtype=float), np.array(hertz, dtype=float)
    quantity = np.array([x.quantity for x in loads], dtype=float)
    per_unit, per_unit_phasor, is_measured, is_computed, imbalance = per_unit_leakage(
        loads, apps, systems, voltage, frequency, basis, first_line
    )
    # Python floats and complexes, element by element, from whole arrays (numpy's scalars are slow to take apart)
    volts, hertz = voltage.tolist(), frequency.tolist()
    per_units, totals = per_unit.tolist(), (per_unit * quantity).tolist()
    phasors, imbalances = (per_unit_phasor * quantity).tolist(), (imbalance * quantity).tolist()
    measured, computed = is_measured.tolist(), is_computed.tolist()

    catalogue_texts: dict[tuple[str, float, float], str] = {}
    results: list[LoadResult] = []
    for i, load in enumerate(loads):
        v, f = volts[i], hertz[i]
        appliance = apps[i]
        if measured[i]:
            kind, text = MEASURED, "measured (your Leakage value)"
        elif computed[i]:
            kind, text = COMPUTED, _computed_text(load, v, f)
        else:
            assert appliance is not None  # the reader guarantees a leakage source
            key = (appliance.key, v, f)
            text = catalogue_texts.get(key) or catalogue_texts.setdefault(key, _catalogue_text(appliance, basis, v, f))
            kind = CATALOGUE
        if len(load.leg) == 2:
            text += _line_to_line_text(load, appliance, kind, first_line)
        results.append(
            LoadResult(
                name=load.name,
                circuit_id=load.circuit_id,
                load=load,
                appliance=appliance,
                quantity=load.quantity,
                per_unit_ma=per_units[i],
                leakage_ma=totals[i],
                phasor_ma=complex(phasors[i]),
                basis=kind,
                source=text,
                voltage_v=v,
                frequency_hz=f,
                imbalance_ma=complex(imbalances[i]),
            )
        )
    for circuit in project.circuits:
        line = cable_result(circuit, project)
        if line is not None:
            results.append(line)
    stand_in_readings(project, results)
    return results


def leakage_on(load: Load, appliance: Appliance | None, circuit: Circuit, basis: str, first_line: float) -> float:
    """Arithmetic leakage of all the load's units if it were on ``circuit`` [mA], by :func:`per_unit_leakage`."""
    arithmetic, _, _, _, _ = per_unit_leakage(
        [load],
        [appliance],
        [circuit.system],
        np.array([circuit.voltage_v]),
        np.array([circuit.frequency_hz]),
        basis,
        first_line,
    )
    return float(arithmetic[0]) * load.quantity


def load_waveform(r: LoadResult) -> str:
    """A load's leakage waveform: its Waveform column, else its catalogue row's, else sine (cable runs: sine)."""
    load = r.load
    if load is None:
        return SINE
    if load.waveform:
        return load.waveform
    return r.appliance.waveform if r.appliance is not None else SINE


def trip_weight(circuit: Circuit, waveform: str) -> float:
    """How much a milliampere of ``waveform`` counts towards the circuit's device's no-trip level, relative to sine
    (:func:`device_trip_weight` of the circuit's own device and RCD type)."""
    return device_trip_weight(circuit.device, circuit.rcd_type, waveform)


def device_trip_weight(dev: Device, rcd_type: str | None, waveform: str) -> float:
    """How much a milliampere of ``waveform`` counts towards a device's no-trip level, relative to sine.

    An RCD of known type operates on each waveform within its own band (IEC 61008-1 / IEC 60755 / IEC 62423); the
    no-trip judgement scales each part to sine by the band's lower limit, 0.5 / low (Type A pulsating DC: 0.5 /
    0.35 = 1.43): conservative where the band is wider than the sine one. A waveform the type is not made for, an
    unknown type and other device families count as sine (1).
    """
    if waveform == SINE or dev.family is not Family.RCD or not rcd_type:
        return 1.0
    band = operating_band(rcd_type, waveform, dev.trip_ma)
    return 0.5 / band[0] if band is not None and band[0] > 0 else 1.0


def trip_weights(project: Project, loads: Sequence[LoadResult]) -> np.ndarray:
    """:func:`trip_weight` of every placed load and cable run (unplaced ones: 1)."""
    # Only an RCD of known type weighs a waveform other than 1: the loads of other circuits are passed over.
    circuits = {c.circuit_id: c for c in project.circuits if c.rcd_type and c.device.family is Family.RCD}
    cache: dict[tuple[str, str], float] = {}
    out = np.ones(len(loads))
    if not circuits:
        return out
    for i, r in enumerate(loads):
        if r.circuit_id not in circuits:
            continue
        key = (r.circuit_id, load_waveform(r))
        if key not in cache:
            cache[key] = trip_weight(circuits[r.circuit_id], key[1])
        out[i] = cache[key]
    return out


def evaluate(project: Project, loads: list[LoadResult]) -> list[CircuitResult]:
    """Sum the estimates per circuit (arithmetic and phasor) and compare with each device's levels: the budget
    with the gate sum, the no-trip level with the gate sum weighted by waveform (:func:`trip_weight`)."""
    index = project.circuit_index()
    n = len(project.circuits)
    placed = [r for r in loads if r.circuit_id is not None]
    idx = np.fromiter(
        (index[r.circuit_id.lower()] for r in loads if r.circuit_id is not None), dtype=np.int64, count=len(placed)
    )
    mags = np.fromiter((r.leakage_ma for r in placed), dtype=float, count=len(placed))
    phasors = np.fromiter((r.phasor_ma for r in placed), dtype=complex, count=len(placed))
    arithmetic = phys.arithmetic_sums(idx, mags, n)
    vector = np.abs(phys.phasor_sums(idx, phasors, n))
    weights = trip_weights(project, placed)
    weighted_arithmetic = phys.arithmetic_sums(idx, mags * weights, n)
    weighted_vector = np.abs(phys.phasor_sums(idx, phasors * weights, n))
    code = {w: k for k, w in enumerate(WAVEFORMS)}
    waves = np.fromiter((code[load_waveform(r)] for r in placed), dtype=np.int64, count=len(placed))
    by_wave = {w: phys.arithmetic_sums(idx[waves == k], mags[waves == k], n) for k, w in enumerate(WAVEFORMS)}
    counts = np.bincount(idx, minlength=n)
    cable = np.zeros(n)
    largest: list[tuple[float, str | None]] = [(-1.0, None)] * n
    for i, r in zip(idx.tolist(), placed):
        if r.load is None:
            cable[i] += r.leakage_ma
            counts[i] -= 1
        if r.leakage_ma > largest[i][0]:
            largest[i] = (r.leakage_ma, r.name)
    settings = project.settings
    fraction = settings.budget_fraction
    phasor_gate = settings.sum_rule == "phasor"
    results: list[CircuitResult] = []
    for i, circuit in enumerate(project.circuits):
        dev = circuit.device
        gate = float(vector[i] if phasor_gate else arithmetic[i])
        equivalent = float(weighted_vector[i] if phasor_gate else weighted_arithmetic[i])
        budget = budget_ma(dev, fraction, settings.budget_of) if dev.protected else math.nan
        dc_limit = smooth_dc_limit_ma(circuit.rcd_type) if circuit.rcd_type and dev.family is Family.RCD else None
        smooth = float(by_wave[SMOOTH_DC][i])
        state = status(dev, gate, budget)
        if dev.protected and equivalent >= dev.no_trip_ma:
            state = Status.TRIP_RISK  # a non-sine part reaches the no-trip level of its own band
        results.append(
            CircuitResult(
                circuit=circuit,
                leakage_ma=float(arithmetic[i]),
                phasor_ma=float(vector[i]),
                gate_ma=gate,
                cable_ma=float(cable[i]),
                budget_ma=budget,
                budget_source=budget_source(dev, fraction, "Budget fraction" in settings.from_user, settings.budget_of),
                status=state,
                headroom_used=gate / budget if dev.protected and budget > 0 else math.nan,
                largest=largest[i][1],
                largest_ma=max(largest[i][0], 0.0),
                load_count=int(counts[i]),
                pulsating_dc_ma=float(by_wave[PULSATING_DC][i]),
                high_frequency_ma=float(by_wave["high-frequency"][i]),
                smooth_dc_ma=smooth,
                trip_equivalent_ma=equivalent,
                dc_blinded=dc_limit is not None and smooth > dc_limit,
            )
        )
    return results


# --- Identical units -------------------------------------------------------------------------------------------
def _unit_key(appliance_key: str | None, model: str | None) -> tuple[str, str] | None:
    if not model:
        return None
    return (appliance_key or "", model.strip().lower())


def stand_in_readings(project: Project, results: list[LoadResult]) -> None:
    """Give loads without a figure of their own the Leakage measured on an identical unit (same key and model).

    Changes ``results`` in place: basis becomes measured, ``measured_on`` names the unit(s) measured.
    """
    measured: dict[tuple[str, str], list[LoadResult]] = {}
    for r in results:
        load = r.load
        if load is not None and load.leakage_ma is not None:
            key = _unit_key(load.appliance_key, load.model)
            if key is not None:
                measured.setdefault(key, []).append(r)
    if not measured:
        return
    circuits = {c.circuit_id: c for c in project.circuits}
    first_line = float(project.settings["Line imbalance"])
    for r in results:
        load = r.load
        key = _unit_key(load.appliance_key, load.model) if load is not None else None
        if load is None or r.basis != CATALOGUE or key not in measured:
            continue
        nature = r.appliance.nature if r.appliance is not None else "capacitive"
        per_unit = 0j
        for m in measured[key]:
            res, cap = phys.split_by_nature(m.load.leakage_ma, nature)  # type: ignore[union-attr]
            res, cap = phys.rescale(res, cap, m.voltage_v, m.frequency_hz, r.voltage_v, r.frequency_hz)
            per_unit += complex(float(res), float(cap)) / len(measured[key])
        circuit = circuits.get(load.circuit_id) if load.circuit_id else None
        share = SHARE_OF_TOTAL if len(load.leg) == 2 else SHARE_PER_LINE  # a measured Leakage's rule
        arithmetic_factor, phasor_factor = phys.line_shares(
            load.leg, circuit.system if circuit else "three", share, first_line
        )
        units = ", ".join(f"'{m.name}' (Loads row {m.load.row})" for m in measured[key])  # type: ignore[union-attr]
        values = ", ".join(
            f"{m.load.leakage_ma:g} mA at {m.voltage_v:g} V {m.frequency_hz:g} Hz"  # type: ignore[union-attr]
            for m in measured[key]
        )
        r.per_unit_ma = abs(per_unit) * arithmetic_factor
        r.leakage_ma = r.per_unit_ma * r.quantity
        r.phasor_ma = per_unit * phasor_factor * r.quantity
        if len(load.leg) == 2:
            second = phys.line_shares(load.leg[1:], circuit.system if circuit else "three", 1.0, 1.0)[1]
            first = phys.line_shares(load.leg[:1], circuit.system if circuit else "three", 1.0, 1.0)[1]
            r.imbalance_ma = per_unit * 2.0 * share * (first - second) * r.quantity
        r.basis = MEASURED
        r.measured_on = units
        mean = "mean of the readings on" if len(measured[key]) > 1 else "reading on"
        r.source = (
            f"measured on an identical unit: {mean} {units}, same appliance '{load.appliance_key or '-'}' "
            f"and model '{load.model}' ({values})"
        )
        if (measured[key][0].voltage_v, measured[key][0].frequency_hz) != (r.voltage_v, r.frequency_hz):
            r.source += f"; rescaled to {r.voltage_v:g} V {r.frequency_hz:g} Hz ({nature})"
