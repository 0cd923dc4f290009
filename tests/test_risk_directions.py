"""Directions drawn in the phasor sum: the angle of mixed-nature rows and the share of line-to-line loads.

Outside references, each named in its test:
* the trip likelihood of a fixed magnitude whose angle is uniform on [0°, 90°]: E[clip((|S| − a)/(b − a), 0, 1)],
  computed here by numpy on a fine midpoint grid of the angle (independent of the Monte Carlo engine);
* a symmetric line-to-line pair on split phase (lines 180° apart): its phasor is 2·(f − ½)·2·share·I_line
  (phasor addition), with f = ½ ± D, D ~ U(lo, hi), so |phasor| is uniform and its quantiles are the closed form
  lo' + p·(hi' − lo') of the uniform;
* rows without a drawn direction: the results the engine gave before directions were drawn, recorded from that
  code (same inputs, same seed) and compared bit for bit.
"""

from __future__ import annotations

import cmath
import math

import numpy as np
import pytest

from leakbudget import risk
from leakbudget.checking import check
from leakbudget.devices import DEVICES
from leakbudget.risk import FIXED, LOGNORMAL, UNIFORM
from leakbudget.risk import LeakageDistribution as D
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER

GFCI = DEVICES["gfci-a"]  # UL 943 Class A: no trip below 4 mA, trips at 6 mA
RCD10 = DEVICES["rcd-10"]  # IEC 61008-1: no trip below 5 mA, trips at 10 mA
EXACT_SPREADS = [["Model spread", 1], ["Unit spread", 1], ["Component tolerance", "0.1 %"], ["Meter accuracy", "0.1 %"]]


def capacitive_ma(c_nf: float, v: float, f: float) -> float:
    return 2 * math.pi * f * c_nf * 1e-9 * v * 1e3  # I = 2πfCV [mA]


def angle_uniform_likelihood(magnitude_ma: float, line: complex, other_ma: complex, a: float, b: float) -> float:
    """E[clip((|S| − a)/(b − a), 0, 1)], S = magnitude·line·e^{jθ} + other, θ uniform on [0°, 90°] (midpoint rule)."""
    n = 400_000
    theta = (np.arange(n) + 0.5) / n * (math.pi / 2)
    s = np.abs(magnitude_ma * line * np.exp(1j * theta) + other_ma)
    return float(np.mean(np.clip((s - a) / (b - a), 0.0, 1.0)))


def run(make_workbook, circuits, loads, settings=()):
    sheets = {"Circuits": [CIRCUITS_HEADER, *circuits], "Loads": [LOADS_HEADER, *loads]}
    if settings:
        sheets["Settings"] = [["Setting", "Value"], *settings]
    return check(read_project(make_workbook(sheets)))


# --- (a) the angle of a mixed-nature row --------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("line", "other"),
    [(1.0, 4.34j), (-1.0, 4.34j), (1.0, 3.0 + 2.0j)],
    ids=["on-L1-beside-capacitive", "on-L2-of-split-phase", "beside-mixed-fixed"],
)
def test_mixed_angle_uniform_0_to_90_degrees_against_numpy_quadrature(line, other):
    # A 6 mA mixed row (nominally 45° on its line) beside a fixed phasor, on a 10 mA RCD (5-10 mA band).
    loads = [
        D(FIXED, 6.0, 0.0, line * cmath.exp(1j * math.pi / 4), angle_spread_deg=risk.MIXED_ANGLE_SPREAD_DEG),
        D(FIXED, abs(other), 0.0, other / abs(other)),
    ]
    p = risk.trip_probability(loads, RCD10, sum_rule="phasor", samples=200_000, seed=21)
    expected = angle_uniform_likelihood(6.0, line, other, 5.0, 10.0)
    assert p.samples == 200_000 and p.dry_se > 0.0
    assert p.dry == pytest.approx(expected, abs=4 * p.dry_se)
    # the nominal 45° alone is a different figure: the draw matters here
    fixed = risk.trip_probability([loads[0]._replace(angle_spread_deg=0.0), loads[1]], RCD10, sum_rule="phasor")
    assert abs(fixed.dry - expected) > 10 * p.dry_se


