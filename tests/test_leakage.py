"""Leakage physics against independent computations (pint as the reference for units, numpy for phasors)."""

from __future__ import annotations

import cmath
import math

import numpy as np
import pint
import pytest

from leakbudget import leakage as phys

UREG = pint.UnitRegistry()


def independent_capacitive_ma(c_nf: float, v: float, f: float) -> float:
    """I = 2π f C V computed by pint from SI quantities, independently of leakbudget."""
    q = 2 * math.pi * UREG.Quantity(f, "Hz") * UREG.Quantity(c_nf, "nF") * UREG.Quantity(v, "V")
    return q.to("mA").magnitude


@pytest.mark.parametrize(
    ("c_nf", "v", "f", "expected_ma"),
    [
        (4.7, 120, 60, 0.2126),  # I = 2πfCV: 4.7 nF at 120 V 60 Hz (physics, textbook formula)
        (4.7, 230, 50, 0.3396),  # I = 2πfCV: 4.7 nF at 230 V 50 Hz
    ],
    ids=["2pi-f-C-V-4.7nF-120V-60Hz", "2pi-f-C-V-4.7nF-230V-50Hz"],
)
def test_capacitive_current_matches_independent_value(c_nf, v, f, expected_ma):
    got = float(phys.capacitive_current_ma(c_nf, v, f))
    assert got == pytest.approx(expected_ma, abs=5e-5)
    assert got == pytest.approx(independent_capacitive_ma(c_nf, v, f), rel=1e-12)


def test_resistive_current_is_ohms_law():  # Ohm's law I = V/R, computed by pint
    expected = (UREG.Quantity(230, "V") / UREG.Quantity(2, "megaohm")).to("mA").magnitude
    assert float(phys.resistive_current_ma(2.0, 230.0)) == pytest.approx(expected, rel=1e-12)
    assert expected == pytest.approx(0.115)


def test_arrays_give_the_same_as_scalars():
    c = np.array([1.0, 2.2, 4.7, 10.0])
    v = np.array([120.0, 230.0, 120.0, 277.0])
    f = np.array([60.0, 50.0, 60.0, 60.0])
    vector = phys.capacitive_current_ma(c, v, f)
    loop = [float(phys.capacitive_current_ma(ci, vi, fi)) for ci, vi, fi in zip(c, v, f)]
    np.testing.assert_allclose(vector, loop, rtol=1e-15)


def test_rescale_capacitive_with_v_times_f_and_resistive_with_v():
    # Capacitive leakage I = 2πfCV scales with V·f; resistive I = V/R scales with V (physics).
    r, c = phys.rescale(1.0, 1.0, 230.0, 50.0, 120.0, 60.0)
    assert float(c) == pytest.approx(independent_capacitive_ma(1.0, 120, 60) / independent_capacitive_ma(1.0, 230, 50))
    assert float(c) == pytest.approx(120 / 230 * 60 / 50)
    assert float(r) == pytest.approx(120 / 230)


def on(leg: str, system: str) -> complex:
    """The unit phasor of one line in a system's frame."""
    return phys.line_shares((leg,), system, 1.0, 1.0)[1]


def test_split_phase_equal_capacitive_leakage_cancels():
    # 120/240 V split phase: L1 and L2 are 180° apart, so equal leakage on each leg cancels (phasor physics).
    z = 1j * 0.5
    total = z * on("L1", "split") + z * on("L2", "split")
    assert abs(total) == pytest.approx(0.0, abs=1e-12)


