"""Device levels, times, operating bands and the budget rule against the published figures."""

from __future__ import annotations

import math

import pytest

from leakbudget import catalogue
from leakbudget.devices import (
    DEVICES,
    RCD_TYPES,
    WAVEFORMS,
    Family,
    Status,
    budget_ma,
    device,
    operating_band,
    smooth_dc_limit,
    smooth_dc_limit_ma,
    status,
    ul943_trip_time_s,
)
from leakbudget.provenance import Kind


def test_ul943_class_a_levels():  # UL 943 Class A: must trip at 6 mA, must not trip below 4 mA
    d = device("gfci-a")
    assert (d.trip_ma, d.no_trip_ma) == (6.0, 4.0)
    assert "UL 943" in str(d.trip_source) and "UL 943" in str(d.no_trip_source)


def test_ul943c_special_purpose_levels_are_both_published():  # UL 943C Class C/D: trips at 20 mA, threshold 15-20 mA
    d = device("spgfci")
    assert (d.trip_ma, d.no_trip_ma) == (20.0, 15.0)
    for source in (d.trip_source, d.no_trip_source):
        assert source.kind is Kind.PUBLISHED and str(source).startswith("UL 943C")
    assert "20 mA" in str(d.trip_source) and "15 mA" in str(d.no_trip_source)


def test_equipment_ground_fault_device_level_is_common_practice_not_an_nec_clause():
    # NEC 426.28 / 427.22 require equipment ground-fault protection; the 30 mA figure is the trade's, not the NEC's.
    d = device("egfpd-30")
    assert d.trip_ma == 30.0
    assert d.trip_source.kind is Kind.COMMON_PRACTICE
    assert "not the level" in str(d.trip_source)
    assert d.no_trip_source.kind is Kind.FROM_MEMORY
    assert d.break_time_source.kind is Kind.FROM_MEMORY


def test_bs7671_531_3_2_thirty_percent_rule_on_30ma_rcd():  # BS 7671:2018 reg. 531.3.2: 30 % of IΔn → 9 mA
    assert budget_ma(device("rcd-30"), 0.30) == pytest.approx(9.0)


@pytest.mark.parametrize("key", ["rcd-10", "rcd-30", "rcd-100", "rcd-300", "rcd-500", "rcd-100s", "rcd-300s"])
def test_iec_61008_no_trip_is_half_of_rated_residual_current(key):  # IEC 61008-1 / 61009-1: 0.5 IΔn
    d = device(key)
    assert d.trip_ma == float(key.removeprefix("rcd-").removesuffix("s"))
    assert d.no_trip_ma == pytest.approx(0.5 * d.trip_ma)
    assert "IEC 61008-1" in str(d.no_trip_source)


@pytest.mark.parametrize(
    ("i_ma", "t_s"),
    [(6, 5.59), (20, 1.00), (264, 0.025)],
    ids=["UL943-6mA-5.59s", "UL943-20mA-1.00s", "UL943-264mA-0.025s"],
)
def test_ul943_inverse_time_curve(i_ma, t_s):  # UL 943 Class A: T = (20/I)^1.43 s
    assert ul943_trip_time_s(i_ma) == pytest.approx(t_s, rel=0.01)
    assert device("gfci-a").max_break_time_s(current_ma=i_ma) == pytest.approx(t_s, rel=0.01)


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
            assert d.break_time_source.kind is not Kind.COMMON_PRACTICE  # each kind has its own time source
            assert str(d.non_actuating_source)


def test_device_lookup_ignores_case_and_space():
    assert device("  RCD-30 ").key == "rcd-30"
    assert device("RCD-100S").key == "rcd-100s"
    with pytest.raises(KeyError):
        device("rcd-31")


# ---------------------------------------------------------------------------------------------------- times

