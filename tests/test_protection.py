"""The protection tree: one device, many circuits (BS 7671:2018 reg. 531.3.2 on the accumulated total).

Hand computations beside each test; physics: I = 2πfCV, three-phase lines 120° apart (IEC 60038 supply systems).
"""

from __future__ import annotations

import json
import math

import pytest
from typer.testing import CliRunner

from leakbudget.checking import check
from leakbudget.cli import app
from leakbudget.devices import Status
from leakbudget.errors import WorkbookError
from leakbudget.workbook.read import read_project

CIRCUITS = [
    "Circuit",
    "Device",
    "Voltage",
    "Frequency",
    "System",
    "Rating",
    "Rooms",
    "Protected by",
    "Phase",
    "Purpose",
]
LOADS = ["Load", "Circuit", "Appliance", "Quantity", "Leakage", "Y capacitance", "Room", "Protected by"]
PROTECTION = ["Id", "Device", "RCD type", "Upstream", "Rating", "Board", "System", "Circuit"]


def uk_flat(make_workbook, extra_protection=(), circuits=None, loads=None, name="flat.xlsx"):
    """A split-load board: RCD1 (30 mA, Type A) over four circuits of an invented flat at 4 Tanner's Row."""
    sheets = {
        "Protection": [
            PROTECTION,
            ["RCD1", "rcd-30", "A", None, 63, "Consumer unit", "single", None],
            *extra_protection,
        ],
        "Circuits": [
            CIRCUITS,
            *(
                circuits
                or [
                    ["Ring kitchen", "none", 230, 50, "single", 32, "Kitchen", "RCD1", None, "sockets"],
                    ["Ring lounge", "none", 230, 50, "single", 32, "Lounge", "RCD1", None, "sockets"],
                    ["Lights", "none", 230, 50, "single", 6, None, "RCD1", None, "lighting"],
                    ["Shower", "none", 230, 50, "single", 40, "Bathroom", "RCD1", None, "dedicated"],
                ]
            ),
        ],
        "Loads": [
            LOADS,
            *(
                loads
                or [
                    ["Kitchen ring loads", "Ring kitchen", None, 1, "4.0 mA", None, "Kitchen", None],
                    ["Lounge ring loads", "Ring lounge", None, 1, "3.5 mA", None, "Lounge", None],
                    ["LED drivers", "Lights", None, 1, "1.8 mA", None, None, None],
                    ["Shower", "Shower", None, 1, "3.0 mA", None, "Bathroom", None],
                ]
            ),
        ],
    }
    return make_workbook(sheets, name)


def test_a_split_load_board_is_judged_on_its_rcds_total(make_workbook):
    result = check(read_project(uk_flat(make_workbook)))
    (rcd1,) = result.devices
    # hand: 4.0 + 3.5 + 1.8 + 3.0 = 12.3 mA against 0.30 × 30 = 9 mA (BS 7671:2018 reg. 531.3.2): 137 %
    assert rcd1.leakage_ma == pytest.approx(12.3) and rcd1.budget_ma == pytest.approx(9.0)
    assert rcd1.headroom_used == pytest.approx(12.3 / 9.0) and rcd1.status is Status.OVER_BUDGET
    assert rcd1.circuits == ["Ring kitchen", "Ring lounge", "Lights", "Shower"]
    # every circuit is protected (never "unprotected") and shows its device's status and its share of its budget
    for c in result.circuits:
        assert c.protected_by == "RCD1" and c.status is Status.OVER_BUDGET
    assert result.circuits[0].headroom_used == pytest.approx(4.0 / 9.0)
    assert not result.all_ok
    # measured values ±5 % (Meter accuracy): at most 12.3 × 1.05 = 12.9 mA, under the 15 mA no-trip level
    assert rcd1.risk is not None and rcd1.risk.dry == 0.0


def test_the_command_line_shows_the_board_and_exits_1(make_workbook):
    path = uk_flat(make_workbook)
    runner = CliRunner()
    shown = runner.invoke(app, ["check", str(path), "--no-write"], env={"COLUMNS": "120"})
    assert shown.exit_code == 1, shown.output
    assert "Shared devices" in shown.stdout and "RCD1 is over-budget: 12.30 mA" in " ".join(shown.stdout.split())
    doc = json.loads(runner.invoke(app, ["check", str(path), "--no-write", "--json"]).stdout)
    (device,) = doc["devices"]
    assert device["id"] == "RCD1" and device["leakage_ma"] == pytest.approx(12.3) and device["status"] == "over-budget"
    assert doc["circuits"][0]["protected_by"] == "RCD1" and doc["circuits"][2]["purpose"] == "lighting"


