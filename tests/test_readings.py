"""Readings: reconciliation flags, calibration, and one unit's reading standing for identical units.

References: the quantiles of a uniform distribution (closed form) and scipy.stats.lognorm.ppf for the estimate's
95 % interval; the 3-4-5 right triangle and collinear phasors for the calibration factor; I = 2πfCV (capacitive
leakage ∝ V·f, physics) for rescaling an identical unit's reading to another supply.
"""

from __future__ import annotations

import json
import math

import pytest
from typer.testing import CliRunner

from leakbudget import risk
from leakbudget.checking import check
from leakbudget.cli.app import app
from leakbudget.devices import Status
from leakbudget.errors import WorkbookError
from leakbudget.estimate import CATALOGUE, COMPUTED, MEASURED
from leakbudget.readings import CONSISTENT, FAR_ABOVE, FAR_BELOW, calibration_factor, reading_verdict
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER

READINGS_HEADER = ["Circuit", "Reading", "Conditions", "Date", "Calibrate", "Note"]
MODEL_LOADS_HEADER = [*LOADS_HEADER, "Model"]


def sheets(loads, readings=None, circuits=None, settings=None):
    book = {
        "Circuits": [CIRCUITS_HEADER, *(circuits or [["K1", "gfci-a", 120, 60, "single", 20, None, "Kitchen"]])],
        "Loads": [MODEL_LOADS_HEADER, *loads],
    }
    if readings is not None:
        book["Readings"] = [READINGS_HEADER, *readings]
    if settings:
        book["Settings"] = [["Setting", "Value"], *settings]
    return book


METER = ["Meter", "K1", None, 1, "1 mA", None, None, None, "Kitchen", None]  # measured: U(0.95, 1.05) mA


@pytest.mark.parametrize(
    ("reading", "conditions", "flag"),
    [
        ("1.2 mA", "all on", FAR_ABOVE),  # 1.2 × 0.95 = 1.14 > 97.5th percentile 1.045
        ("1.0 mA", "all on", CONSISTENT),
        ("0.8 mA", "all on", FAR_BELOW),  # 0.8 × 1.05 = 0.84 < 2.5th percentile 0.955
        ("0.5 mA", "idle", CONSISTENT),  # low while idle proves nothing: not flagged
        ("1.2 mA", "idle", FAR_ABOVE),  # high while idle is still a fault sign
    ],
    ids=["far-above", "consistent", "far-below", "idle-low-not-flagged", "idle-high"],
)
def test_each_flag_against_the_uniform_quantiles(make_workbook, reading, conditions, flag):
    result = check(read_project(make_workbook(sheets([METER], [["K1", reading, conditions, "2026-10-14"]]))))
    (rr,) = result.readings
    # Closed form: quantile q of U(c(1 − a), c(1 + a)) is c(1 − a + 2aq); c = 1 mA, a = 0.05 (Meter accuracy).
    assert rr.low_ma == pytest.approx(1 - 0.05 + 2 * 0.05 * 0.025, abs=2e-3)
    assert rr.high_ma == pytest.approx(1 - 0.05 + 2 * 0.05 * 0.975, abs=2e-3)
    assert rr.flag == flag
    assert rr.reading.date == "2026-10-14"


def test_catalogue_interval_is_the_lognormal_quantiles_scipy(make_workbook):
    # Reference: scipy.stats.lognorm.ppf with the catalogue refrigerator (typical 0.5, upper 0.75 mA at 120 V 60 Hz,
    # the UL 101 limit): one unit of the two-level model, σ² = ln²(Model spread 1.6) + ln²(Unit spread 1.15).
    from scipy.stats import lognorm

    fridge = ["Fridge", "K1", "refrigerator", 1, None, None, None, None, "Kitchen", None]
    result = check(read_project(make_workbook(sheets([fridge], [["K1", 0.5, None, None]]))))
    (rr,) = result.readings
    sigma = math.hypot(math.log(1.6), math.log(1.15))
    assert rr.low_ma == pytest.approx(lognorm(s=sigma, scale=0.5).ppf(0.025), rel=0.01)
    # draws are capped at the upper value, and the quantile of min(S, c) is min(quantile of S, c)
    assert rr.high_ma == pytest.approx(min(lognorm(s=sigma, scale=0.5).ppf(0.975), 0.75), rel=0.01)
    assert rr.reading.conditions == "all on"
    assert any("Readings conditions 'all on' for row(s) 2" in d for d in result.project.defaults_used)