# IEC 61008-1 / IEC 61009-1: maximum break time at 1, 2, 5 IΔn; minimum non-actuating time of type S.
GENERAL = [(1.0, 0.300, 0.0), (2.0, 0.150, 0.0), (5.0, 0.040, 0.0)]  # general type: 300 / 150 / 40 ms
TYPE_S = [(1.0, 0.500, 0.130), (2.0, 0.200, 0.060), (5.0, 0.150, 0.050)]  # 500 / 200 / 150 ms, at least 130 / 60 / 50


@pytest.mark.parametrize(
    ("key", "multiple", "max_s", "min_s"),
    [(k, *row) for k in ("rcd-10", "rcd-30", "rcd-100", "rcd-300", "rcd-500") for row in GENERAL]
    + [(k, *row) for k in ("rcd-100s", "rcd-300s") for row in TYPE_S],
)
def test_iec_61008_break_and_non_actuating_times(key, multiple, max_s, min_s):
    d = device(key)
    assert d.max_break_time_s(multiple) == pytest.approx(max_s)
    assert d.min_non_actuating_time_s(multiple) == pytest.approx(min_s)
    # The same current given in mA.
    assert d.max_break_time_s(current_ma=multiple * d.trip_ma) == pytest.approx(max_s)
    assert "IEC 61008-1" in str(d.break_time_source) and "IEC 61008-1" in str(d.non_actuating_source)
    assert d.break_time_source.kind is Kind.PUBLISHED and d.non_actuating_source.kind is Kind.PUBLISHED


def test_break_time_between_and_beyond_the_tabulated_multiples():
    general, selective = device("rcd-30"), device("rcd-100s")
    assert general.max_break_time_s(0.9) == math.inf  # below IΔn the device need not operate
    assert general.max_break_time_s(1.5) == pytest.approx(0.300)  # only the 1 IΔn figure is guaranteed
    assert general.max_break_time_s(3.0) == pytest.approx(0.150)
    assert general.max_break_time_s(50.0) == pytest.approx(0.040)
    # Non-actuating: a higher current's minimum bounds a lower current's from below.
    assert selective.min_non_actuating_time_s(1.5) == pytest.approx(0.060)
    assert selective.min_non_actuating_time_s(0.8) == pytest.approx(0.130)
    assert selective.min_non_actuating_time_s(20.0) == pytest.approx(0.050)


def test_type_s_devices_are_time_delayed_rcds():
    for key in ("rcd-100s", "rcd-300s"):
        d = device(key)
        assert d.family is Family.RCD and d.time_delayed and "type S" in d.label
    assert not device("rcd-100").time_delayed


def test_selective_rcd_above_a_30_ma_rcd_waits_longer_than_it_breaks():
    # A fault of 5 IΔn on the 30 mA device (150 mA) is 1.5 IΔn of a 100 mA type S device upstream.
    downstream, upstream = device("rcd-30"), device("rcd-100s")
    fault_ma = 150.0
    assert downstream.max_break_time_s(current_ma=fault_ma) < upstream.min_non_actuating_time_s(current_ma=fault_ma)


def test_ul943_class_a_break_time_outside_its_curve():
    d = device("gfci-a")
    assert d.max_break_time_s(current_ma=5.0) == math.inf  # below 6 mA it need not trip
    assert d.max_break_time_s(current_ma=1000.0) == pytest.approx((20 / 264) ** 1.43)  # the 264 mA figure held
    assert d.max_break_time_s(1.0) == pytest.approx((20 / 6) ** 1.43)  # a multiple of the 6 mA trip level
    assert d.min_non_actuating_time_s(current_ma=20.0) == 0.0
    assert d.break_time_source.kind is Kind.PUBLISHED and "1.43" in str(d.break_time_source)


def test_ul943c_break_time_follows_the_class_a_curve_from_20_ma_down_to_20_ms():
    d = device("spgfci")
    assert d.max_break_time_s(current_ma=19.0) == math.inf
    assert d.max_break_time_s(current_ma=20.0) == pytest.approx(1.0)
    assert d.max_break_time_s(current_ma=100.0) == pytest.approx((20 / 100) ** 1.43)
    assert d.max_break_time_s(current_ma=10_000.0) == pytest.approx(0.020)
    assert "UL 943C" in str(d.break_time_source)


