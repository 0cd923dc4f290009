"""Device levels and the budget rule against the published figures."""

from __future__ import annotations

import pytest

from leakbudget.devices import DEVICES, Status, budget_ma, device, status, ul943_trip_time_s


def test_ul943_class_a_levels():  # UL 943 Class A: must trip at 6 mA, must not trip below 4 mA
    d = device("gfci-a")
    assert (d.trip_ma, d.no_trip_ma) == (6.0, 4.0)
    assert "UL 943" in str(d.trip_source) and "UL 943" in str(d.no_trip_source)


def test_ul943c_special_purpose_trip_level():  # UL 943C Class C/D/E: 20 mA
    assert device("spgfci").trip_ma == 20.0


def test_bs7671_531_3_2_thirty_percent_rule_on_30ma_rcd():  # BS 7671:2018 reg. 531.3.2: 30 % of IΔn → 9 mA
    assert budget_ma(device("rcd-30"), 0.30) == pytest.approx(9.0)


@pytest.mark.parametrize("ma", [10, 30, 100, 300, 500])
def test_iec_61008_no_trip_is_half_of_rated_residual_current(ma):  # IEC 61008-1 / 61009-1: 0.5 IΔn
    d = device(f"rcd-{ma}")
    assert d.trip_ma == ma
    assert d.no_trip_ma == pytest.approx(0.5 * ma)
    assert "IEC 61008-1" in str(d.no_trip_source)


@pytest.mark.parametrize(
    ("i_ma", "t_s"),
    [(6, 5.59), (20, 1.00), (264, 0.025)],
    ids=["UL943-6mA-5.59s", "UL943-20mA-1.00s", "UL943-264mA-0.025s"],
)
def test_ul943_inverse_time_curve(i_ma, t_s):  # UL 943 Class A: T = (20/I)^1.43 s
    assert ul943_trip_time_s(i_ma) == pytest.approx(t_s, rel=0.01)


def test_status_bands():
    d = device("rcd-30")  # budget 9 mA, no-trip 15 mA
    b = budget_ma(d, 0.3)
    assert status(d, 9.0, b) is Status.OK
    assert status(d, 9.01, b) is Status.OVER_BUDGET
    assert status(d, 15.0, b) is Status.TRIP_RISK
    assert status(device("none"), 100.0, float("nan")) is Status.UNPROTECTED


def test_every_protected_device_has_sources_and_sane_levels():
    for d in DEVICES.values():
        if d.protected:
            assert 0 < d.no_trip_ma < d.trip_ma
            assert str(d.trip_source) and str(d.no_trip_source)


def test_device_lookup_ignores_case_and_space():
    assert device("  RCD-30 ").key == "rcd-30"
    with pytest.raises(KeyError):
        device("rcd-31")
