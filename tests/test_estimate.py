"""Per-load estimates and per-circuit sums, checked against independent hand computations."""

from __future__ import annotations

import math

import pytest

from leakbudget.catalogue import built_in
from leakbudget.checking import check
from leakbudget.devices import Status
from leakbudget.estimate import CATALOGUE, COMPUTED, MEASURED
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER


def two_pi_f_c_v_ma(c_nf: float, v: float, f: float) -> float:
    return 2 * math.pi * f * c_nf * 1e-9 * v * 1e3  # I = 2πfCV (physics), in mA


def run(make_workbook, circuits, loads, settings=None):
    sheets = {"Circuits": [CIRCUITS_HEADER, *circuits], "Loads": [LOADS_HEADER, *loads]}
    if settings:
        sheets["Settings"] = [["Setting", "Value"], *settings]
    return check(read_project(make_workbook(sheets)))


def test_measured_then_computed_then_catalogue(make_workbook):
    r = run(
        make_workbook,
        [["K1", "gfci-a", 120, 60, "single", 20, None, "Kitchen"]],
        [
            ["Measured", "K1", "kettle", 3, "0.1 mA", "4.7 nF", None, None, "Kitchen"],
            ["Computed", "K1", "kettle", 1, None, "4.7 nF", "10 Mohm", None, "Kitchen"],
            ["From catalogue", "K1", "kettle", 1, None, None, None, None, "Kitchen"],
        ],
    )
    measured, computed, catalogue = r.loads
    assert measured.basis == MEASURED and measured.leakage_ma == pytest.approx(0.3)
    assert computed.basis == COMPUTED
    # resistive 120 V / 10 MΩ = 0.012 mA in phase, capacitive 0.2126 mA leading: magnitude by Pythagoras
    assert computed.leakage_ma == pytest.approx(math.hypot(0.012, two_pi_f_c_v_ma(4.7, 120, 60)))
    kettle = built_in().appliances["kettle"]
    assert catalogue.basis == CATALOGUE
    assert kettle.reference_voltage_v == 230 and kettle.nature == "resistive"
    assert catalogue.leakage_ma == pytest.approx(kettle.typical_ma * 120 / 230)  # resistive part scales with V
    assert "rescaled from 230 V 50 Hz" in catalogue.source


def test_upper_basis_uses_the_upper_value(make_workbook):
    r = run(
        make_workbook,
        [["E1", "rcd-30", 230, 50, "single", 32, None, "Office"]],
        [["PC", "E1", "desktop-pc", 2, None, None, None, None, "Office"]],
        settings=[["Basis", "upper"]],
    )
    assert r.loads[0].leakage_ma == pytest.approx(2 * 3.5)  # IEC 62368-1 3.5 mA limit per unit
    assert "IEC 62368-1" in r.loads[0].source


def test_cable_run_matches_the_installation_guide_figure(make_workbook):
    # Electrical Installation Guide, RCD sensitivity chapter: about 1.5 mA per 100 m of line at 230 V 50 Hz.
    r = run(
        make_workbook,
        [["E1", "rcd-30", 230, 50, "single", 32, 100, "Office"]],
        [["Lamp", "E1", None, 1, "0 mA", None, None, None, "Office"]],
    )
    cable = [x for x in r.loads if x.load is None][0]
    assert cable.leakage_ma == pytest.approx(1.5, rel=1e-3)
    assert r.circuits[0].cable_ma == pytest.approx(1.5, rel=1e-3)


def test_cable_length_in_feet_setting(make_workbook):
    r = run(
        make_workbook,
        [["E1", "rcd-30", 230, 50, "single", 32, 328.084, "Office"]],
        [["Lamp", "E1", None, 1, "0 mA", None, None, None, "Office"]],
        settings=[["Length unit", "ft"]],
    )
    assert r.circuits[0].cable_ma == pytest.approx(1.5, rel=1e-3)  # 328.084 ft = 100 m


def test_split_phase_legs_cancel_in_the_phasor_sum_only(make_workbook):
    r = run(
        make_workbook,
        [["R1", "gfci-a", 120, 60, "split", 40, None, "Kitchen"]],
        [
            ["A", "R1", None, 1, None, "4.7 nF", None, "L1", "Kitchen"],
            ["B", "R1", None, 1, None, "4.7 nF", None, "L2", "Kitchen"],
        ],
    )
    c = r.circuits[0]
    assert c.leakage_ma == pytest.approx(2 * two_pi_f_c_v_ma(4.7, 120, 60))
    assert c.phasor_ma == pytest.approx(0.0, abs=1e-9)