def test_three_phase_balanced_cancels_and_two_phases_sum_to_one():
    # Three phases 120° apart: equal leakage on all three cancels; on two of them the sum has the size of one.
    z = 1j * 0.8
    three = sum(z * on(leg, "three") for leg in ("L1", "L2", "L3"))
    two = sum(z * on(leg, "three") for leg in ("L1", "L2"))
    assert abs(three) == pytest.approx(0.0, abs=1e-12)
    assert abs(two) == pytest.approx(0.8, rel=1e-12)
    # independent: numpy complex exponentials
    ref = abs(0.8 * (np.exp(1j * 0) + np.exp(-1j * 2 * np.pi / 3)))
    assert abs(two) == pytest.approx(ref, rel=1e-12)
    # a 120/208 V network circuit is two lines of that wye: the same 120°
    assert on("L2", "network") == pytest.approx(on("L2", "three"))


def test_line_to_line_load_counts_both_lines():
    # A figure per line to earth on L1-L2: the arithmetic sum counts both lines (2 ×); a symmetric load (50 % on
    # each) cancels on split phase (180°) and sums to one line's figure on a 120/208 V network (120°, physics).
    arithmetic, phasor = phys.line_shares(("L1", "L2"), "split", 1.0, 0.5)
    assert arithmetic == 2.0 and abs(phasor) == pytest.approx(0.0, abs=1e-12)
    arithmetic, phasor = phys.line_shares(("L1", "L2"), "network", 1.0, 0.5)
    assert arithmetic == 2.0 and abs(phasor) == pytest.approx(abs(1 + np.exp(-2j * np.pi / 3)), rel=1e-12)
    assert abs(phasor) == pytest.approx(1.0, rel=1e-12)
    # 60 % / 40 % on split phase leaves 1.2 − 0.8 = 0.4 of one line's figure; a total figure counts half per line
    assert abs(phys.line_shares(("L1", "L2"), "split", 1.0, 0.6)[1]) == pytest.approx(0.4, rel=1e-12)
    assert phys.line_shares(("L1", "L2"), "split", 0.5, 0.6) == (1.0, pytest.approx(0.2))


def test_line_to_line_voltage():
    # Split phase 120/240 V: 2 × 120; a wye (120/208 V, 230/400 V): √3 × line-to-neutral (IEC 60038 pairs).
    assert 120 * phys.line_to_line_factor("split") == 240
    assert 120 * phys.line_to_line_factor("network") == pytest.approx(208, abs=0.5)
    assert 230 * phys.line_to_line_factor("three") == pytest.approx(400, abs=2)  # 398.4 V; 400 V nominal


def test_phasor_and_arithmetic_sums_per_circuit():
    idx = np.array([0, 0, 1, 1, 1])
    ph = np.array([1j, -1j, 1j, cmath.rect(1, math.radians(90 - 120)), cmath.rect(1, math.radians(90 + 120))])
    mags = np.abs(ph)
    np.testing.assert_allclose(phys.arithmetic_sums(idx, mags, 2), [2.0, 3.0])
    np.testing.assert_allclose(np.abs(phys.phasor_sums(idx, ph, 2)), [0.0, 0.0], atol=1e-12)


@pytest.mark.parametrize(("leg", "system"), [("L2", "single"), ("L3", "split"), ("L4", "three"), ("L1-L1", "three")])
def test_legs_that_do_not_exist_are_refused(leg, system):
    with pytest.raises(ValueError, match="does not exist"):
        phys.parse_leg(leg, system)


def test_nature_split_keeps_magnitude():
    for nature in phys.NATURE_ANGLE_DEG:
        r, c = phys.split_by_nature(2.0, nature)
        assert math.hypot(r, c) == pytest.approx(2.0)


def test_a_vast_insulation_resistance_leaks_next_to_nothing_without_overflow():
    """V / R for R = 1e305 MΩ is 2.3e-306 mA at 230 V (arithmetic), with no overflow on the way (the megohms are
    never multiplied up to ohms first); 2 MΩ at 230 V is 0.115 mA (Ohm's law)."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert float(phys.resistive_current_ma(1e305, 230.0)) == pytest.approx(2.3e-306, rel=1e-12)
    assert float(phys.resistive_current_ma(2.0, 230.0)) == pytest.approx(0.115, rel=1e-12)