def test_a_workbook_without_a_protection_sheet_has_an_empty_devices_list(make_workbook):
    from tests.conftest import basic_sheets

    doc = json.loads(
        CliRunner().invoke(app, ["check", str(make_workbook(basic_sheets())), "--json", "--no-write"]).stdout
    )
    assert doc["devices"] == [] and "protected_by" not in doc["circuits"][0]


def test_a_four_pole_rcd_sees_three_phases_cancel(make_workbook):
    # Three circuits on L1, L2, L3 of a three-phase board, 10 nF each at 230 V 50 Hz: 2π·50·10 nF·230 V = 0.7226 mA
    # per circuit; arithmetic 3 × 0.7226; phasor 0 (three equal phasors 120° apart).
    circuits = [[f"C{k}", "none", 230, 50, "single", 16, None, "RCD4P", f"L{k}", "sockets"] for k in (1, 2, 3)]
    loads = [[f"Filter {k}", f"C{k}", None, 1, None, "10 nF", None, None] for k in (1, 2, 3)]
    path = uk_flat(make_workbook, [["RCD4P", "rcd-30", "A", None, 40, "Plant room", "three", None]], circuits, loads)
    result = check(read_project(path))
    four_pole = next(d for d in result.devices if d.device_id == "RCD4P")
    one = 2 * math.pi * 50 * 10e-9 * 230 * 1e3
    assert four_pole.leakage_ma == pytest.approx(3 * one) and four_pole.phasor_ma == pytest.approx(0.0, abs=1e-12)


def test_a_tt_board_sums_upwards(make_workbook):
    # A type S 100 mA RCD at the origin over RCD1 and RCD2 sees all four circuits; each 30 mA RCD its own two.
    extra = [
        ["MAIN", "rcd-100s", "A", None, 100, "Origin", "single", None],
        ["RCD2", "rcd-30", "A", "MAIN", 63, "Consumer unit", "single", None],
    ]
    circuits = [
        ["Ring kitchen", "none", 230, 50, "single", 32, "Kitchen", "RCD1", None, "sockets"],
        ["Lights up", "none", 230, 50, "single", 6, None, "RCD1", None, "lighting"],
        ["Ring lounge", "none", 230, 50, "single", 32, "Lounge", "RCD2", None, "sockets"],
        ["Lights down", "none", 230, 50, "single", 6, None, "RCD2", None, "lighting"],
    ]
    loads = [
        [f"L{i}", c[0], None, 1, f"{ma} mA", None, None, None]
        for i, (c, ma) in enumerate(zip(circuits, (4.0, 1.0, 3.5, 0.8)))
    ]
    path = make_workbook(
        {
            "Protection": [PROTECTION, ["RCD1", "rcd-30", "A", "MAIN", 63, "Consumer unit", "single", None], *extra],
            "Circuits": [CIRCUITS, *circuits],
            "Loads": [LOADS, *loads],
        },
        "tt.xlsx",
    )
    result = check(read_project(path))
    by_id = {d.device_id: d for d in result.devices}
    assert by_id["RCD1"].leakage_ma == pytest.approx(5.0) and by_id["RCD2"].leakage_ma == pytest.approx(4.3)
    assert by_id["MAIN"].leakage_ma == pytest.approx(9.3) and by_id["MAIN"].budget_ma == pytest.approx(30.0)
    assert sorted(by_id["MAIN"].below) == ["RCD1", "RCD2"]


def test_a_gfci_receptacle_protects_only_the_loads_below_it(make_workbook):
    # A US kitchen circuit with no breaker GFCI: a GFCI receptacle (GR1) feeds the counter outlets downstream;
    # the fridge upstream of it is not under it.
    path = make_workbook(
        {
            "Protection": [PROTECTION, ["GR1", "gfci-a", None, None, 20, None, "single", "K1"]],
            "Circuits": [CIRCUITS, ["K1", "none", 120, 60, "single", 20, "Kitchen", None, None, "sockets"]],
            "Loads": [
                LOADS,
                ["Toaster", "K1", None, 1, "0.3 mA", None, "Kitchen", "GR1"],
                ["Kettle", "K1", None, 1, "0.2 mA", None, "Kitchen", "GR1"],
                ["Fridge", "K1", None, 1, "0.5 mA", None, "Kitchen", None],
            ],
        },
        "kitchen.xlsx",
    )
    result = check(read_project(path))
    (gr1,) = result.devices
    assert gr1.leakage_ma == pytest.approx(0.5) and gr1.load_count == 2  # toaster and kettle only
    assert gr1.budget_ma == pytest.approx(1.8) and gr1.status is Status.OK
    assert result.circuits[0].status is Status.UNPROTECTED  # the fridge is not under any device