def test_a_catalogue_mixed_row_in_a_check_against_numpy_quadrature(make_workbook):
    # Six built-in ovens (mixed nature, 1 mA typical at 230 V 50 Hz) and a 60 nF filter on a 10 mA RCD; with Model
    # and Unit spread 1 the ovens' magnitude is fixed and only their angle is drawn.
    result = run(
        make_workbook,
        [["W1", "rcd-10", 230, 50, "single", 32, None, "Kitchen"]],
        [
            ["Ovens", "W1", "wall-oven", 6, None, None, None, None, "Kitchen"],
            ["Filter", "W1", None, 1, None, "60 nF", None, None, "Kitchen"],
        ],
        [*EXACT_SPREADS, ["Samples", 200_000]],
    )
    ovens = next(r for r in result.loads if r.name == "Ovens")
    assert ovens.leakage_ma == pytest.approx(6.0)
    expected = angle_uniform_likelihood(6.0, 1.0, 1j * capacitive_ma(60, 230, 50), 5.0, 10.0)
    p = result.circuits[0].risk
    # the filter's ±0.1 % moves the likelihood by at most 0.2 / mA × 0.005 mA = 0.001
    assert p.dry == pytest.approx(expected, abs=4 * p.dry_se + 1e-3)


def test_which_rows_turn_and_which_move_with_the_line_share(make_workbook):
    result = run(
        make_workbook,
        [["K1", "gfci-a", 120, 60, "split", 30, 10, "Kitchen"]],
        [
            ["Oven", "K1", "wall-oven", 1, None, None, None, "L1", "Kitchen"],  # catalogue, mixed: turns
            ["Oven metered", "K1", "wall-oven", 1, "0.9 mA", None, None, "L2", "Kitchen"],  # measured, mixed: turns
            ["Oven filter", "K1", "wall-oven", 1, None, "4.7 nF", None, "L1", "Kitchen"],  # computed: a known angle
            ["Fridge", "K1", "refrigerator", 1, None, None, None, "L1", "Kitchen"],  # capacitive
            ["Range", "K1", "range-electric", 1, None, None, None, "L1-L2", "Kitchen"],  # mixed and line to line
            ["Cooktop", "K1", None, 1, None, "10 nF", None, "L1-L2", "Kitchen"],  # line to line, computed
        ],
    )
    params = risk.RiskParameters.from_settings(result.project.settings)
    by_name = {r.name: risk.distribution(r, params) for r in result.loads}
    assert [by_name[k].angle_spread_deg for k in ("Oven", "Oven metered", "Range")] == [45.0] * 3
    assert [by_name[k].angle_spread_deg for k in ("Oven filter", "Fridge", "Cooktop")] == [0.0] * 3
    assert next(d for k, d in by_name.items() if k.startswith("cable")).angle_spread_deg == 0.0
    for name in ("Range", "Cooktop"):
        assert by_name[name].imbalance != 0 and by_name[name].line_share == 0.6
    assert all(by_name[k].imbalance == 0 and by_name[k].line_share == 0.5 for k in ("Oven", "Fridge", "Oven metered"))
    # coefficient × (1 + (f − 0.6) × imbalance) is the coefficient the estimate gives at Line imbalance f
    at_80 = run(
        make_workbook,
        [["K1", "gfci-a", 120, 60, "split", 30, 10, "Kitchen"]],
        [["Range", "K1", "range-electric", 1, None, None, None, "L1-L2", "Kitchen"]],
        [["Line imbalance", "80 %"]],
    ).loads[0]
    d = by_name["Range"]
    assert d.coefficient * (1 + 0.2 * d.imbalance) == pytest.approx(at_80.phasor_ma / at_80.leakage_ma)