def test_classify_thresholds_include_the_meter_accuracy():
    assert reading_verdict(1.10, "all on", 0.9, 1.045, 0.05)[0] == CONSISTENT  # 1.10 × 0.95 = 1.045: not above
    assert reading_verdict(1.11, "all on", 0.9, 1.045, 0.05)[0] == FAR_ABOVE
    assert reading_verdict(0.858, "all on", 0.9, 1.2, 0.05)[0] == CONSISTENT  # 0.858 × 1.05 = 0.9009 ≥ 0.9
    assert reading_verdict(0.85, "all on", 0.9, 1.2, 0.05)[0] == FAR_BELOW
    assert "faulty" in reading_verdict(2.0, "all on", 0.9, 1.2, 0.05)[1]
    assert "too high for this site" in reading_verdict(0.1, "all on", 0.9, 1.2, 0.05)[1]


@pytest.mark.parametrize(
    ("fixed", "catalogue", "reading", "expected"),
    [
        (0.5j, 0.5j, 0.8, 0.6),  # collinear: 0.5 + 0.5k = 0.8
        (0.3, 0.4j, 0.5, 1.0),  # right angle: 3-4-5 triangle
        (0.3, 0.4j, 0.3, 0.0),  # the fixed part alone matches
        (0.3, 0.4j, 0.2, None),  # below the fixed part at right angles: no k ≥ 0
        (0.3, 0j, 0.5, None),  # nothing to calibrate
    ],
    ids=["collinear", "three-four-five", "zero", "unreachable", "no-catalogue"],
)
def test_calibration_factor(fixed, catalogue, reading, expected):
    k = calibration_factor(fixed, catalogue, reading)
    assert k == (pytest.approx(expected) if expected is not None else None)


def test_calibration_shows_both_and_the_calibrated_sum_matches_the_reading(make_workbook):
    # 0.5 mA measured + catalogue refrigerator 0.5 mA typical (both capacitive on L1); reading 0.8 mA → k = 0.6.
    loads = [
        ["Meter", "K1", None, 1, "0.5 mA", None, None, None, "Kitchen", None],
        ["Fridge", "K1", "refrigerator", 1, None, None, None, None, "Kitchen", None],
    ]
    result = check(read_project(make_workbook(sheets(loads, [["K1", "0.8 mA", "all on", None, "yes"]]))))
    (rr,) = result.readings
    cal = rr.calibration
    assert cal is not None and cal.factor == pytest.approx(0.6)
    assert cal.phasor_ma == pytest.approx(0.8) and cal.leakage_ma == pytest.approx(0.8)
    assert cal.status is Status.OK and cal.headroom_used == pytest.approx(0.8 / 1.8)
    assert result.circuits[0].leakage_ma == pytest.approx(1.0)  # the estimate itself is left as it was
    assert "catalogue values × 0.6" in rr.calibration_note
    # Calibrated values count as measured (±5 %): 0.8 mA ± 5 % never reaches the 4 mA no-trip level.
    assert cal.risk is not None and cal.risk.dry == 0.0 and cal.risk.upper_95() == pytest.approx(3 / 10_000)


def test_calibration_that_cannot_reach_the_reading_says_why(make_workbook):
    loads = [
        ["Heater", "K1", None, 1, None, None, "1 Mohm", None, "Kitchen", None],  # 0.12 mA resistive
        ["Fridge", "K1", "refrigerator", 1, None, None, None, None, "Kitchen", None],
    ]
    result = check(read_project(make_workbook(sheets(loads, [["K1", "0.05 mA", "all on", None, "yes"]]))))
    (rr,) = result.readings
    assert rr.calibration is None and rr.calibration_note.startswith("not calibrated: no scaling")
    assert rr.flag == FAR_BELOW


def _identical_unit_book(extra_loads=()):
    circuits = [
        ["K1", "gfci-a", 120, 60, "single", 20, None, "Kitchen"],
        ["E1", "rcd-30", 230, 50, "single", 32, None, "Office"],
    ]
    loads = [
        ["Kitchen fridge", "K1", "refrigerator", 1, "0.41 mA", None, None, None, "Kitchen", "FR-240"],
        ["Office fridge", "E1", "refrigerator", 2, None, None, None, None, "Office", "fr-240"],
        ["Other model", "E1", "refrigerator", 1, None, None, None, None, "Office", "FR-300"],
        ["Own figure", "E1", "refrigerator", 1, None, "4.7 nF", None, None, "Office", "FR-240"],
        *extra_loads,
    ]
    return sheets(loads, circuits=circuits)


