"""Trip likelihood: closed forms, reference libraries, reproducibility, and the check and planner contracts.

Closed forms used (each named in its test id):
* uniform trip point, fixed load: P(T ≤ s) = clip((s − a) / (b − a), 0, 1), the CDF of U(a, b);
* two uniforms: P(S ≥ T) for S ~ U(s1, s2), T ~ U(a, b) = (G(s2) − G(s1)) / (s2 − s1), G the antiderivative of
  that CDF (the trapezoidal law of S − T), cross-checked against scipy.integrate.dblquad;
* lognormal load: P = (C(a) − C(b)) / (b − a), C(k) = E[(S − k)+] = m e^{σ²/2} Φ(d1) − k Φ(d2) with
  d2 = ln(m/k)/σ, d1 = d2 + σ (the lognormal partial expectation, the form of the Black–Scholes call price),
  cross-checked against scipy.stats.lognorm.expect.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from leakbudget import risk
from leakbudget.catalogue import built_in
from leakbudget.checking import check
from leakbudget.devices import DEVICES
from leakbudget.errors import WorkbookError
from leakbudget.risk import FIXED, LOGNORMAL, UNIFORM
from leakbudget.risk import LeakageDistribution as D
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER

GFCI = DEVICES["gfci-a"]  # UL 943 Class A: no trip below 4 mA, trips at 6 mA
RCD30 = DEVICES["rcd-30"]  # IEC 61008-1: no trip below 15 mA, trips at 30 mA


def uniform_cdf(s: float, a: float, b: float) -> float:
    return min(1.0, max(0.0, (s - a) / (b - a)))


def two_uniforms(s1: float, s2: float, a: float, b: float) -> float:
    """P(S ≥ T), S ~ U(s1, s2), T ~ U(a, b): mean of the uniform CDF over [s1, s2] via its antiderivative G."""

    def g(s: float) -> float:
        if s <= a:
            return 0.0
        if s <= b:
            return (s - a) ** 2 / (2 * (b - a))
        return (b - a) / 2 + (s - b)

    return (g(s2) - g(s1)) / (s2 - s1)


def lognormal_closed_form(median: float, sigma: float, a: float, b: float) -> float:
    """P(S ≥ T), S lognormal (median, σ), T ~ U(a, b), from lognormal partial expectations."""
    from scipy.stats import norm

    def call(k: float) -> float:
        d2 = math.log(median / k) / sigma
        return median * math.exp(sigma**2 / 2) * norm.cdf(d2 + sigma) - k * norm.cdf(d2)

    return (call(a) - call(b)) / (b - a)


@pytest.mark.parametrize(
    ("s", "device", "expected"),
    [
        (3.0, GFCI, 0.0),
        (4.5, GFCI, 0.25),
        (5.0, GFCI, 0.5),
        (7.0, GFCI, 1.0),
        (20.0, RCD30, 1 / 3),
    ],
    ids=["below-no-trip", "quarter", "half", "above-trip", "rcd-30-third"],
)
def test_closed_form_single_fixed_load_is_the_uniform_cdf(s, device, expected):
    p = risk.trip_probability([D(FIXED, s)], device)
    assert p.dry == pytest.approx(expected, abs=1e-12)
    assert p.samples == 0 and p.dry_se == 0.0  # nothing random: exact, not sampled


@pytest.mark.parametrize(
    ("centre", "half_width"),
    [(4.5, 0.2), (5.0, 0.3), (3.9, 0.1), (6.2, 0.15)],
    ids=["overlap", "wide", "straddles-no-trip", "straddles-trip"],
)
def test_closed_form_two_uniforms(centre, half_width):
    s1, s2 = centre * (1 - half_width), centre * (1 + half_width)
    expected = two_uniforms(s1, s2, 4.0, 6.0)
    p = risk.trip_probability([D(UNIFORM, centre, half_width)], GFCI, samples=100_000, seed=7)
    assert p.dry == pytest.approx(expected, abs=4 * p.dry_se + 1e-9)


def test_two_uniforms_formula_against_scipy_dblquad():
    # Reference: numerical double integral of the joint density over {s ≥ t} (scipy.integrate.dblquad).
    from scipy.integrate import dblquad

    s1, s2, a, b = 3.6, 5.4, 4.0, 6.0
    area, _ = dblquad(lambda t, s: 1.0, s1, s2, lambda s: a, lambda s: min(max(s, a), b))
    assert two_uniforms(s1, s2, a, b) == pytest.approx(area / ((s2 - s1) * (b - a)), rel=1e-9)


def capped_lognormal_closed_form(median: float, sigma: float, cap_ma: float, a: float, b: float) -> float:
    """P(min(S, c) ≥ T), S lognormal (median, σ), T ~ U(a, b): ∫₀ᶜ F_T(s) f_S(s) ds + F_T(c) P(S > c), by scipy quad."""
    from scipy.integrate import quad
    from scipy.stats import lognorm

    dist = lognorm(s=sigma, scale=median)
    body, _ = quad(lambda s: uniform_cdf(s, a, b) * dist.pdf(s), a, min(cap_ma, b) if cap_ma > a else a)
    tail = uniform_cdf(cap_ma, a, b) * dist.sf(cap_ma)
    if cap_ma > b:
        body += dist.cdf(cap_ma) - dist.cdf(b)
    return body + tail


@pytest.mark.parametrize(
    ("median", "upper", "cap"),
    [(2.0, 3.5, 5.0), (1.0, 5.0, 5.0), (3.0, 6.52, 6.52)],
    ids=["cap-inside-band", "cap-at-upper-wide", "cap-above-trip"],
)
def test_capped_lognormal_against_scipy_quad(median, upper, cap):
    # A catalogue draw never exceeds its upper value: min(S, cap), checked against numerical integration (scipy).
    sigma = risk.lognormal_sigma(median, upper, 0.95)
    expected = capped_lognormal_closed_form(median, sigma, cap, 4.0, 6.0)
    p = risk.trip_probability([D(LOGNORMAL, median, sigma, 1.0, 1.0, cap / median)], GFCI, samples=200_000, seed=5)
    assert p.dry == pytest.approx(expected, abs=4 * p.dry_se + 1e-6)


@pytest.mark.parametrize(
    ("median", "upper"), [(2.0, 3.5), (3.0, 6.52), (1.0, 5.0)], ids=["pc-like", "heat-pump-like", "wide"]
)
def test_closed_form_lognormal_partial_expectation(median, upper):
    sigma = risk.lognormal_sigma(median, upper, 0.95)
    expected = lognormal_closed_form(median, sigma, 4.0, 6.0)
    p = risk.trip_probability([D(LOGNORMAL, median, sigma)], GFCI, samples=200_000, seed=3)
    assert p.dry == pytest.approx(expected, abs=4 * p.dry_se + 1e-6)


def test_lognormal_closed_form_against_scipy_expect():
    # Reference: scipy.stats.lognorm.expect of the uniform trip-point CDF.
    from scipy.stats import lognorm

    median, sigma = 3.0, 0.47
    reference = lognorm(s=sigma, scale=median).expect(lambda s: uniform_cdf(s, 4.0, 6.0), lb=4.0, ub=60.0)
    assert lognormal_closed_form(median, sigma, 4.0, 6.0) == pytest.approx(reference, rel=1e-6)


def test_upper_value_is_the_chosen_percentile_scipy_lognorm():
    # Reference: scipy.stats.lognorm.ppf of the fitted distribution returns the catalogue upper value.
    from scipy.stats import lognorm

    for percentile in (0.9, 0.95, 0.99):
        sigma = risk.lognormal_sigma(0.5, 0.75, percentile)
        assert lognorm(s=sigma, scale=0.5).ppf(percentile) == pytest.approx(0.75, rel=1e-12)
    assert risk.lognormal_sigma(0.5, 0.5, 0.95) == 0.0


def test_phasor_sum_of_opposite_legs_closed_form():
    # Split-phase: L1 and L2 are 180° apart, so the device sees |3 − 2| = 1 mA (physics of phasor addition).
    loads = [D(FIXED, 3.0, 0.0, 1 + 0j), D(FIXED, 2.0, 0.0, -1 + 0j)]
    assert risk.trip_probability(loads, RCD30, sum_rule="phasor").dry == 0.0
    assert risk.trip_probability(loads, GFCI, sum_rule="arithmetic").dry == pytest.approx(0.5)  # 5 mA
    loads = [D(FIXED, 3.0, 0.0, 1j), D(FIXED, 4.0, 0.0, 1 + 0j)]  # 90° apart: |3j + 4| = 5 mA
    assert risk.trip_probability(loads, GFCI, sum_rule="phasor").dry == pytest.approx(0.5)


def test_switch_on_scenario_multiplies_heating_loads_only():
    # Dry: 1.5 + 3.0 = 4.5 mA → P = 0.25; switch-on: 1.5 × 3 + 3.0 = 7.5 mA → above the 6 mA trip level.
    loads = [D(FIXED, 1.5, switch_on_factor=3.0), D(FIXED, 3.0)]
    p = risk.trip_probability(loads, GFCI)
    assert (p.dry, p.switch_on) == (pytest.approx(0.25), pytest.approx(1.0))


def test_reported_standard_error_matches_the_spread_over_seeds():
    # The stated sampling error must be honest: over 200 seeds the estimates scatter by about the reported SE.
    loads = [D(LOGNORMAL, 2.0, 0.5), D(UNIFORM, 1.5, 0.2)]
    runs = [risk.trip_probability(loads, GFCI, samples=400, seed=s) for s in range(200)]
    spread = np.std([r.dry for r in runs], ddof=1)
    reported = np.mean([r.dry_se for r in runs])
    assert spread == pytest.approx(reported, rel=0.2)
    precise = risk.trip_probability(loads, GFCI, samples=400_000, seed=999)  # unbiased: the runs centre on it
    assert np.mean([r.dry for r in runs]) == pytest.approx(precise.dry, abs=4 * spread / math.sqrt(200))


def test_same_seed_same_numbers_other_seed_other_numbers():
    loads = [D(LOGNORMAL, 2.0, 0.6), D(UNIFORM, 1.0, 0.05, switch_on_factor=3.0)]
    first = risk.trip_probability(loads, GFCI, samples=2000, seed=11)
    again = risk.trip_probability(loads, GFCI, samples=2000, seed=11)
    other = risk.trip_probability(loads, GFCI, samples=2000, seed=12)
    assert first == again
    assert first.dry != other.dry


def test_zero_observed_trips_give_the_rule_of_three_bound():
    p = risk.trip_probability([D(UNIFORM, 1.0, 0.05)], GFCI, samples=1000)
    assert p.dry == 0.0 and p.upper_95() == pytest.approx(0.003)  # 3/N, Hanley & Lippman-Hand 1983
    assert risk.trip_probability([D(FIXED, 1.0)], GFCI).upper_95() is None  # exact zero: no bound needed


def test_unprotected_device_has_no_trip_probability():
    with pytest.raises(ValueError, match="does not trip"):
        risk.trip_probability([D(FIXED, 1.0)], DEVICES["none"])


@pytest.mark.parametrize("sparse", [False, True], ids=["reduceat", "sparse-product"])
def test_many_circuits_at_once_equal_one_at_a_time_and_blocks_do_not_matter(sparse, monkeypatch):
    # Vectorised over circuits (and cut into tiny blocks) must equal the per-circuit pure function exactly; with
    # ``sparse`` the many-circuit runs sum by the sparse matrix product of large workbooks, the reference by reduceat.
    rng = np.random.default_rng(5)
    groups, loads = [], []
    for g in range(40):
        for _ in range(int(rng.integers(0, 6))):
            kind = (FIXED, UNIFORM, LOGNORMAL)[int(rng.integers(0, 3))]
            loads.append(
                D(
                    kind,
                    float(rng.uniform(0.2, 2.5)),
                    float(rng.uniform(0.05, 0.9)),
                    complex(np.exp(1j * rng.choice([0.0, np.pi, 2.0944]))),
                    float(rng.choice([1.0, 3.0])),
                )
            )
            groups.append(g)
    # Rows need not come grouped: the circuits' rows interleaved (reverse circuit order, same order within one).
    order = sorted(range(len(loads)), key=lambda i: -groups[i])
    levels = [(4.0, 6.0) if g % 5 else (15.0, 30.0) for g in range(40)]
    levels[3] = None  # an unprotected circuit
    for rule in ("arithmetic", "phasor"):
        if sparse:
            monkeypatch.setattr(risk, "SPARSE_SUM_ELEMENTS", 0)
        together = risk.group_trip_probabilities(
            [groups[i] for i in order], [loads[i] for i in order], 40, levels, sum_rule=rule, samples=500, seed=2
        )
        tiny_blocks = risk.group_trip_probabilities(
            groups, loads, 40, levels, sum_rule=rule, samples=500, seed=2, block_elements=700
        )
        monkeypatch.undo()
        for g in range(40):
            mine = [d for d, gg in zip(loads, groups) if gg == g]
            if levels[g] is None:
                assert together[g] is None
                continue
            device = GFCI if levels[g] == (4.0, 6.0) else RCD30
            alone = risk.trip_probability(mine, device, sum_rule=rule, samples=500, seed=2)
            # Equal up to float32 summation order (a circuit cut by a block boundary is summed in two parts).
            assert together[g].dry == pytest.approx(alone.dry, rel=1e-5, abs=1e-9)
            assert tiny_blocks[g].switch_on == pytest.approx(alone.switch_on, rel=1e-5, abs=1e-9)
            assert tiny_blocks[g].dry_se == pytest.approx(alone.dry_se, rel=1e-5, abs=1e-9)


def test_auto_sample_count():
    assert risk.auto_samples(30) == 10_000
    assert risk.auto_samples(10_000) == 2_000
    assert risk.auto_samples(100_000) == 1_000  # floor: never fewer than 1,000


def _project(make_workbook, settings=None):
    sheets = {
        "Circuits": [
            CIRCUITS_HEADER,
            ["K1", "gfci-a", 120, 60, "single", 20, 30, "Kitchen"],
            ["K2", "gfci-a", 120, 60, "split", 30, None, "Kitchen"],
            ["O1", "none", 120, 60, "single", 15, None, "Office"],
        ],
        "Loads": [
            LOADS_HEADER,
            ["Kettle", "K1", "kettle", 1, None, None, None, None, "Kitchen"],
            ["Fridge", "K1", "refrigerator", 1, None, None, None, None, "Kitchen"],
            ["Filter", "K1", None, 1, None, "4.7 nF", None, None, "Kitchen"],
            ["Meter", "K1", None, 2, "0.4 mA", None, None, None, "Kitchen"],
            ["Range", "K2", "range-electric", 1, None, None, None, "L1-L2", "Kitchen"],
            ["Hood", "K2", "range-hood", 1, None, None, None, "L2", "Kitchen"],
            ["PC", "O1", "desktop-pc", 1, None, None, None, None, "Office"],
        ],
    }
    if settings:
        sheets["Settings"] = [["Setting", "Value"], *settings]
    return read_project(make_workbook(sheets))


def test_check_reports_what_the_planner_function_reproduces(make_workbook):
    # The planner contract: trip_probability on a circuit's loads, with the check's samples and seed, gives
    # the check's figure for that circuit (the same draws; equal up to float32 summation order).
    result = check(_project(make_workbook))
    params = risk.RiskParameters.from_settings(result.project.settings)
    assert result.risk is not None and result.risk.samples == 10_000 and result.risk.seed == 1
    groups, distributions = risk.circuit_distributions(result, params)
    for i, c in enumerate(result.circuits):
        mine = [d for g, d in zip(groups, distributions) if g == i]
        if not c.circuit.device.protected:
            assert c.risk is None
            continue
        again = risk.trip_probability(
            mine, c.circuit.device, sum_rule=risk.LIKELIHOOD_SUM, samples=result.risk.samples, seed=result.risk.seed
        )
        assert (again.dry, again.switch_on, again.dry_se, again.samples) == (
            pytest.approx(c.risk.dry, rel=1e-5, abs=1e-9),
            pytest.approx(c.risk.switch_on, rel=1e-5, abs=1e-9),
            pytest.approx(c.risk.dry_se, rel=1e-5, abs=1e-9),
            c.risk.samples,
        )


def test_distributions_follow_the_basis_of_each_load(make_workbook):
    result = check(_project(make_workbook))
    params = risk.RiskParameters.from_settings(result.project.settings)
    by_name = {r.name: risk.distribution(r, params) for r in result.loads}
    # Catalogue kettle: typical 0.2 mA, upper 0.75 mA at 230 V 50 Hz, resistive (∝ V), heating element.
    kettle = by_name["Kettle"]
    assert kettle.shape == LOGNORMAL and kettle.centre_ma == pytest.approx(0.2 * 120 / 230)
    # Its upper value is a published limit (IEC 60335-1 cl. 13.2): the spread is the two-level model's, between
    # models (Model spread 1.6) and, for one unit, between units (Unit spread 1.15): σ² = ln²1.6 + ln²1.15.
    assert kettle.spread == pytest.approx(math.hypot(math.log(1.6), math.log(1.15)))
    assert kettle.switch_on_factor == 3.0
    assert by_name["Meter"] == D(UNIFORM, pytest.approx(0.8), 0.05, pytest.approx(1j), 1.0)  # ±5 % meter
    assert by_name["Filter"].shape == UNIFORM and by_name["Filter"].spread == 0.20  # ±20 % component tolerance
    # L1-L2 range, figure per line: 60 % / 40 % (Line imbalance) leaves 0.4 of a line's figure in the phasor sum,
    # plus its line-to-neutral parts on L1; the arithmetic sum counts 2 lines plus those parts.
    row = built_in().appliances["range-electric"]
    part = row.line_neutral_ma / row.typical_ma
    assert abs(by_name["Range"].coefficient) == pytest.approx((0.4 + part) / (2.0 + part))
    upper = check(_project(make_workbook, [["Basis", "upper"]]))
    upper_kettle = next(
        risk.distribution(r, risk.RiskParameters.from_settings(upper.project.settings))
        for r in upper.loads
        if r.name == "Kettle"
    )
    assert upper_kettle.centre_ma == pytest.approx(0.2 * 120 / 230)  # the median stays typical whatever the Basis


def test_settings_change_the_model_and_the_reported_method(make_workbook):
    base = check(_project(make_workbook))
    wet = check(_project(make_workbook, [["Switch-on factor", 20]]))  # lets the kettle on K1 near 4 mA
    wetter = check(_project(make_workbook, [["Switch-on factor", 30]]))
    assert wetter.circuits[0].risk.switch_on > wet.circuits[0].risk.switch_on > 0.0
    assert wetter.circuits[0].risk.dry == base.circuits[0].risk.dry
    # a narrower spread between models: a thinner tail
    wide_tail = wet
    narrower = check(_project(make_workbook, [["Switch-on factor", 20], ["Model spread", 1.2]]))
    assert 0.0 < narrower.circuits[0].risk.switch_on < wide_tail.circuits[0].risk.switch_on
    changed = check(_project(make_workbook, [["Samples", 2000], ["Seed", 9], ["Meter accuracy", "2 %"]]))
    assert changed.risk.samples == 2000 and changed.risk.seed == 9
    assert "±2 %" in changed.risk.method[1] and "Monte Carlo, 2,000 samples, seed 9" in changed.risk.method[0]
    assert "95th percentile" in base.risk.method[1] and "× 3" in base.risk.method[1]


@pytest.mark.parametrize(
    ("name", "value", "message"),
    [
        ("Samples", 50, "'50' is not auto or a whole number from 100 to 1,000,000"),
        ("Seed", -1, "'-1' is not a whole number of 0 or more"),
        ("Switch-on factor", 0.5, "'0.5' is below 1"),
        ("Upper percentile", "40 %", "'40 %' is not a percentile between 50 % and 100 %"),
    ],
    ids=["samples", "seed", "factor", "percentile"],
)
def test_bad_risk_settings_name_the_cell(make_workbook, name, value, message):
    with pytest.raises(WorkbookError) as info:
        _project(make_workbook, [[name, value]])
    assert f"sheet 'Settings', row 2, column 'Value', cell B2: setting '{name}': {message}" in str(info.value)


def test_random_number_rows_do_not_depend_on_how_many_are_drawn():
    # Cached (small) and uncached (large) requests must share their first rows: the basis of the planner contract.
    small_u, small_z = risk._streams(4, 3, 3000)
    large_u, large_z = risk._streams(4, 2000, 3000)  # 2048 × 3000 > STREAM_CACHE_ELEMENTS: drawn afresh
    assert np.array_equal(small_u, large_u[:3]) and np.array_equal(small_z, large_z[:3])


def test_vectorised_distributions_equal_one_at_a_time(make_workbook):
    result = check(_project(make_workbook))
    params = risk.RiskParameters.from_settings(result.project.settings)
    assert risk.distributions(result.loads, params) == [risk.distribution(r, params) for r in result.loads]