# --- (b) the line share of a symmetric pair -----------------------------------------------------------------------
@pytest.mark.parametrize(
    ("imbalance", "lo", "hi"),
    [("60 %", 0.0, 0.2), ("70 %", 0.0, 0.4), ("90 %", 0.3, 0.5), ("100 %", 0.5, 0.5)],
    ids=["default-60", "70", "90-above-75", "100-one-line"],
)
def test_symmetric_pair_on_split_phase_magnitude_quantiles_closed_form(make_workbook, imbalance, lo, hi):
    # A 10 nF Y capacitance per line to earth between L1 and L2 (share 1 per line): |phasor| = |2(f − ½)|·2·I_line,
    # |f − ½| ~ U(lo, hi) with mean the setting's f − ½, so |phasor| ~ U(4·lo·I, 4·hi·I).
    result = run(
        make_workbook,
        [["K1", "gfci-a", 120, 60, "split", 30, None, "Kitchen"]],
        [["Cooktop", "K1", None, 1, None, "10 nF", None, "L1-L2", "Kitchen"]],
        [*EXACT_SPREADS, ["Line imbalance", imbalance]],
    )
    params = risk.RiskParameters.from_settings(result.project.settings)
    _, loads = risk.circuit_distributions(result, params)
    line_ma = capacitive_ma(10, 120, 60)
    probabilities = np.array([0.05, 0.25, 0.5, 0.75, 0.95])
    q = risk.leakage_quantiles(loads, probabilities, samples=200_000, seed=4)
    closed = 4 * line_ma * (lo + probabilities * (hi - lo))
    # sampling error of a uniform's quantile √(p(1−p)/N) × width, and the ±0.1 % tolerance
    assert q == pytest.approx(closed, abs=4 * line_ma * (hi - lo) * 0.005 + 0.005 * line_ma)
    assert (lo + hi) / 2 == pytest.approx(params.line_share - 0.5)  # the mean imbalance is the setting's


def test_either_line_is_the_heavier_with_equal_chance(make_workbook):
    # The pair beside a fixed 1 mA capacitive load on L1: S = j(1 + 4·I·(f − ½)), f − ½ ~ U(−0.2, 0.2), so
    # |S| ~ U(1 − 0.8·I, 1 + 0.8·I); were L1 always the heavier, |S| would stay above 1 mA.
    result = run(
        make_workbook,
        [["K1", "gfci-a", 120, 60, "split", 30, None, "Kitchen"]],
        [
            ["Cooktop", "K1", None, 1, None, "10 nF", None, "L1-L2", "Kitchen"],
            ["Meter", "K1", None, 1, "1 mA", None, None, "L1", "Kitchen"],
        ],
        EXACT_SPREADS,
    )
    params = risk.RiskParameters.from_settings(result.project.settings)
    _, loads = risk.circuit_distributions(result, params)
    line_ma = capacitive_ma(10, 120, 60)
    probabilities = np.array([0.1, 0.3, 0.5, 0.7, 0.9])
    q = risk.leakage_quantiles(loads, probabilities, samples=200_000, seed=8)
    closed = 1.0 - 0.8 * line_ma + probabilities * 1.6 * line_ma
    assert q == pytest.approx(closed, abs=1.6 * line_ma * 0.005 + 0.003)


@pytest.mark.parametrize("share", [0.5, 0.6, 0.75, 0.9, 1.0])
def test_share_draws_have_the_settings_mean_imbalance_and_stay_within_the_lines(share):
    n = 100_000
    u = ((np.arange(n) + 0.5) / n).astype(np.float32)[None, :]  # an even grid of the uniform
    f = share + risk._share_offsets(u, np.array([share]))[0].astype(float)
    assert np.mean(np.abs(f - 0.5)) == pytest.approx(share - 0.5, abs=1e-5)
    assert f.min() >= -1e-6 and f.max() <= 1 + 1e-6
    assert np.mean(f > 0.5) == pytest.approx(0.5 if share > 0.5 else 0.0, abs=1e-4)


# --- (c) rows without a drawn direction: the results of before ----------------------------------------------------
def _recorded_groups():
    rng = np.random.default_rng(5)
    groups, loads = [], []
    for g in range(12):
        for _ in range(int(rng.integers(1, 6))):
            kind = (FIXED, UNIFORM, LOGNORMAL)[int(rng.integers(0, 3))]
            loads.append(
                D(
                    kind,
                    float(rng.uniform(0.5, 3.0)),
                    float(rng.uniform(0.05, 0.9)),
                    complex(np.exp(1j * rng.choice([0.0, np.pi, 2.0944, np.pi / 2]))),
                    float(rng.choice([1.0, 3.0])),
                )
            )
            groups.append(g)
    return groups, loads