def test_unprotected_circuit_never_breaks():
    d = device("none")
    assert d.max_break_time_s(current_ma=1000.0) == math.inf
    assert d.min_non_actuating_time_s(current_ma=1000.0) == 0.0


def test_times_need_exactly_one_way_of_giving_the_current():
    d = device("rcd-30")
    with pytest.raises(ValueError):
        d.max_break_time_s()
    with pytest.raises(ValueError):
        d.max_break_time_s(1.0, current_ma=30.0)


# ------------------------------------------------------------------------------------------ operating bands


def test_band_waveforms_are_the_catalogue_waveforms():
    assert WAVEFORMS == catalogue.WAVEFORMS


@pytest.mark.parametrize("rcd_type", RCD_TYPES)
def test_sine_band_is_half_to_one_rated_residual_current(rcd_type):  # IEC 61008-1: 0.5-1 IΔn
    low, high, source = operating_band(rcd_type, "sine")
    assert (low, high) == (0.5, 1.0)
    assert source.kind is Kind.PUBLISHED and "IEC 61008-1" in str(source)


@pytest.mark.parametrize("rcd_type", ["A", "F", "B"])
def test_pulsating_dc_band(rcd_type):  # IEC 61008-1 / IEC 60755: 0.35-1.4 IΔn (the exact band from memory)
    low, high, source = operating_band(rcd_type, "pulsating-dc")
    assert (low, high) == (0.35, 1.4)
    assert source.kind is Kind.FROM_MEMORY and "IEC 61008-1" in str(source)
    assert operating_band(rcd_type, "pulsating-dc", rated_ma=10)[:2] == (0.35, 2.0)  # IΔn <= 10 mA
    assert operating_band(rcd_type, "pulsating-dc", rated_ma=30)[:2] == (0.35, 1.4)


def test_type_a_on_pulsating_dc_may_trip_where_sine_would_not():
    # 12 mA of pulsating DC on a 30 mA Type A device: below the sine no-trip level (15 mA), inside the DC band.
    low_sine, _, _ = operating_band("A", "sine")
    low_dc, _, _ = operating_band("A", "pulsating-dc")
    assert low_dc * 30 < 12.0 < low_sine * 30


@pytest.mark.parametrize(
    ("rcd_type", "waveform"),
    [("AC", "pulsating-dc"), ("AC", "smooth-dc"), ("AC", "high-frequency"), ("A", "smooth-dc"), ("F", "smooth-dc"),
     ("A", "high-frequency")],
)  # fmt: skip
def test_no_band_where_the_type_is_not_made_for_the_waveform(rcd_type, waveform):
    assert operating_band(rcd_type, waveform) is None


def test_type_b_detects_smooth_dc():
    band = operating_band("B", "smooth-dc")
    assert band is not None and band[2].kind is Kind.FROM_MEMORY
    assert smooth_dc_limit_ma("B") is None


@pytest.mark.parametrize(("rcd_type", "limit_ma"), [("A", 6.0), ("F", 10.0), ("a", 6.0)])
def test_smooth_dc_blinds_type_a_above_6_ma_and_type_f_above_10_ma(rcd_type, limit_ma):
    # BS 7671:2018 reg. 531.3.3 notes 1 and 2
    assert smooth_dc_limit_ma(rcd_type) == limit_ma
    _, source = smooth_dc_limit(rcd_type)
    assert source.kind is Kind.PUBLISHED and "BS 7671:2018 reg. 531.3.3" in str(source)


def test_type_ac_tolerates_no_smooth_dc_as_a_modelling_choice():
    limit_ma, source = smooth_dc_limit("AC")
    assert limit_ma == 0.0 and source.kind is Kind.DEFAULT and "modelling choice" in str(source)


def test_unknown_rcd_type_or_waveform_is_refused():
    with pytest.raises(KeyError):
        operating_band("G", "sine")
    with pytest.raises(KeyError):
        operating_band("A", "square")
    with pytest.raises(KeyError):
        smooth_dc_limit_ma("")
