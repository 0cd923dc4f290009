"""What a device sees of leakage that is not sine: the operating band for its waveform, and smooth-DC blinding.

Sources: IEC 61008-1 / IEC 60755 (a Type A device operates on pulsating DC from 0.35 IΔn, on sine from 0.5 IΔn;
the pulsating-DC band from memory); BS 7671:2018 reg. 531.3.3 notes (Type A operates with up to 6 mA smooth DC,
Type F up to 10 mA).
"""

from __future__ import annotations

import pytest

from leakbudget.checking import check
from leakbudget.compliance.rules import review
from leakbudget.devices import Status
from leakbudget.workbook.read import read_project
from tests.conftest import LOADS_HEADER

CIRCUITS = ["Circuit", "Device", "RCD type", "Voltage", "Frequency", "System", "Rating", "Rooms"]


def one_circuit(make_workbook, rcd_type: str, leakage: str, waveform: str):
    sheets = {
        "Circuits": [CIRCUITS, ["W1", "rcd-30", rcd_type, 230, 50, "single", 16, "Workshop"]],
        "Loads": [
            [*LOADS_HEADER, "Waveform"],
            ["Drive", "W1", None, 1, leakage, None, None, None, "Workshop", waveform],
        ],
    }
    return check(read_project(make_workbook(sheets)))


def test_pulsating_dc_is_judged_against_its_own_band(make_workbook):
    # 11 mA on a 30 mA RCD: above the 9 mA budget (BS 7671:2018 reg. 531.3.2), below the sine no-trip 15 mA.
    sine = one_circuit(make_workbook, "A", "11 mA", "sine").circuits[0]
    assert sine.status is Status.OVER_BUDGET and sine.trip_equivalent_ma == pytest.approx(11.0)
    # As pulsating DC a Type A may operate from 0.35 × 30 = 10.5 mA: 11 mA scaled to sine, 11 × 0.5 / 0.35 =
    # 15.7 mA, reaches the 15 mA no-trip level.
    pulsed = one_circuit(make_workbook, "A", "11 mA", "pulsating-dc").circuits[0]
    assert pulsed.pulsating_dc_ma == pytest.approx(11.0) and pulsed.gate_ma == pytest.approx(11.0)
    assert pulsed.trip_equivalent_ma == pytest.approx(11.0 * 0.5 / 0.35)
    assert pulsed.status is Status.TRIP_RISK
    # the likelihood sees it too: the same draws, weighted by the band
    assert pulsed.risk.dry > sine.risk.dry


def test_smooth_dc_above_6_ma_under_a_type_a_is_flagged(make_workbook):
    a = one_circuit(make_workbook, "A", "7 mA", "smooth-dc")
    assert a.circuits[0].dc_blinded and a.circuits[0].smooth_dc_ma == pytest.approx(7.0)
    (hit,) = [f for f in review(a, "iec-60364").findings if f.rule == "waveform" and f.load is None]
    assert hit.severity.value == "error" and "BS 7671:2018 reg. 531.3.3" in str(hit.source)
    assert "7.00 mA of smooth DC" in hit.message
    assert not one_circuit(make_workbook, "A", "5 mA", "smooth-dc").circuits[0].dc_blinded  # within 6 mA
    assert not one_circuit(make_workbook, "F", "7 mA", "smooth-dc").circuits[0].dc_blinded  # Type F: up to 10 mA
    assert one_circuit(make_workbook, "F", "11 mA", "smooth-dc").circuits[0].dc_blinded
    assert not one_circuit(make_workbook, "B", "11 mA", "smooth-dc").circuits[0].dc_blinded  # Type B sees DC