@pytest.mark.parametrize(
    ("change", "message"),
    [
        (lambda s: s["Circuits"][1].__setitem__(7, "RCD9"), "column 'Protected by', cell H2: 'RCD9' is not an Id"),
        (lambda s: s["Protection"][1].__setitem__(3, "RCD1"), "the Upstream ids go round in a circle"),
        (lambda s: s["Circuits"][1].__setitem__(8, "L2"), "RCD1 is a single device and carries no L2"),
    ],
    ids=["unknown-id", "cycle", "phase"],
)
def test_bad_trees_are_refused_in_one_sentence(make_workbook, change, message):
    from tests.conftest import write_workbook

    path = uk_flat(make_workbook)
    sheets = {
        "Protection": [PROTECTION, ["RCD1", "rcd-30", "A", None, 63, "Consumer unit", "single", None]],
        "Circuits": [CIRCUITS, ["Ring kitchen", "none", 230, 50, "single", 32, "Kitchen", "RCD1", None, "sockets"]],
        "Loads": [LOADS, ["Kitchen ring loads", "Ring kitchen", None, 1, "4.0 mA", None, "Kitchen", None]],
    }
    change(sheets)
    write_workbook(path, sheets)
    with pytest.raises(WorkbookError) as info:
        read_project(path)
    assert message in str(info.value)


def test_a_load_under_a_device_inside_another_circuit_is_refused(make_workbook):
    path = make_workbook(
        {
            "Protection": [PROTECTION, ["GR1", "gfci-a", None, None, 20, None, "single", "K1"]],
            "Circuits": [
                CIRCUITS,
                ["K1", "none", 120, 60, "single", 20, "Kitchen", None, None, None],
                ["K2", "none", 120, 60, "single", 20, "Kitchen", None, None, None],
            ],
            "Loads": [LOADS, ["Toaster", "K2", None, 1, "0.3 mA", None, "Kitchen", "GR1"]],
        },
        "k.xlsx",
    )
    with pytest.raises(WorkbookError, match="'GR1' sits inside circuit K1, not on this load's circuit"):
        read_project(path)


# ------------------------------------------------------------------------------------------ review on the tree


def tree_for_review(make_workbook):
    """A UK board that breaks every tree rule: a general-type 100 mA RCD over a 30 mA RCD (no selectivity), an
    RCBO under the 30 mA RCD (two general types in series), both lighting circuits under it (BS 7671 314.1),
    12.7 mA below it (over 9 mA, BS 7671 531.3.2; above 10 mA, 543.7) of which 7 mA smooth DC (Type A blinded)."""
    path = make_workbook(
        {
            "Protection": [
                PROTECTION,
                ["MAIN", "rcd-100", "A", None, 100, "Origin", "single", None],
                ["RCD1", "rcd-30", "A", "MAIN", 63, "Consumer unit", "single", None],
            ],
            "Circuits": [
                CIRCUITS,
                ["Lights up", "none", 230, 50, "single", 6, "Landing", "RCD1", None, "lighting"],
                ["Lights down", "none", 230, 50, "single", 6, "Lounge", "RCD1", None, "lighting"],
                ["Garage", "rcd-30", 230, 50, "single", 32, "Garage", "RCD1", None, "dedicated"],
            ],
            "Loads": [
                [*LOADS, "Waveform"],
                ["LEDs up", "Lights up", None, 1, "2.5 mA", None, "Landing", None, None],
                ["LEDs down", "Lights down", None, 1, "3.2 mA", None, "Lounge", None, None],
                ["EV point", "Garage", None, 1, "7 mA", None, "Garage", None, "smooth-dc"],
            ],
        },
        "board.xlsx",
    )
    from leakbudget.compliance.rules import review

    return review(read_project(path), "bs-7671")


def test_the_tree_rules(make_workbook):
    rv = tree_for_review(make_workbook)
    by_rule: dict[str, list] = {}
    for f in rv.findings:
        by_rule.setdefault(f.rule, []).append(f)
    # selectivity: MAIN (general 100 mA) over RCD1, and RCD1 over the Garage RCBO: neither is type S
    assert len(by_rule["selectivity"]) == 2 and all(f.severity.value == "warning" for f in by_rule["selectivity"])
    assert "536.4.1.4" in str(by_rule["selectivity"][0].source)
    (budget,) = [f for f in by_rule["device-budget"] if "RCD1" in f.message]
    assert budget.severity.value == "error" and "12.70 mA" in budget.message  # 2.5 + 3.2 + 7.0 over 9 mA
    assert "531.3.2" in str(budget.source)
    assert {f.message.split()[5].rstrip(":") for f in by_rule["high-integrity"]} == {"RCD1", "MAIN"}
    (division,) = by_rule["division"]
    assert "Lights up, Lights down" in division.message and "314.1" in str(division.source)
    assert any("RCD1" in f.message for f in by_rule["device-waveform"])  # 7 mA smooth DC under Type A