def test_a_reading_on_one_unit_stands_for_identical_units(make_workbook):
    result = check(read_project(make_workbook(_identical_unit_book())))
    by_name = {r.name: r for r in result.loads}
    office = by_name["Office fridge"]
    # Capacitive leakage ∝ V·f (I = 2πfCV): 0.41 mA at 120 V 60 Hz is 0.41 × (230·50)/(120·60) at 230 V 50 Hz.
    assert office.basis == MEASURED
    assert office.per_unit_ma == pytest.approx(0.41 * 230 * 50 / (120 * 60))
    assert office.leakage_ma == pytest.approx(2 * 0.41 * 230 * 50 / (120 * 60))
    assert office.measured_on == "'Kitchen fridge' (Loads row 2)"
    assert "identical unit" in office.source and "model 'fr-240'" in office.source and "rescaled" in office.source
    assert by_name["Other model"].basis == CATALOGUE and by_name["Other model"].measured_on is None
    assert by_name["Own figure"].basis == COMPUTED  # a unit's own figure wins over an identical unit's reading
    params = risk.RiskParameters.from_settings(result.project.settings)
    assert risk.distribution(office, params).spread == 0.05  # treated as measured: the meter's accuracy


def test_several_measured_units_give_their_mean(make_workbook):
    second = ["Garage fridge", "K1", "refrigerator", 1, "0.61 mA", None, None, None, "Kitchen", "FR-240"]
    result = check(read_project(make_workbook(_identical_unit_book([second]))))
    office = next(r for r in result.loads if r.name == "Office fridge")
    assert office.per_unit_ma == pytest.approx(0.51 * 230 * 50 / (120 * 60))
    assert "mean of the readings on 'Kitchen fridge' (Loads row 2), 'Garage fridge' (Loads row 6)" in office.source


@pytest.mark.parametrize(
    ("reading", "message"),
    [
        (["K9", 1, None, None, None], "row 2, column 'Circuit', cell A2: 'K9' is not a circuit in the Circuits sheet"),
        (["K1", None, None, None, None], "row 2, column 'Reading', cell B2: the reading is blank"),
        (
            ["K1", 1, "sometimes", None, None],
            "row 2, column 'Conditions', cell C2: 'sometimes' is not 'all on' or 'idle'",
        ),
        (["K1", 1, "idle", None, "yes"], "row 2, column 'Calibrate', cell E2: only an 'all on' reading can calibrate"),
    ],
    ids=["unknown-circuit", "blank-reading", "bad-conditions", "calibrate-idle"],
)
def test_bad_readings_name_the_cell(make_workbook, reading, message):
    with pytest.raises(WorkbookError) as info:
        read_project(make_workbook(sheets([METER], [reading])))
    assert f"plan.xlsx, sheet 'Readings', {message}" in str(info.value)
    assert str(info.value).endswith(".") and "\n" not in str(info.value)


def test_one_calibrating_reading_per_circuit(make_workbook):
    with pytest.raises(
        WorkbookError,
        match=r"row 3, column 'Calibrate', cell E3: circuit 'K1' is already "
        r"calibrated by row 2",
    ):
        read_project(make_workbook(sheets([METER], [["K1", 1, None, None, "yes"], ["K1", 1.1, None, None, "yes"]])))


def test_cli_shows_the_flags_and_json_carries_both_figures(make_workbook):
    path = make_workbook(
        sheets(
            [METER, ["Fridge", "K1", "refrigerator", 1, None, None, None, None, "Kitchen", None]],
            [["K1", "2.5 mA", "all on", "2026-10-14", None], ["K1", "1.2 mA", "all on", "2026-10-15", "yes"]],
        )
    )
    runner = CliRunner()
    shown = runner.invoke(app, ["check", str(path), "--no-write"], env={"COLUMNS": "200"})
    assert shown.exit_code == 0, shown.output
    assert (
        "K1 (Readings row 2): far above the estimate: a load is probably faulty (leaking far above its kind) "
        "or a load is missing from the Loads sheet; find it before relying on the estimate."
    ) in shown.output
    assert "Thresholds: far above when reading × (1 − meter accuracy) exceeds the 97.5th percentile" in shown.output
    doc = json.loads(runner.invoke(app, ["check", str(path), "--no-write", "--json"]).stdout)
    first, second = doc["readings"]
    assert (first["flag"], first["calibration_factor"]) == ("far above", None)
    assert second["calibration_factor"] == pytest.approx((1.2 - 1.0) / 0.5, abs=1e-4)  # collinear phasors
    assert second["calibrated_phasor_ma"] == pytest.approx(1.2)
    assert second["estimate_phasor_ma"] == pytest.approx(1.5)
    circuit = doc["circuits"][0]
    for key in (
        "trip_probability",
        "trip_probability_se",
        "trip_probability_switch_on",
        "trip_probability_switch_on_se",
    ):
        assert isinstance(circuit[key], float), key
    assert doc["risk"]["samples"] == 10_000 and doc["risk"]["seed"] == 1