# Recorded with the engine of this file's last change: the sampled sums are float32 from the draw to the trip
# likelihood's mean, which moved every value of the float64 sums recorded before by at most 3e-8.
RECORDED = {
    "arithmetic": [
        (0.8182900433540344, 0.005522963708430911, 0.9633553745746612, 0.002262273016457638, 3000),
        (0.8828189032077789, 0.0037281858352174175, 0.9997755898634593, 0.00012257290338357987, 3000),
        (0.4089735949039459, 0.004132266784338397, 0.9971952948570252, 0.00043633435414352866, 3000),
        (0.0, 0.0, 0.9196758714174837, 0.0, 0),
        (1.0, 0.0, 1.0, 0.0, 3000),
        (0.0, 0.0, 0.0, 0.0, 0),
        (0.14657784271240235, 0.005951828023143987, 0.5878083389600118, 0.008387987166479876, 3000),
        (1.0, 0.0, 1.0, 0.0, 3000),
        (0.9995527694225311, 0.00014557357064079015, 1.0, 0.0, 3000),
        (0.0, 0.0, 0.9849878493944804, 0.0003316649659168415, 3000),
        (0.0, 0.0, 0.48401872483889263, 0.008043758448211001, 3000),
        (0.3308789180119832, 0.006913406702986043, 0.9998861478169759, 9.208541595160733e-05, 3000),
    ],
    "phasor": [
        (0.26038823715845744, 0.006905144370953689, 0.4383023104667664, 0.0074532815955917955, 3000),
        (0.449519544839859, 0.007105350099444745, 0.9814103701909384, 0.0016681997205207622, 3000),
        (0.4089735949039459, 0.004132266784338397, 0.9971952948570252, 0.00043633435414352866, 3000),
        (0.0, 0.0, 0.9196758714174837, 0.0, 0),
        (0.6659953494071961, 0.0070537720616766705, 0.9472922530968984, 0.0031013320413892046, 3000),
        (0.0, 0.0, 0.0, 0.0, 0),
        (0.146577841202418, 0.005951827978670719, 0.5878083321253459, 0.008387987181663639, 3000),
        (0.19620539824167887, 0.004285017170204197, 0.9517642091910045, 0.0028403277979430993, 3000),
        (0.8134979779720306, 0.004236599720987902, 0.997268091281255, 0.0005198003060400863, 3000),
        (0.0, 0.0, 0.9849878493944804, 0.0003316649659168415, 3000),
        (0.0, 0.0, 0.48401872483889263, 0.008043758448211001, 3000),
        (0.29582777015368145, 0.006699697828518976, 0.9998034086227418, 0.00011450276441368091, 3000),
    ],
}
RECORDED_CHECK = [
    (0.00011579430103302001, 4.829127720794515e-05, 0.03402015244960785, 0.00250084034461152, 2000),
    (0.013918479442596436, 0.0008289655743162824, 0.015472206234931946, 0.0008992856119515795, 2000),
    (0.037079812514792136, 0.0019274426779591024, 0.03786511476703436, 0.0019499881872829126, 2000),
]


@pytest.mark.parametrize("rule", ["arithmetic", "phasor"])
def test_rows_without_directions_give_the_recorded_results_bit_for_bit(rule):
    groups, loads = _recorded_groups()
    results = risk.group_trip_probabilities(groups, loads, 12, [(4.0, 6.0)] * 12, sum_rule=rule, samples=3000, seed=4)
    assert [tuple(r) for r in results] == RECORDED[rule]


def test_a_check_without_mixed_or_line_to_line_loads_gives_the_recorded_results_bit_for_bit(make_workbook):
    result = run(
        make_workbook,
        [
            ["K1", "gfci-a", 120, 60, "single", 20, 30, "Kitchen"],
            ["K2", "gfci-a", 120, 60, "split", 30, 15, "Kitchen"],
            ["E1", "rcd-30", 230, 50, "single", 32, 40, "Office"],
        ],
        [
            ["Kettle", "K1", "kettle", 4, None, None, None, None, "Kitchen"],
            ["Fridge", "K1", "refrigerator", 2, None, None, None, None, "Kitchen"],
            ["Filter", "K1", None, 1, None, "4.7 nF", None, None, "Kitchen"],
            ["Meter", "K1", None, 2, "0.9 mA", None, None, None, "Kitchen"],
            ["Hood", "K2", "range-hood", 2, None, None, None, "L2", "Kitchen"],
            ["Microwave", "K2", "microwave", 6, None, None, None, "L1", "Kitchen"],
            ["Toaster", "K2", "toaster", 1, None, None, None, "L2", "Kitchen"],
            ["PC", "E1", "desktop-pc", 5, None, None, None, None, "Office"],
            ["Printer", "E1", "printer", 1, None, None, None, None, "Office"],
            ["Heater", "E1", "space-heater", 1, None, None, None, None, "Office"],
        ],
        [["Samples", 2000], ["Seed", 3]],
    )
    assert [tuple(c.risk) for c in result.circuits] == RECORDED_CHECK