def test_status_against_bs7671_budget_and_phasor_gate(make_workbook):
    # rcd-30: budget 0.30 × 30 mA = 9 mA (BS 7671:2018 reg. 531.3.2), no-trip 15 mA (IEC 61008-1).
    circuits = [["T1", "rcd-30", 230, 50, "three", 32, None, "Shop"]]
    loads = [[f"Load {leg}", "T1", None, 1, "3.5 mA", None, None, leg, "Shop"] for leg in ("L1", "L2", "L3")]
    arithmetic = run(make_workbook, circuits, loads)
    assert arithmetic.circuits[0].leakage_ma == pytest.approx(10.5)
    assert arithmetic.circuits[0].status is Status.OVER_BUDGET
    phasor = run(make_workbook, circuits, loads, settings=[["Sum", "phasor"]])
    assert phasor.circuits[0].phasor_ma == pytest.approx(0.0, abs=1e-9)  # balanced three-phase cancels
    assert phasor.circuits[0].status is Status.OK


def test_trip_risk_at_the_no_trip_level(make_workbook):
    r = run(
        make_workbook,
        [["K1", "gfci-a", 120, 60, "single", 20, None, "Kitchen"]],
        [["Heater", "K1", None, 1, "4 mA", None, None, None, "Kitchen"]],
    )
    assert r.circuits[0].status is Status.TRIP_RISK  # UL 943: must not trip below 4 mA; at 4 mA it may
    assert not r.all_ok


def test_unplaced_loads_are_estimated_but_not_summed(make_workbook):
    r = run(
        make_workbook,
        [["K1", "gfci-a", 120, 60, "single", 20, None, "Kitchen"]],
        [["Loose", None, None, 1, "1 mA", None, None, None, "Kitchen"]],
    )
    assert r.circuits[0].leakage_ma == 0.0 and len(r.unplaced) == 1


def test_the_planner_estimates_a_load_on_another_supply_with_the_check_formula(make_workbook):
    # One estimate path: the planner's figure for a load on a candidate circuit comes from the check's own
    # function. Hand physics (I = 2πfCV): 4.7 nF is 0.2126 mA at 120 V 60 Hz and 0.3396 mA at 230 V 50 Hz
    # (the capacitive leakage worked example of the Electrical Installation Guide's RCD chapter, recomputed).
    from leakbudget.planner.build import Figures

    project = read_project(make_workbook())  # K1: 120 V 60 Hz gfci-a; E1: 230 V 50 Hz rcd-30
    result = check(project)
    figures = Figures(project, result.loads)
    k1, e1 = project.circuits
    filt, meter = project.loads
    assert figures.leak_ma(0, filt, k1) == result.loads[0].leakage_ma  # its own supply: the check's figure
    assert figures.leak_ma(0, filt, k1) == pytest.approx(2 * math.pi * 60 * 4.7e-9 * 120 * 1e3, rel=1e-12)
    assert figures.leak_ma(0, filt, e1) == pytest.approx(2 * math.pi * 50 * 4.7e-9 * 230 * 1e3, rel=1e-12)
    assert figures.leak_ma(0, filt, e1) == pytest.approx(0.3396, abs=5e-5)
    assert figures.leak_ma(1, meter, k1) == pytest.approx(2 * 0.75)  # a measured value holds on any supply


def test_the_ul_budget_is_a_modelling_choice_and_may_be_a_share_of_the_no_trip_level(make_workbook):
    # 30 % of a UL 943 Class A device's 6 mA trip level is an analogy with BS 7671:2018 reg. 531.3.2, not a US
    # rule; the alternative is a share of its 4 mA no-trip level (UL 943): 0.45 × 4 mA = 1.8 mA.
    from leakbudget.provenance import Kind

    circuits = [["K1", "gfci-a", 120, 60, "single", 20, None, "Kitchen"]]
    loads = [["Meter", "K1", None, 1, "1 mA", None, None, None, "Kitchen"]]
    default = run(make_workbook, circuits, loads).circuits[0]
    assert default.budget_ma == pytest.approx(1.8) and default.budget_source.kind is Kind.DEFAULT
    assert "modelling choice" in str(default.budget_source)
    share = run(make_workbook, circuits, loads, [["Budget of", "no-trip level"], ["Budget fraction", 0.45]])
    assert share.circuits[0].budget_ma == pytest.approx(0.45 * 4.0)
    assert "no-trip level" in str(share.circuits[0].budget_source)
