"""Line-to-line loads (240 V on split phase, 208 V on a 120/208 V network), checked by hand.

Physics: I = 2πfCV per line to earth; split-phase lines are 180° apart, a wye's 120° apart (IEC 60038 supply
systems); a line-to-line load draws P / V_line-to-line.
"""

from __future__ import annotations

import cmath
import math

import pytest

from leakbudget.catalogue import built_in
from leakbudget.checking import check
from leakbudget.planner.rules import load_current_a
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER


def per_line_ma(c_nf: float, v: float, f: float) -> float:
    return 2 * math.pi * f * c_nf * 1e-9 * v * 1e3  # I = 2πfCV, in mA


def run(make_workbook, system: str, loads, settings=None):
    sheets = {
        "Circuits": [CIRCUITS_HEADER, ["K1", "gfci-a", 120, 60, system, 50, None, "Kitchen"]],
        "Loads": [LOADS_HEADER, *loads],
    }
    if settings:
        sheets["Settings"] = [["Setting", "Value"], *settings]
    return check(read_project(make_workbook(sheets)))


def test_a_240_v_range_counts_both_lines_and_draws_current_at_240_v(make_workbook):
    # Catalogue range: figures per line to earth at 120 V 60 Hz; a blank Leg on a split-phase circuit is L1-L2.
    row = built_in().appliances["range-electric"]
    assert row.line_to_line and row.leakage_per == "line"
    result = run(make_workbook, "split", [["Range", "K1", "range-electric", 1, None, None, None, None, "Kitchen"]])
    (r,) = [x for x in result.loads if x.load is not None]
    assert r.load.leg == ("L1", "L2")
    t, part = row.typical_ma, row.line_neutral_ma
    assert r.leakage_ma == pytest.approx(2 * t + part)  # both lines counted, plus the line-to-neutral parts
    # phasor: 60 % / 40 % on L1 / L2 (Line imbalance) of 2 × t, 180° apart, plus the parts on L1, at the row's angle
    assert abs(r.phasor_ma) == pytest.approx(2 * t * (0.6 - 0.4) + part)
    assert "line-to-line L1-L2" in r.source and "per line to earth" in r.source
    amps, text = load_current_a(r.load, row, result.project.circuits[0])
    assert amps == pytest.approx(row.typical_power_w / 240.0) and "÷ 240 V" in text  # 10 kW → 41.7 A, not 83 A


def test_y_capacitance_on_a_line_to_line_load_is_per_line(make_workbook):
    loads = [["Cooktop", "K1", None, 1, None, "10 nF", None, "L1-L2", "Kitchen"]]
    per_line = per_line_ma(10, 120, 60)  # 0.4524 mA
    split = run(make_workbook, "split", loads)
    assert split.circuits[0].leakage_ma == pytest.approx(2 * per_line)
    assert split.circuits[0].phasor_ma == pytest.approx(abs(per_line * (1.2 - 0.8)))  # 180° apart
    symmetric = run(make_workbook, "split", loads, [["Line imbalance", "50 %"]])
    assert symmetric.circuits[0].phasor_ma == pytest.approx(0.0, abs=1e-12)


def test_a_120_208_v_network_circuit(make_workbook):
    # Two lines of a wye, 120° apart: line-to-line 120 × √3 = 207.8 V; a symmetric pair sums to one line's figure.
    loads = [
        ["Cooktop", "K1", None, 1, None, "10 nF", None, "L1-L2", "Kitchen"],
        ["Oven", "K1", None, 1, None, None, None, "L1-L2", "Kitchen"],
    ]
    loads[1][4] = "1 mA"  # measured: the total of both lines, half on each
    loads[1][7] = "L1-L2"
    result = run(make_workbook, "network", loads, [["Line imbalance", "50 %"]])
    per_line = per_line_ma(10, 120, 60)
    l2 = cmath.exp(-2j * math.pi / 3)
    cooktop = 1j * per_line * (1 + l2)
    oven = 1j * 0.5 * (1 + l2)  # no catalogue row: capacitive
    assert result.circuits[0].leakage_ma == pytest.approx(2 * per_line + 1.0)
    assert result.circuits[0].phasor_ma == pytest.approx(abs(cooktop + oven))
    assert abs(cooktop) == pytest.approx(per_line)
    r = next(x for x in result.loads if x.name == "Oven")
    r.load.power_w = 5000
    amps, text = load_current_a(r.load, None, result.project.circuits[0])
    assert amps == pytest.approx(5000 / (120 * math.sqrt(3))) and "÷ 207.846 V" in text


def test_a_line_to_line_appliance_keeps_a_single_line_on_a_single_phase_circuit(make_workbook):
    result = run(make_workbook, "single", [["Range", "K1", "range-electric", 1, None, None, None, None, "Kitchen"]])
    assert result.loads[0].load.leg == ("L1",)


def test_the_phasor_moves_with_the_first_lines_share_as_stated(make_workbook):
    # imbalance_ma is ∂ phasor / ∂ share: the phasor at 70 % equals the one at 60 % plus 0.1 × imbalance_ma.
    loads = [["Cooktop", "K1", None, 2, None, "10 nF", None, "L1-L2", "Kitchen"]]
    at_60 = run(make_workbook, "split", loads).loads[0]
    at_70 = run(make_workbook, "split", loads, [["Line imbalance", "70 %"]]).loads[0]
    assert at_70.phasor_ma == pytest.approx(at_60.phasor_ma + 0.1 * at_60.imbalance_ma)
    assert abs(at_60.imbalance_ma) == pytest.approx(2 * 2 * per_line_ma(10, 120, 60) * 2)  # 2 units, |e1 − e2| = 2