def test_a_row_drawn_for_its_direction_leaves_the_other_rows_magnitude_draws_alone():
    # The directions come from their own stream: a fixed-magnitude turning row put first (a negligible 1 µA) does
    # not shift the magnitude draws of the lognormal row after it.
    alone = [D(LOGNORMAL, 4.5, 0.3)]
    turning = D(FIXED, 1e-3, 0.0, cmath.exp(1j * math.pi / 4), angle_spread_deg=45.0)
    p, q = (risk.trip_probability(x, GFCI, sum_rule="phasor", samples=5000, seed=6) for x in (alone, [turning, *alone]))
    # 1 µA moves F_T by at most 0.5 / mA × 0.001 mA; another magnitude draw would move it by about √2 × SE
    assert p.dry_se > 5 * 6e-4  # so a shifted magnitude stream would show
    assert q.dry == pytest.approx(p.dry, abs=6e-4) and q.dry != p.dry


def test_the_arithmetic_sum_draws_no_directions():
    loads = [
        D(LOGNORMAL, 2.0, 0.4, cmath.exp(1j * math.pi / 4), 3.0, angle_spread_deg=45.0),
        D(UNIFORM, 1.5, 0.1, 0.4 + 0j, 1.0, math.inf, 5.0 + 0j, 0.6, 0.0),
        D(FIXED, 1.0, 0.0, cmath.exp(1j * math.pi / 4), angle_spread_deg=45.0),
    ]
    plain = [d._replace(angle_spread_deg=0.0, imbalance=0j, line_share=0.5) for d in loads]
    assert risk.trip_probability(loads, GFCI, samples=3000) == risk.trip_probability(plain, GFCI, samples=3000)
    assert risk.trip_probability(loads, GFCI, sum_rule="phasor", samples=3000) != risk.trip_probability(
        plain, GFCI, sum_rule="phasor", samples=3000
    )


# --- The engine: blocks, reproducibility, the check and planner contract ------------------------------------------
@pytest.mark.parametrize("sparse", [False, True], ids=["reduceat", "sparse-product"])
def test_directed_rows_many_circuits_at_once_equal_one_at_a_time_and_blocks_do_not_matter(sparse, monkeypatch):
    # With ``sparse`` the many-circuit runs sum their groups by the sparse matrix product that large workbooks
    # use; the one-circuit reference below keeps numpy's reduceat, so the two ways of summing are compared too.
    rng = np.random.default_rng(9)
    groups, loads = [], []
    for g in range(30):
        for _ in range(int(rng.integers(0, 6))):
            kind = (FIXED, UNIFORM, LOGNORMAL)[int(rng.integers(0, 3))]
            line = complex(np.exp(1j * rng.choice([0.0, np.pi, 2.0944])))
            what = int(rng.integers(0, 4))  # none, a turn, a line share, both
            loads.append(
                D(
                    kind,
                    float(rng.uniform(0.2, 2.5)),
                    float(rng.uniform(0.05, 0.9)),
                    line * cmath.exp(1j * math.pi / 4),
                    float(rng.choice([1.0, 3.0])),
                    math.inf,
                    complex(rng.uniform(-5, 5), rng.uniform(-1, 1)) if what >= 2 else 0j,
                    float(rng.choice([0.6, 0.8])) if what >= 2 else 0.5,
                    45.0 if what in (1, 3) else 0.0,
                )
            )
            groups.append(g)
    order = sorted(range(len(loads)), key=lambda i: -groups[i])
    levels = [(4.0, 6.0)] * 30
    if sparse:
        monkeypatch.setattr(risk, "SPARSE_SUM_ELEMENTS", 0)
    together = risk.group_trip_probabilities(
        [groups[i] for i in order], [loads[i] for i in order], 30, levels, sum_rule="phasor", samples=500, seed=2
    )
    tiny = risk.group_trip_probabilities(
        groups, loads, 30, levels, sum_rule="phasor", samples=500, seed=2, block_elements=700
    )
    again = risk.group_trip_probabilities(groups, loads, 30, levels, sum_rule="phasor", samples=500, seed=2)
    other = risk.group_trip_probabilities(groups, loads, 30, levels, sum_rule="phasor", samples=500, seed=3)
    assert again == risk.group_trip_probabilities(groups, loads, 30, levels, sum_rule="phasor", samples=500, seed=2)
    assert again != other
    monkeypatch.undo()
    for g in range(30):
        mine = [d for d, gg in zip(loads, groups) if gg == g]
        alone = risk.trip_probability(mine, GFCI, sum_rule="phasor", samples=500, seed=2)
        for x in (together[g], tiny[g], again[g]):
            assert x.dry == pytest.approx(alone.dry, rel=1e-5, abs=1e-9)
            assert x.switch_on == pytest.approx(alone.switch_on, rel=1e-5, abs=1e-9)
            assert x.dry_se == pytest.approx(alone.dry_se, rel=1e-5, abs=1e-9)


