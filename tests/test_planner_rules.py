"""What a split plan must respect: current figures, the room index against the plain rule, and the verifier
catching each kind of broken plan."""

from __future__ import annotations

import dataclasses
import math
import random

import pytest

from leakbudget.checking import check
from leakbudget.devices import device
from leakbudget.leakage import parse_leg
from leakbudget.model import Circuit, Load
from leakbudget.planner.rules import Eligibility, line_voltage_v, load_current_a, may_go_on, verify_plan
from leakbudget.planner.split import plan_split
from leakbudget.provenance import Source
from leakbudget.workbook.read import read_project
from tests.test_planner import kitchen, sheets


def circuit(cid: str, rooms: tuple[str, ...], system: str = "single", dev: str = "gfci-a") -> Circuit:
    return Circuit(
        circuit_id=cid,
        device=device(dev),
        rcd_type=None,
        voltage_v=120.0,
        frequency_hz=60.0,
        supply_source=Source.measured("test"),
        system=system,
        rating_a=20.0,
        cable_length_m=None,
        cable_key="generic",
        rooms=rooms,
        note=None,
        row=2,
    )


def load(
    room: str | None, leg: str = "L1", power_w: float | None = None, current_a: float | None = None, quantity: int = 1
) -> Load:
    return Load(
        name="x",
        circuit_id=None,
        appliance_key=None,
        quantity=quantity,
        leakage_ma=0.1,
        y_capacitance_nf=None,
        insulation_resistance_mohm=None,
        power_w=power_w,
        current_a=current_a,
        leg=parse_leg(leg, "three"),
        leg_text=leg,
        room=room,
        stays=False,
        note=None,
        row=2,
    )


def test_current_figures():
    # I = P / V: 1200 W at 120 V is 10 A; a 240 V line-to-line load on a 120/240 V split-phase circuit runs at
    # 2 × 120 V; on a 230 V three-phase circuit at sqrt(3) × 230 V = 398.4 V.
    single = circuit("C", ())
    assert load_current_a(load(None, power_w=1200), None, single) == (10.0, "computed: your Power ÷ 120 V")
    assert line_voltage_v(load(None, "L1-L2"), circuit("S", (), "split")) == 240.0
    three = dataclasses.replace(circuit("T", (), "three"), voltage_v=230.0)
    assert line_voltage_v(load(None, "L1-L2"), three) == pytest.approx(230 * math.sqrt(3))
    assert load_current_a(load(None, current_a=2.5, quantity=3), None, single)[0] == 7.5
    assert load_current_a(load(None), None, single)[0] == 0.0


@pytest.mark.parametrize("seed", range(10))
def test_room_index_gives_the_plain_rule(seed):
    rng = random.Random(seed)
    rooms = ["Kitchen", "Bath", "Garage", "kitchen "]
    circuits = [
        circuit(
            f"C{k}",
            tuple(rng.sample(rooms, rng.randint(0, 2))),
            rng.choice(["single", "split"]),
            rng.choice(["gfci-a", "none"]),
        )
        for k in range(8)
    ]
    usable = [j for j in range(8) if rng.random() < 0.8]
    index = Eligibility(circuits, usable)
    for _ in range(40):
        ld = load(rng.choice([None, "Kitchen", "BATH", "Attic"]), rng.choice(["L1", "L2", "L1-L2"]))
        at = rng.randrange(-1, 8)
        plain = sorted(j for j in usable if circuits[j].device.protected and (j == at or may_go_on(ld, circuits[j])))
        assert index.circuits_for(ld, at) == plain


def planned(make_workbook):
    rows = [
        ["A", "K1", None, "1.0 mA", 1, "Kitchen", None],
        ["B", "K1", None, "1.0 mA", 12, "Kitchen", "yes"],
        ["C", "K2", None, "0.2 mA", 1, "Kitchen", None],
    ]
    project = read_project(make_workbook(sheets([kitchen("K1"), kitchen("K2")], rows)))
    plan = plan_split(project)
    return project, plan


def test_a_valid_plan_verifies(make_workbook):
    project, plan = planned(make_workbook)
    assert verify_plan(project, plan.after, set(), set()) == []


@pytest.mark.parametrize(
    "change, problem",
    [
        (
            lambda loads: loads.__setitem__(1, dataclasses.replace(loads[1], circuit_id="K2")),
            "load 'B' marked Stays was moved",
        ),
        (lambda loads: loads.__setitem__(0, dataclasses.replace(loads[0], circuit_id="K1")), "K1 is over-budget"),
        (
            lambda loads: loads.__setitem__(2, dataclasses.replace(loads[2], circuit_id=None)),
            "'C' (row 4) is left without a circuit",
        ),
    ],
)
def test_the_verifier_catches_broken_plans(make_workbook, change, problem):
    project, plan = planned(make_workbook)
    loads = list(plan.after.project.loads)
    change(loads)
    broken = check(dataclasses.replace(plan.after.project, loads=loads))
    assert any(p.startswith(problem) for p in verify_plan(project, broken, set(), set())), problem


def test_the_verifier_catches_current_and_rooms(make_workbook):
    project, plan = planned(make_workbook)
    loads = list(plan.after.project.loads)
    # the strict current rule (these sheets): every load at once within 0.8 × 20 A = 16 A; 12 A + 10 A on K1 is above
    loads[2] = dataclasses.replace(loads[2], current_a=10.0, circuit_id="K1")
    broken = check(dataclasses.replace(plan.after.project, loads=loads))
    assert "K1 draws 22.000 A by the strict current rule, above 16.000 A" in verify_plan(project, broken, set(), set())
    assert [a.to_id for a in plan.assignments] == ["K2", "K1", "K2"]  # A had to leave K1 (1.0 + 1.0 > 1.8 mA)
    circuits = [
        dataclasses.replace(c, rooms=("Bath",)) if c.circuit_id == "K2" else c for c in plan.after.project.circuits
    ]
    broken = check(dataclasses.replace(plan.after.project, circuits=circuits))
    assert "'A' was put on K2: K2 does not serve room 'Kitchen'" in verify_plan(project, broken, set(), set())