def test_a_type_s_rcd_over_30_ma_rcds_is_selective(make_workbook):
    path = make_workbook(
        {
            "Protection": [
                PROTECTION,
                ["MAIN", "rcd-100s", "A", None, 100, "Origin", "single", None],
                ["RCD1", "rcd-30", "A", "MAIN", 63, "Consumer unit", "single", None],
            ],
            "Circuits": [CIRCUITS, ["Ring", "none", 230, 50, "single", 32, "Lounge", "RCD1", None, "sockets"]],
            "Loads": [LOADS, ["Loads", "Ring", None, 1, "1 mA", None, "Lounge", None]],
        },
        "tt.xlsx",
    )
    from leakbudget.compliance.rules import review

    # type S 100 mA ≥ 3 × 30 mA (BS 7671 536.4.1.4 / IEC 60364-5-53, from memory): selective, no warning
    assert [f for f in review(read_project(path), "bs-7671").findings if f.rule == "selectivity"] == []


def test_the_report_has_a_section_per_shared_device(make_workbook, tmp_path):
    from leakbudget.api import report

    job = report(uk_flat(make_workbook), html=tmp_path / "flat.html")
    html = (tmp_path / "flat.html").read_text(encoding="utf-8")
    assert "Shared device RCD1" in html and 'id="device-RCD1"' in html
    assert "12.300" in html  # RCD1's total, as check computes it (4.0 + 3.5 + 1.8 + 3.0 mA)
    assert job.report.sections and any(s.title == "Shared device RCD1" for s in job.report.sections)


def test_a_device_sums_the_very_draws_its_circuits_were_judged_on(make_workbook):
    # Two rings with RCBOs of their own and a cooker circuit with none, all under RCD1. Independent reconstruction
    # with numpy: each circuit's Monte Carlo samples (risk.phasor_samples on that circuit's own loads, as check
    # drew them), summed sample by sample, must give the device's likelihood exactly (trip point uniform on
    # 15-30 mA, IEC 61008-1 for a 30 mA RCD), and two rings with identical loads must not share draws.
    import numpy as np

    from leakbudget import risk

    circuits = [
        ["Ring A", "rcd-30", 230, 50, "single", 32, "Kitchen", "RCD1", None, "sockets"],
        ["Ring B", "rcd-30", 230, 50, "single", 32, "Lounge", "RCD1", None, "sockets"],
        ["Cooker", "none", 230, 50, "single", 32, "Kitchen", "RCD1", None, "dedicated"],
    ]
    loads = [
        ["Vending A", "Ring A", "vending-machine", 4, None, None, "Kitchen", None],
        ["Vending B", "Ring B", "vending-machine", 4, None, None, "Lounge", None],
        ["Ovens", "Cooker", "wall-oven", 2, None, None, "Kitchen", None],
    ]
    result = check(read_project(uk_flat(make_workbook, circuits=circuits, loads=loads)))
    (rcd1,) = result.devices
    assert result.risk is not None and rcd1.risk is not None
    samples, seed = result.risk.samples, result.risk.seed
    params = risk.RiskParameters.from_settings(result.project.settings)
    groups, distributions = risk.circuit_distributions(result, params)
    per_circuit = [
        risk.phasor_samples([d for g, d in zip(groups, distributions) if g == k], samples=samples, seed=seed)
        for k in range(3)
    ]
    dry = sum(s[0] for s in per_circuit)
    switch_on = sum(s[1] for s in per_circuit)
    assert rcd1.risk.dry == pytest.approx(float(np.mean(risk.trip_point_cdf(np.abs(dry), 15.0, 30.0))), abs=1e-6)
    assert rcd1.risk.switch_on == pytest.approx(
        float(np.mean(risk.trip_point_cdf(np.abs(switch_on), 15.0, 30.0))), abs=1e-6
    )
    assert 0.01 < rcd1.risk.dry < 0.99  # a figure that tests something
    # each ring's own figure is its own samples against its own RCBO
    ring_a = result.circuits[0].risk
    assert ring_a is not None
    expected_a = float(np.mean(risk.trip_point_cdf(np.abs(per_circuit[0][0]), 15.0, 30.0)))
    assert ring_a.dry == pytest.approx(expected_a, abs=1e-6)
    # identical loads on two circuits under one device: independent draws (correlation 0 ± 1/√N), not shared ones
    correlation = np.corrcoef(np.abs(per_circuit[0][0]), np.abs(per_circuit[1][0]))[0, 1]
    assert abs(correlation) < 5 / math.sqrt(samples)
