"""The two-level model of catalogue values: the units of one row share a model factor and vary unit to unit.

Checked against closed forms (the moments of a lognormal; Fenton-Wilkinson, IRE Trans. Comm. Systems 8(1), 1960)
and against an independent brute-force simulation with numpy of every unit of a 14-luminaire office row.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from leakbudget.checking import check
from leakbudget.risk import fenton_wilkinson
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER

APPLIANCES_HEADER = [
    "Key",
    "Typical leakage",
    "Upper leakage",
    "Reference voltage",
    "Reference frequency",
    "Typical source",
    "Upper source",
]


def test_fenton_wilkinson_matches_the_moments_of_the_sum():
    # Closed form: a lognormal of median 1 and σ has mean e^{σ²/2} and variance (e^{σ²} − 1) e^{σ²}; n independent
    # units sum to n times both. The Fenton-Wilkinson lognormal has exactly these two moments.
    sigma = math.log(1.15)
    for n in (1, 2, 14, 200):
        s, mu = fenton_wilkinson(np.array([n]), sigma)
        mean = math.exp(mu[0] + s[0] ** 2 / 2)
        var = (math.exp(s[0] ** 2) - 1) * math.exp(2 * mu[0] + s[0] ** 2)
        assert mean == pytest.approx(n * math.exp(sigma**2 / 2), rel=1e-12)
        assert var == pytest.approx(n * (math.exp(sigma**2) - 1) * math.exp(sigma**2), rel=1e-12)
    s1, mu1 = fenton_wilkinson(np.array([1]), sigma)
    assert (s1[0], mu1[0]) == (pytest.approx(sigma), pytest.approx(0.0, abs=1e-15))  # exact for one unit


def test_fenton_wilkinson_quantiles_match_a_brute_force_sum_of_14_units():
    rng = np.random.default_rng(7)
    sigma = math.log(1.15)
    total = np.exp(sigma * rng.standard_normal((200_000, 14))).sum(axis=1)
    s, mu = fenton_wilkinson(np.array([14]), sigma)
    for q, z in ((0.05, -1.6448536269514715), (0.5, 0.0), (0.95, 1.6448536269514715)):
        assert np.quantile(total, q) == pytest.approx(math.exp(mu[0] + z * s[0]), rel=2e-3)


def office(make_workbook, device: str, upper_source: str = "IEC 60598-1 (class I luminaire, 3.5 mA)"):
    """An office lighting circuit: one row of 14 identical LED panels, typical 0.3 mA, capped at the 3.5 mA
    luminaire limit (IEC 60598-1 class I, as the row cites it)."""
    sheets = {
        "Circuits": [CIRCUITS_HEADER, ["O1", device, 230, 50, "single", 10, None, "Office"]],
        "Loads": [LOADS_HEADER, ["Panels", "O1", "office-panel", 14, None, None, None, None, "Office"]],
        "Appliances": [APPLIANCES_HEADER, ["office-panel", 0.3, 3.5, 230, 50, "typical, from memory", upper_source]],
    }
    return check(read_project(make_workbook(sheets)))


def test_fourteen_luminaires_match_an_independent_two_level_simulation(make_workbook):
    result = office(make_workbook, "rcd-10")
    c = result.circuits[0]
    assert c.leakage_ma == pytest.approx(14 * 0.3)
    # Independent: every unit drawn, sharing one model factor per sample; capped at 14 × 3.5 mA; the trip point
    # uniform between the no-trip 5 mA and the trip 10 mA (IEC 61008-1: 0.5 IΔn to IΔn), integrated exactly.
    rng = np.random.default_rng(2026)
    n = 400_000
    model = np.exp(math.log(1.6) * rng.standard_normal(n))
    units = np.exp(math.log(1.15) * rng.standard_normal((n, 14))).sum(axis=1)
    standing = np.minimum(0.3 * model * units, 14 * 3.5)
    p = np.clip((standing - 5.0) / (10.0 - 5.0), 0.0, 1.0)
    expected, se = p.mean(), p.std() / math.sqrt(n)
    assert c.risk is not None and 0.05 < expected < 0.5
    assert c.risk.dry == pytest.approx(expected, abs=4 * math.hypot(c.risk.dry_se, se) + 0.003)


def test_a_published_limit_is_a_cap_not_a_95th_percentile(make_workbook):
    # The same row read as "upper = 95th percentile" would give σ = ln(3.5 / 0.3) / 1.645 = 1.49 and a circuit at
    # half its budget a real chance of tripping; with the limit as a cap, a 30 mA RCD (budget 9 mA, no-trip 15 mA)
    # with the 14 panels at 4.2 mA (47 % of budget) is ok and has a small likelihood.
    c = office(make_workbook, "rcd-30").circuits[0]
    assert c.headroom_used == pytest.approx(4.2 / 9.0)
    assert c.status.value == "ok" and c.risk is not None and c.risk.dry < 0.01
