"""Leakage physics: capacitive and resistive leakage, rescaling between supplies, phasor sums.

All functions take and return plain floats or numpy arrays with the unit in the name ([mA], [V], [Hz], [nF],
[MΩ]). A load's leakage is a phasor relative to its own line-to-earth voltage: the resistive part is in phase
(real), the capacitive part leads by 90° (imaginary). Physics, no source beyond the textbook formulas
I = 2π f C V and I = V / R.
"""

from __future__ import annotations

import cmath
import math
from functools import lru_cache

import numpy as np

# Phase angle of each line-to-earth voltage for each supply system [degrees].
# split: 120/240 V split-phase, the two halves of a centre-tapped winding, 180° apart; network: 120/208 V, two lines
# of a three-phase wye, 120° apart; three: all three lines of a wye.
LEG_ANGLES_DEG: dict[str, dict[str, float]] = {
    "single": {"L1": 0.0},
    "split": {"L1": 0.0, "L2": 180.0},
    "network": {"L1": 0.0, "L2": -120.0},
    "three": {"L1": 0.0, "L2": -120.0, "L3": 120.0},
}
SYSTEMS = tuple(LEG_ANGLES_DEG)

# Angle of a catalogue value's phasor relative to its line voltage, by the row's nature [degrees].
# "mixed" is taken as equal resistive and capacitive parts (a modelling assumption, stated in the results).
NATURE_ANGLE_DEG = {"capacitive": 90.0, "resistive": 0.0, "mixed": 45.0}


def capacitive_current_ma(capacitance_nf, voltage_v, frequency_hz):
    """Leakage through a capacitance to earth, I = 2π f C V [mA] (C in [nF], V in [V], f in [Hz])."""
    return 2.0 * math.pi * np.asarray(frequency_hz) * np.asarray(capacitance_nf) * 1e-9 * np.asarray(voltage_v) * 1e3


def resistive_current_ma(resistance_mohm, voltage_v):
    """Leakage through an insulation resistance to earth, I = V / R [mA] (R in [MΩ], V in [V])."""
    return np.asarray(voltage_v) / np.asarray(resistance_mohm) * 1e-3  # V / (R × 1e6 Ω) in mA, R never scaled up


def rescale(resistive_ma, capacitive_ma, from_voltage_v, from_frequency_hz, to_voltage_v, to_frequency_hz):
    """Rescale a leakage known at one supply to another: resistive part ∝ V, capacitive part ∝ V·f.

    Returns ``(resistive_ma, capacitive_ma)`` at the new supply.
    """
    v_ratio = np.asarray(to_voltage_v) / np.asarray(from_voltage_v)
    f_ratio = np.asarray(to_frequency_hz) / np.asarray(from_frequency_hz)
    return np.asarray(resistive_ma) * v_ratio, np.asarray(capacitive_ma) * v_ratio * f_ratio


def split_by_nature(magnitude_ma, nature: str) -> tuple[float, float]:
    """Split a leakage magnitude [mA] into (resistive, capacitive) parts by the nature of the leakage path."""
    angle = math.radians(NATURE_ANGLE_DEG[nature])
    return magnitude_ma * math.cos(angle), magnitude_ma * math.sin(angle)


@lru_cache(maxsize=1024)
def parse_leg(leg: str, system: str) -> tuple[str, ...]:
    """The line conductors a load sits on: 'L1' → ('L1',); 'L1-L2' → ('L1', 'L2'). Raises ValueError if the leg
    does not exist in the system (L3 on a split-phase circuit, L2 on a single-phase one)."""
    text = leg.strip().upper().replace(" ", "") or "L1"
    parts = tuple(p for p in text.replace("–", "-").split("-") if p)
    angles = LEG_ANGLES_DEG[system]
    bad = [p for p in parts if p not in angles]
    if bad or not parts or len(parts) > 2 or len(set(parts)) != len(parts):
        allowed = ", ".join(angles) + (" or " + "-".join(list(angles)[:2]) if len(angles) > 1 else "")
        raise ValueError(f"leg '{leg}' does not exist on a {system} circuit (use {allowed})")
    return parts


def line_to_line_factor(system: str) -> float:
    """Line-to-line voltage as a multiple of line-to-neutral: 2 on split-phase (120/240 V), √3 on a wye (120/208 V
    network, 230/400 V three-phase), 1 on a single-phase circuit [dimensionless]."""
    if system == "split":
        return 2.0
    return math.sqrt(3.0) if len(LEG_ANGLES_DEG[system]) > 1 else 1.0


@lru_cache(maxsize=4096)
def line_shares(legs: tuple[str, ...], system: str, share: float, first_line: float) -> tuple[float, complex]:
    """How a load's per-line leakage phasor counts: (arithmetic factor, phasor factor in the circuit's frame).

    A load on one line: (1, e^{jθ}), θ that line's angle. A line-to-line load: each of its two lines carries
    ``share`` of the figure (1 for a figure per line to earth, ½ for a figure that is the total of both lines),
    split ``first_line`` : 1 − ``first_line`` between them around that mean (a real appliance is not symmetric),
    so the arithmetic sum counts 2 × share and the phasor sum is share × (2·f·e^{jθ₁} + 2·(1 − f)·e^{jθ₂}).
    On split-phase (θ₂ = θ₁ + 180°) a symmetric load (f = ½) cancels; on a 120/208 V network (120° apart) it sums
    to the size of one line's share.
    """
    angles = LEG_ANGLES_DEG[system]
    first = cmath.exp(1j * math.radians(angles[legs[0]]))
    if len(legs) == 1:
        return 1.0, first
    second = cmath.exp(1j * math.radians(angles[legs[1]]))
    return 2.0 * share, share * (2.0 * first_line * first + 2.0 * (1.0 - first_line) * second)


def conductor_rotation_sum(system: str) -> complex:
    """Σ of the unit phasors of all line conductors of a system (cable leakage of a balanced run)."""
    return sum(cmath.exp(1j * math.radians(a)) for a in LEG_ANGLES_DEG[system].values())


def phasor_sums(circuit_index: np.ndarray, phasors: np.ndarray, n_circuits: int) -> np.ndarray:
    """Vector sum of complex leakage phasors [mA] per circuit index; returns complex array of length n."""
    real = np.bincount(circuit_index, weights=phasors.real, minlength=n_circuits)
    imag = np.bincount(circuit_index, weights=phasors.imag, minlength=n_circuits)
    return real + 1j * imag


def arithmetic_sums(circuit_index: np.ndarray, magnitudes_ma: np.ndarray, n_circuits: int) -> np.ndarray:
    """Arithmetic sum of leakage magnitudes [mA] per circuit index (the conservative figure)."""
    return np.bincount(circuit_index, weights=magnitudes_ma, minlength=n_circuits)
