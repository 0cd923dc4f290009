"""The split planner under a trip-likelihood cap: the capped plan brings a circuit under it (checked with
risk.trip_probability on the planned circuit's loads, computed here independently of the planner), a cap no plan
meets is named with exit code 1, no cap leaves the plan as it was, and a bad setting names its cell."""

from __future__ import annotations

import json
from typing import Any

import pytest
from typer.testing import CliRunner

from leakbudget.cli.app import app
from leakbudget.errors import WorkbookError
from leakbudget.planner.plan import SplitOptions
from leakbudget.planner.split import plan_split
from leakbudget.risk import RiskParameters, circuit_distributions, trip_probability
from leakbudget.workbook.read import read_project
from tests.test_planner import kitchen, sheets

runner = CliRunner()
# Two dishwashers (catalogue: heating element, typical 0.8 mA at 120 V) on one UL 943 Class A GFCI (no-trip 4 mA,
# trip 6 mA): 1.6 mA is within the 1.8 mA budget, but at switch-on (× 3, the Switch-on factor default) the pair
# draws about 4.8 mA, inside the trip band: a high likelihood that only moving one of them lowers.
DISHWASHERS = [
    ["Dishwasher A", "K-1", "dishwasher", None, 5, "Kitchen", None],
    ["Dishwasher B", "K-1", "dishwasher", None, 5, "Kitchen", None],
    ["Fridge", "K-2", "refrigerator", None, 2, "Kitchen", None],
]


def workbook(make_workbook: Any, settings: list[list[Any]] | None = None, fixed: bool = False) -> Any:
    rows = [[*r[:6], "yes" if fixed and r[0].startswith("Dish") else None] for r in DISHWASHERS]
    return make_workbook(sheets([kitchen("K-1"), kitchen("K-2")], rows, settings))


def independent_switch_on(plan: Any) -> dict[str, float]:
    """Each protected circuit's switch-on likelihood after the plan, from risk.trip_probability on that circuit's
    loads alone, with the samples and seed the plan's check reported."""
    after = plan.after
    params = RiskParameters.from_settings(after.project.settings)
    groups, dists = circuit_distributions(after, params)
    out = {}
    for j, c in enumerate(after.project.circuits):
        mine = [d for g, d in zip(groups, dists) if g == j]
        p = trip_probability(
            mine, c.device, sum_rule=after.risk.sum_rule, samples=after.risk.samples, seed=after.risk.seed
        )
        out[c.circuit_id] = p.switch_on
    return out


def test_plain_plan_leaves_circuit_above_cap_and_capped_plan_brings_it_under(make_workbook: Any) -> None:
    project = read_project(workbook(make_workbook))
    plain = plan_split(project)
    assert plain.moves == 0 and plain.feasible
    assert independent_switch_on(plain)["K-1"] > 0.10  # both dishwashers stay on K-1
    capped = plan_split(project, SplitOptions(max_trip_likelihood=0.10))
    assert capped.feasible and capped.likelihood_iterations == 2
    assert capped.tightened_budget_ma == {"K-1": pytest.approx(0.9 * 1.6)}  # 90 % of its planned 1.6 mA
    on = {a.load.name: a.to_id for a in capped.assignments}
    assert on["Dishwasher A"] != on["Dishwasher B"]
    likelihoods = independent_switch_on(capped)
    assert max(likelihoods.values()) <= 0.10
    for c in capped.after.circuits:  # the planner's verdict is the check's own Monte Carlo
        assert c.risk.switch_on == pytest.approx(likelihoods[c.circuit.circuit_id], abs=1e-6)


def test_cap_no_plan_meets_is_named_with_exit_1(make_workbook: Any) -> None:
    path = workbook(make_workbook, fixed=True)  # both dishwashers marked Stays on K-1: no budget can move them
    result = runner.invoke(app, ["split", str(path), "--no-write", "--json", "--max-trip-likelihood", "5 %"])
    assert result.exit_code == 1, result.output
    doc = json.loads(result.stdout)
    assert doc["feasible"] is False and doc["likelihood_cap"] == 0.05
    assert [b["circuit"] for b in doc["blocked"]] == ["K-1"]
    assert "only loads that must stay are on it" in doc["blocked"][0]["message"]
    k1 = next(c for c in doc["circuits"] if c["circuit"] == "K-1")
    assert k1["within_likelihood_cap"] is False and k1["trip_probability_switch_on"] > 0.05


def test_cap_from_setting_and_rich_line(make_workbook: Any) -> None:
    path = workbook(make_workbook, [["Max trip likelihood", "10 %"]])
    result = runner.invoke(app, ["split", str(path), "--no-write"])
    assert result.exit_code == 0, result.output
    text = " ".join(result.output.split())  # rich wraps at 80 columns
    assert (
        "Trip likelihood: switch-on likelihood capped at 10 % (Settings sheet, row 2); 2 of 2 protected "
        "circuit(s) within it after 2 plan(s) (the check's Monte Carlo, seed 1); budgets tightened: K-1 "
        "1.440 mA."
    ) in text
    assert "(for the budgets the trip-likelihood cap tightened, not for the cap itself)" in text
    loose = runner.invoke(app, ["split", str(path), "--no-write", "--json", "--max-trip-likelihood", "100 %"])
    doc = json.loads(loose.stdout)  # the option overrides the setting
    assert doc["likelihood_cap"] == 1.0 and doc["moves"] == 0 and doc["likelihood_iterations"] == 1


def test_no_cap_leaves_plan_unchanged(make_workbook: Any) -> None:
    project = read_project(workbook(make_workbook))
    plan = plan_split(project)
    assert plan.likelihood_cap is None and plan.likelihood_iterations == 0 and not plan.tightened_budget_ma
    doc = json.loads(runner.invoke(app, ["split", str(workbook(make_workbook)), "--no-write", "--json"]).stdout)
    assert doc["likelihood_cap"] is None and doc["moves"] == 0
    assert all(c["within_likelihood_cap"] is None for c in doc["circuits"])


def test_bad_setting_names_its_cell(make_workbook: Any) -> None:
    with pytest.raises(
        WorkbookError,
        match=r"sheet 'Settings', row 2, column 'Value', cell B2: setting "
        r"'Max trip likelihood'",
    ):
        read_project(workbook(make_workbook, [["Max trip likelihood", "150 %"]]))


def test_bad_option_exit_2(make_workbook: Any) -> None:
    result = runner.invoke(app, ["split", str(workbook(make_workbook)), "--no-write", "--max-trip-likelihood", "lots"])
    assert result.exit_code == 2
    assert "--max-trip-likelihood" in result.output