def test_check_reproduced_by_trip_probability_with_directions_and_waveform_bands(make_workbook):
    # The planner contract with drawn directions, on a Type A circuit (a pulsating-DC part counts by its own band)
    # and a split-phase one with a mixed line-to-line range.
    header = [*CIRCUITS_HEADER, "RCD type"]
    sheets = {
        "Circuits": [
            header,
            ["W1", "rcd-30", 230, 50, "three", 16, 20, "Workshop", "A"],
            ["K1", "gfci-a", 120, 60, "split", 40, 10, "Kitchen", None],
        ],
        "Loads": [
            [*LOADS_HEADER, "Waveform"],
            ["Drive", "W1", None, 1, "9 mA", None, None, "L1", "Workshop", "pulsating-dc"],
            ["Ovens", "W1", "wall-oven", 3, None, None, None, "L2", "Workshop", None],
            ["Heater", "W1", None, 1, None, "40 nF", None, "L1-L3", "Workshop", None],
            ["PC", "W1", "desktop-pc", 2, None, None, None, "L3", "Workshop", None],
            ["Range", "K1", "range-electric", 2, None, None, None, None, "Kitchen", None],
            ["Dryer", "K1", "dryer", 2, None, None, None, None, "Kitchen", None],
            ["Kettle", "K1", "kettle", 2, None, None, None, "L2", "Kitchen", None],
        ],
        "Settings": [["Setting", "Value"], ["Samples", 4000], ["Switch-on factor", 6]],
    }
    result = check(read_project(make_workbook(sheets)))
    params = risk.RiskParameters.from_settings(result.project.settings)
    groups, distributions = risk.circuit_distributions(result, params)
    for i, c in enumerate(result.circuits):
        mine = [d for g, d in zip(groups, distributions) if g == i]
        again = risk.trip_probability(
            mine, c.circuit.device, sum_rule=risk.LIKELIHOOD_SUM, samples=result.risk.samples, seed=result.risk.seed
        )
        assert c.risk.samples == 4000 and 0.0 < c.risk.switch_on < 1.0
        assert (again.dry, again.switch_on, again.dry_se, again.switch_on_se) == (
            pytest.approx(c.risk.dry, rel=1e-5, abs=1e-9),
            pytest.approx(c.risk.switch_on, rel=1e-5, abs=1e-9),
            pytest.approx(c.risk.dry_se, rel=1e-5, abs=1e-9),
            pytest.approx(c.risk.switch_on_se, rel=1e-5, abs=1e-9),
        )


def test_method_lines_say_both_draws_are_modelling_choices(make_workbook):
    result = run(
        make_workbook,
        [["K1", "gfci-a", 120, 60, "split", 30, None, "Kitchen"]],
        [["Range", "K1", "range-electric", 1, None, None, None, None, "Kitchen"]],
    )
    line = result.risk.method[2]
    assert line.startswith("Directions in the phasor sum") and "modelling choices" in line
    assert "uniform between 0° (resistive) and 90° (capacitive)" in line
    assert "50 % ± D, D uniform between 0 % and 20 %, either line the heavier" in line and "60 % / 40 %" in line
    high = risk.direction_line(risk.RiskParameters(line_share=0.9))
    assert "D uniform between 30 % and 50 %" in high and "90 % / 10 %" in high
    assert len(risk.method_lines(params := risk.RiskParameters(), 100, "arithmetic")) == 2
    assert risk.method_lines(params, 100)[2] == risk.direction_line(params)
