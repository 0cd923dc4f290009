"""The README's worked examples, recomputed through the tool: every figure the README states must be what the
tool gives (hand physics beside it: I = 2πfCV; line angles 180° on split phase, 120° on a wye)."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from leakbudget.checking import check
from leakbudget.planner.rules import load_current_a
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER
from tests.test_two_level import office

README = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
COOKTOP = ["Cooktop", "K1", None, 1, None, "10 nF", None, "L1-L2", "Kitchen"]


def cooktop(make_workbook, system: str):
    sheets = {
        "Circuits": [CIRCUITS_HEADER, ["K1", "gfci-a", 120, 60, system, 40, None, "Kitchen"]],
        "Loads": [[*LOADS_HEADER, "Power"], [*COOKTOP, 7200]],
    }
    result = check(read_project(make_workbook(sheets)))
    amps, _ = load_current_a(result.project.loads[0], None, result.project.circuits[0])
    return result.circuits[0], amps


def test_the_line_to_line_example(make_workbook):
    per_line = 2 * math.pi * 60 * 10e-9 * 120 * 1e3
    assert f"= {per_line:.3f} mA" in README
    split, amps = cooktop(make_workbook, "split")
    assert f"both lines, {split.leakage_ma:.3f} mA" in README
    assert f"0.4 × {per_line:.3f} = {split.phasor_ma:.3f} mA" in README
    assert f"7200 W ÷ 240 V = {amps:.1f} A" in README
    network, amps = cooktop(make_workbook, "network")
    assert network.leakage_ma == pytest.approx(split.leakage_ma)
    assert f"× {per_line:.3f} = {network.phasor_ma:.3f} mA" in README
    assert f"7200 W ÷ 207.8 V = {amps:.1f} A" in README


def test_the_two_level_example(make_workbook):
    c = office(make_workbook, "rcd-30").circuits[0]
    assert (
        f"14 × 0.3 = {c.leakage_ma:.1f} mA, {100 * c.headroom_used:.0f} % of the 9 mA budget, `{c.status.value}`"
        in (" ".join(README.split()))
    )
    assert c.risk is not None and c.risk.dry < 0.01 and "a likelihood below 1 %" in README
    assert f"1.645 = {math.log(3.5 / 0.3) / 1.6448536269514715:.2f}" in README
    read_as_percentile = office(make_workbook, "rcd-30", "upper, from memory").circuits[0]
    assert read_as_percentile.risk is not None
    assert f"show a {100 * read_as_percentile.risk.dry:.0f} % likelihood of tripping while using 47 %" in README


def test_the_waveform_and_budget_examples(make_workbook):
    from tests.test_estimate import run
    from tests.test_waveforms import one_circuit

    text = " ".join(README.split())
    pulsed = one_circuit(make_workbook, "A", "11 mA", "pulsating-dc").circuits[0]
    assert (
        f"counts it as 11 × 0.5 / 0.35 = {pulsed.trip_equivalent_ma:.1f} mA and the circuit is `{pulsed.status.value}`"
        in text
    )
    blinded = one_circuit(make_workbook, "A", "7 mA", "smooth-dc").circuits[0]
    assert blinded.dc_blinded and "7 mA of smooth DC under the same Type A device" in text
    circuits = [["K1", "gfci-a", 120, 60, "single", 20, None, "Kitchen"]]
    loads = [["Meter", "K1", None, 1, "1 mA", None, None, None, "Kitchen"]]
    ul = run(make_workbook, circuits, loads).circuits[0]
    assert f"0.30 × 6 mA = {ul.budget_ma:.1f} mA by analogy" in text
    share = run(make_workbook, circuits, loads, [["Budget of", "no-trip level"], ["Budget fraction", 0.45]])
    assert f"0.45 × 4 mA = {share.circuits[0].budget_ma:.1f} mA of the no-trip level" in text


def bad_input_sheets() -> dict[str, list[list]]:
    """README "Bad input": an invented workbook with eleven bad cells on three sheets."""
    return {
        "Circuits": [
            CIRCUITS_HEADER,
            ["K1", "gfci-a", "240-10 V", 60, "single", 20, "30'", "Kitchen"],
            ["K2", "gfci-5ma", 120, 60, "single", 20, None, "Kitchen"],
            ["L1", "gfci-a", 120, 60, "single", 20, "1,500 ft", "Laundry"],
        ],
        "Loads": [
            LOADS_HEADER,
            ["Fridge", "K1", None, 1, "5/2 mA", None, None, None, "Kitchen"],
            ["Kettle", "K2", None, 1, "<0.1 mA", None, None, None, "Kitchen"],
            ["Washer", "L1", None, "2 3", "50 %", None, None, None, "Laundry"],
            ["Dryer", "L9", None, 1, "~0.4 mA", None, None, None, "Laundry"],
            ["Iron", "L1", None, 1, "0,75 mA", None, None, None, "Laundry"],
        ],
        "Settings": [["Setting", "Value"], ["Budget fraction", "30"]],
    }


def test_the_bad_input_example(tmp_path):
    """The README's bad workbook gives exactly the output shown there (run through the CLI)."""
    from typer.testing import CliRunner

    from leakbudget.cli.app import app
    from tests.conftest import write_workbook

    path = write_workbook(tmp_path / "bad.xlsx", bad_input_sheets())
    result = CliRunner().invoke(app, ["check", str(path)])
    assert result.exit_code == 2
    assert f"$ leakbudget check bad.xlsx; echo $?\n{result.stderr}2\n```" in README
