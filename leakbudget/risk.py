"""Likelihood of a nuisance trip: Monte Carlo over each load's leakage and the device's trip point.

Model (every choice is a setting or a named constant, with its source):

* Each load row's standing leakage [mA] is a random variable, for its whole quantity (the units of one row share
  one draw: their spread is mostly which model and batch they are, which identical units share; this is the
  conservative choice, a wider tail than independent units):

  - measured (your ``Leakage`` value, or an identical unit's): uniform within ± ``Meter accuracy`` of the value.
    A rectangular distribution is what JCGM 100:2008 (GUM) 4.3.7 prescribes when only the bounds of an
    instrument's error are known;
  - computed (``Y capacitance``, ``Insulation resistance``, cable runs): uniform within ± ``Component tolerance``;
  - catalogue: lognormal with the typical value as its median and the upper value as its ``Upper percentile``
    (default the 95th): ln I ~ N(ln typical, σ²), σ = ln(upper / typical) / Φ⁻¹(p). Where the upper value is a
    published limit that compliant units never exceed, this overstates the tail (conservative).

* Switch-on after idle: heating and cooking elements (catalogue ``Heating`` = yes) absorb moisture when cold and
  leak several times their dry value at switch-on. The second scenario multiplies their draws by the
  ``Switch-on factor`` (default 3, from memory; no published source fixes the figure).

* The device's trip point T is uniform between its no-trip level a and its trip level b: the standards fix only
  that band (UL 943 Class A 4-6 mA; IEC 61008-1 / IEC 61009-1 0.5 IΔn - IΔn).

* The standing leakage S is the same per-circuit sum the budget uses (``Sum`` setting: arithmetic, or the
  magnitude of the phasor sum). P(trip) = P(S ≥ T) = E[F_T(S)], F_T(s) = clip((s − a) / (b − a), 0, 1): the
  trip point is integrated exactly and only S is sampled (conditional Monte Carlo; the estimator's variance is
  never larger than that of counting trips). Standard error = sample standard deviation of F_T(S) / √N.
  When no sample reaches the no-trip level the estimate is 0 and the 95 % upper bound is 3 / N (the "rule of
  three", Hanley & Lippman-Hand, JAMA 249(13), 1983).

* Random numbers: two streams (uniform and standard normal), seeded from the ``Seed`` setting, each a matrix
  of ``positions × samples``. The k-th random load of a circuit uses row k. So a circuit's result depends only on
  its own loads, their order and the seed (never on the other circuits), and :func:`trip_probability` on a
  circuit's loads reproduces what ``check`` printed for it. Estimates of different circuits share draws, so they
  are correlated with one another; each one alone is unbiased with the stated standard error.

All arrays are numpy; work is vectorised over loads and samples, in blocks of bounded size.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from statistics import NormalDist
from typing import Any, NamedTuple

import numpy as np

from leakbudget.devices import Device
from leakbudget.estimate import CATALOGUE, MEASURED, Estimate, LoadResult, trip_weights
from leakbudget.provenance import Kind
from leakbudget.settings import (
    COMPONENT_TOLERANCE_DEFAULT,
    METER_ACCURACY_DEFAULT,
    MODEL_SPREAD_DEFAULT,
    SEED_DEFAULT,
    SWITCH_ON_FACTOR_DEFAULT,
    UNIT_SPREAD_DEFAULT,
    UPPER_PERCENTILE_DEFAULT,
)

# --- Sample count and work sizes -----------------------------------------------------------------------------------
SAMPLES_MAX = 10_000  # auto: standard error at most 0.5 / √10,000 = 0.005
SAMPLES_MIN = 1_000  # auto never goes below this (standard error at most 0.016)
ELEMENT_BUDGET = 20_000_000  # auto: random loads × samples kept below this unless SAMPLES_MIN forces more
BLOCK_ELEMENTS = 250_000  # rows × samples drawn at once: 1 MB of float32, small enough to stay in cache
STREAM_CACHE_ELEMENTS = 4_000_000  # random-number matrices up to this size are kept for reuse (16 MB each)
RULE_OF_THREE = 3.0  # 95 % upper bound on a probability after 0 events in N trials is 3 / N (Hanley 1983)

# Shapes of a load's distribution.
FIXED = "fixed"
UNIFORM = "uniform"
LOGNORMAL = "lognormal"
SHAPES = (FIXED, UNIFORM, LOGNORMAL)


# --- The model ---------------------------------------------------------------------------------------------------
class LeakageDistribution(NamedTuple):
    """One load row's standing leakage as a random variable, for its whole quantity.

    ``centre_ma`` is the fixed value, the centre of the uniform, or the median of the lognormal [mA].
    ``spread`` is 0 (fixed), the relative half-width a of the uniform (value in centre × [1 − a, 1 + a]), or σ of
    ln I for the lognormal [dimensionless]. ``coefficient`` turns the magnitude into the circuit's phasor frame
    (|c| ≤ 1: 1 for a load on L1, −1 on L2 of a split-phase circuit, 0 for a symmetric L1-L2 load, less than 1 for
    a balanced cable run) [dimensionless]. ``switch_on_factor`` multiplies the draw in the switch-on scenario.
    ``cap`` bounds a lognormal draw at ``cap × centre_ma`` (the catalogue upper value: a unit that is not faulty
    stays at or below its limit; leakage above it is a fault, which the review flags) [dimensionless].
    """

    shape: str
    centre_ma: float
    spread: float = 0.0
    coefficient: complex = 1.0 + 0.0j
    switch_on_factor: float = 1.0
    cap: float = math.inf


class TripProbability(NamedTuple):
    """P(standing leakage ≥ trip point) in dry running and at switch-on after idle, with standard errors."""

    dry: float
    dry_se: float
    switch_on: float
    switch_on_se: float
    samples: int  # 0 when nothing on the circuit is random (the result is exact)

    @property
    def sampled(self) -> bool:
        return self.samples > 0

    def upper_95(self, switch_on: bool = False) -> float | None:
        """95 % upper bound 3 / N when no sample reached the no-trip level (rule of three), else None."""
        p = self.switch_on if switch_on else self.dry
        return RULE_OF_THREE / self.samples if self.sampled and p == 0.0 else None


@dataclass(frozen=True, slots=True)
class RiskParameters:
    """The settings the model uses (fractions are dimensionless)."""

    meter_accuracy: float = METER_ACCURACY_DEFAULT
    component_tolerance: float = COMPONENT_TOLERANCE_DEFAULT
    upper_percentile: float = UPPER_PERCENTILE_DEFAULT
    model_spread: float = MODEL_SPREAD_DEFAULT  # geometric standard deviation between models [dimensionless]
    unit_spread: float = UNIT_SPREAD_DEFAULT  # geometric standard deviation between units of one model
    switch_on_factor: float = SWITCH_ON_FACTOR_DEFAULT
    samples: int | None = None  # None = auto
    seed: int = SEED_DEFAULT
    basis: str = "typical"  # the catalogue value the point estimate used (Basis setting)

    @classmethod
    def from_settings(cls, settings: Any) -> RiskParameters:
        return cls(
            meter_accuracy=float(settings["Meter accuracy"]),
            component_tolerance=float(settings["Component tolerance"]),
            upper_percentile=float(settings["Upper percentile"]),
            model_spread=float(settings["Model spread"]),
            unit_spread=float(settings["Unit spread"]),
            switch_on_factor=float(settings["Switch-on factor"]),
            samples=settings["Samples"],
            seed=int(settings["Seed"]),
            basis=str(settings["Basis"]),
        )


@dataclass
class RiskResult:
    """Per-circuit trip probabilities (None for unprotected circuits) and how they were computed."""

    circuits: list[TripProbability | None]
    samples: int
    seed: int
    sum_rule: str
    parameters: RiskParameters
    method: list[str] = field(default_factory=list)  # plain sentences with sources


@lru_cache(maxsize=4096)
def lognormal_sigma(typical_ma: float, upper_ma: float, percentile: float) -> float:
    """σ of ln I when the typical value is the median and the upper value the given percentile [dimensionless].

    σ = ln(upper / typical) / Φ⁻¹(percentile); 0 when upper ≤ typical or typical ≤ 0.
    """
    if typical_ma <= 0.0 or upper_ma <= typical_ma:
        return 0.0
    return math.log(upper_ma / typical_ma) / NormalDist().inv_cdf(percentile)


def trip_point_cdf(current_ma, no_trip_ma, trip_ma):
    """P(T ≤ I) for a trip point T uniform between the no-trip and trip levels [mA]; arrays broadcast."""
    return np.clip((np.asarray(current_ma, dtype=float) - no_trip_ma) / (trip_ma - no_trip_ma), 0.0, 1.0)


def auto_samples(random_rows: int) -> int:
    """Samples for ``random_rows`` random loads: SAMPLES_MAX, fewer for huge workbooks, never below SAMPLES_MIN."""
    if random_rows <= 0:
        return SAMPLES_MAX
    return int(min(SAMPLES_MAX, max(SAMPLES_MIN, ELEMENT_BUDGET // random_rows // 100 * 100)))


def _streams(seed: int, positions: int, samples: int) -> tuple[np.ndarray, np.ndarray]:
    """Uniform and standard-normal draws, ``positions × samples`` each, from two independent seeded streams.

    numpy fills the matrices row by row, so the first k rows are the same whatever ``positions`` is; small
    requests are served as slices of a cached larger matrix (the split planner calls this many times).
    """
    capacity = max(16, 1 << (positions - 1).bit_length())
    if capacity * samples <= STREAM_CACHE_ELEMENTS:
        uniform, normal = _cached_streams(seed, capacity, samples)
        return uniform[:positions], normal[:positions]
    return _draw_streams(seed, positions, samples)


def _draw_streams(seed: int, positions: int, samples: int) -> tuple[np.ndarray, np.ndarray]:
    uniform_seq, normal_seq = np.random.SeedSequence(seed).spawn(2)
    uniform = np.random.Generator(np.random.PCG64(uniform_seq)).random((positions, samples), dtype=np.float32)
    normal = np.random.Generator(np.random.PCG64(normal_seq)).standard_normal((positions, samples), dtype=np.float32)
    return uniform, normal


@lru_cache(maxsize=4)
def _cached_streams(seed: int, positions: int, samples: int) -> tuple[np.ndarray, np.ndarray]:
    uniform, normal = _draw_streams(seed, positions, samples)
    uniform.flags.writeable = False
    normal.flags.writeable = False
    return uniform, normal


@dataclass
class _Rows:
    """Load distributions as arrays, sorted by group (circuit), sheet order kept within a group."""

    group: np.ndarray  # int64
    shape: np.ndarray  # 0 fixed, 1 uniform, 2 lognormal
    centre: np.ndarray  # [mA]
    spread: np.ndarray
    coefficient: np.ndarray  # complex
    factor: np.ndarray  # switch-on factor
    cap: np.ndarray  # lognormal draws are bounded at cap × centre

    @classmethod
    def from_arrays(
        cls,
        group: np.ndarray,
        shape: np.ndarray,
        centre: np.ndarray,
        spread: np.ndarray,
        coefficient: np.ndarray,
        factor: np.ndarray,
        cap: np.ndarray,
    ) -> _Rows:
        """Sort by group (stable) and mark rows without spread, or with nothing to spread, as fixed."""
        shape = np.where((spread <= 0.0) | (centre <= 0.0), 0, shape).astype(np.int8)
        order = np.argsort(group, kind="stable")
        return cls(
            group[order], shape[order], centre[order], spread[order], coefficient[order], factor[order], cap[order]
        )

    @classmethod
    def build(cls, groups: Sequence[int], loads: Sequence[LeakageDistribution]) -> _Rows:
        columns = list(zip(*loads)) if loads else [(), (), (), (), (), ()]
        shape = np.array([SHAPES.index(s) for s in columns[0]], dtype=np.int8)
        return cls.from_arrays(
            np.asarray(groups, dtype=np.int64),
            shape,
            np.asarray(columns[1], dtype=float),
            np.asarray(columns[2], dtype=float),
            np.asarray(columns[3], dtype=complex),
            np.asarray(columns[4], dtype=float),
            np.asarray(columns[5], dtype=float),
        )

    def subset(self, keep: np.ndarray) -> _Rows:
        return _Rows(
            self.group[keep],
            self.shape[keep],
            self.centre[keep],
            self.spread[keep],
            self.coefficient[keep],
            self.factor[keep],
            self.cap[keep],
        )

    def weights(self, sum_rule: str) -> np.ndarray:
        """Per-row weights whose weighted sums make S: (arithmetic) Σv, Σv(f−1); (phasor) re, im, dry and extra."""
        extra = self.factor - 1.0
        if sum_rule == "phasor":
            c = self.coefficient
            return np.stack([c.real, c.imag, extra * c.real, extra * c.imag])
        return np.stack([np.ones_like(extra), extra])


def _combine(sums: np.ndarray, sum_rule: str) -> tuple[np.ndarray, np.ndarray]:
    """Dry and switch-on standing leakage from weighted sums (axis 1 indexes the weights) [mA]."""
    if sum_rule == "phasor":
        re, im, extra_re, extra_im = (sums[:, m] for m in range(4))
        return np.hypot(re, im), np.hypot(re + extra_re, im + extra_im)
    return sums[:, 0], sums[:, 0] + sums[:, 1]


def _positions(group: np.ndarray) -> np.ndarray:
    """0, 1, 2, … within each run of equal (sorted) group ids."""
    n = len(group)
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    starts = np.flatnonzero(np.r_[True, group[1:] != group[:-1]])
    return np.arange(n) - np.repeat(starts, np.diff(np.r_[starts, n]))


def _draw(
    shape: np.ndarray,
    centre: np.ndarray,
    spread: np.ndarray,
    pos: np.ndarray,
    uniform: np.ndarray,
    normal: np.ndarray,
    cap: np.ndarray,
) -> np.ndarray:
    """Leakage draws [mA], one row per random load: centre × (1 + a(2U − 1)) or centre × min(exp(σZ), cap)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        z_cap = np.where(spread > 0.0, np.log(cap) / np.where(spread > 0.0, spread, 1.0), np.inf)

    def lognormal(rows: np.ndarray | slice) -> np.ndarray:
        z = normal[pos[rows]]
        np.minimum(z, z_cap[rows, None].astype(np.float32), out=z)
        z *= spread[rows, None].astype(np.float32)
        np.exp(z, out=z)
        z *= centre[rows, None].astype(np.float32)
        return z

    def uniform_(rows: np.ndarray | slice) -> np.ndarray:
        u = uniform[pos[rows]]
        u *= (2.0 * spread[rows] * centre[rows])[:, None].astype(np.float32)
        u += ((1.0 - spread[rows]) * centre[rows])[:, None].astype(np.float32)
        return u

    uni = shape == 1
    if not uni.any():
        return lognormal(slice(None))
    if uni.all():
        return uniform_(slice(None))
    values = np.empty((len(pos), uniform.shape[1]), dtype=np.float32)
    values[uni] = uniform_(uni)
    values[~uni] = lognormal(~uni)
    return values


def _segment_sums(values: np.ndarray, group: np.ndarray, weights: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Weighted sums of ``values`` rows per run of equal group ids: (groups, sums[group, weight, sample])."""
    starts = np.flatnonzero(np.r_[True, group[1:] != group[:-1]])
    segs = group[starts]
    sums = np.zeros((len(segs), len(weights), values.shape[1]))
    for m, w in enumerate(weights):
        nz = w != 0.0
        if nz.all():  # every row counts: no copy
            weighted = values if (w == 1.0).all() else values * w[:, None].astype(np.float32)
            sums[:, m] = np.add.reduceat(weighted, starts, axis=0)
        elif nz.any():
            sub_group = group[nz]
            sub_starts = np.flatnonzero(np.r_[True, sub_group[1:] != sub_group[:-1]])
            weighted = values[nz] * w[nz, None].astype(np.float32)
            sums[np.searchsorted(segs, sub_group[sub_starts]), m] = np.add.reduceat(weighted, sub_starts, axis=0)
    return segs, sums


def _random_sums(
    rows: _Rows, sum_rule: str, samples: int, seed: int, block_elements: int = BLOCK_ELEMENTS
) -> Iterator[tuple[np.ndarray, np.ndarray]]:
    """Weighted sums over each group's random loads, per sample: yields (group ids, sums[group, weight, sample]).

    Groups come in order, each exactly once, in blocks of at most ``block_elements`` draws; a group cut by a
    block boundary is carried into the next block.
    """
    random = rows.shape != 0
    group = rows.group[random]
    if len(group) == 0:
        return
    shape, centre, spread, cap = rows.shape[random], rows.centre[random], rows.spread[random], rows.cap[random]
    weights = rows.weights(sum_rule)[:, random]
    pos = _positions(group)
    uniform, normal = _streams(seed, int(pos.max()) + 1, samples)
    step = max(1, block_elements // samples)
    carry_group: int | None = None
    carry: np.ndarray | None = None
    n = len(group)
    for i in range(0, n, step):
        j = min(n, i + step)
        values = _draw(shape[i:j], centre[i:j], spread[i:j], pos[i:j], uniform, normal, cap[i:j])
        segs, sums = _segment_sums(values, group[i:j], weights[:, i:j])
        if carry is not None:
            if segs[0] == carry_group:
                sums[0] += carry
            else:
                yield np.array([carry_group]), carry[None]
        carry = None
        if j < n and group[j] == segs[-1]:
            carry_group, carry = int(segs[-1]), sums[-1]
            segs, sums = segs[:-1], sums[:-1]
        if len(segs):
            yield segs, sums
    if carry is not None:
        yield np.array([carry_group]), carry[None]


def _fixed_sums(rows: _Rows, sum_rule: str, n_groups: int) -> np.ndarray:
    """Weighted sums of the fixed (non-random) loads per group: array [group, weight]."""
    fixed = rows.shape == 0
    weights = rows.weights(sum_rule)
    return np.stack(
        [np.bincount(rows.group[fixed], weights=rows.centre[fixed] * w[fixed], minlength=n_groups) for w in weights],
        axis=1,
    )


def _mean_se(y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean over samples (last axis) and its standard error, std / √N."""
    n = y.shape[-1]
    return y.mean(axis=-1), (y.std(axis=-1, ddof=1) / math.sqrt(n) if n > 1 else np.zeros(y.shape[:-1]))


def group_trip_probabilities(
    groups: Sequence[int],
    loads: Sequence[LeakageDistribution],
    n_groups: int,
    levels_ma: Sequence[tuple[float, float] | None],
    *,
    sum_rule: str = "arithmetic",
    samples: int = SAMPLES_MAX,
    seed: int = SEED_DEFAULT,
    block_elements: int = BLOCK_ELEMENTS,
) -> list[TripProbability | None]:
    """P(trip) for many groups (circuits) at once, vectorised over loads and samples.

    ``groups[i]`` is the group of ``loads[i]``; ``levels_ma[g]`` is (no-trip, trip) level of group g's device
    [mA], or None for an unprotected group (its result is None).
    """
    return _trip_probabilities(_Rows.build(groups, loads), n_groups, levels_ma, sum_rule, samples, seed, block_elements)


def _trip_probabilities(
    rows: _Rows,
    n_groups: int,
    levels_ma: Sequence[tuple[float, float] | None],
    sum_rule: str,
    samples: int,
    seed: int,
    block_elements: int = BLOCK_ELEMENTS,
) -> list[TripProbability | None]:
    fixed = _fixed_sums(rows, sum_rule, n_groups)
    protected = np.array([lv is not None for lv in levels_ma], dtype=bool)
    lo = np.array([lv[0] if lv is not None else 0.0 for lv in levels_ma])
    hi = np.array([lv[1] if lv is not None else 1.0 for lv in levels_ma])
    # Exact results for every group from its fixed loads; groups with random loads are overwritten below.
    dry, sw = _combine(fixed[:, :, None], sum_rule)
    exact_dry = trip_point_cdf(dry[:, 0], lo, hi).tolist()
    exact_sw = trip_point_cdf(sw[:, 0], lo, hi).tolist()
    out: list[TripProbability | None] = [
        TripProbability(exact_dry[g], 0.0, exact_sw[g], 0.0, 0) if protected[g] else None for g in range(n_groups)
    ]
    rows = rows.subset(protected[rows.group])
    for segs, sums in _random_sums(rows, sum_rule, samples, seed, block_elements):
        sums += fixed[segs][:, :, None]
        dry, sw = _combine(sums, sum_rule)
        a, b = lo[segs, None], hi[segs, None]
        p_dry, se_dry = _mean_se(trip_point_cdf(dry, a, b))
        p_sw, se_sw = _mean_se(trip_point_cdf(sw, a, b))
        for k, g in enumerate(segs.tolist()):
            out[g] = TripProbability(float(p_dry[k]), float(se_dry[k]), float(p_sw[k]), float(se_sw[k]), samples)
    return out


def trip_probability(
    loads: Sequence[LeakageDistribution],
    device: Device,
    *,
    sum_rule: str = "arithmetic",
    samples: int = SAMPLES_MAX,
    seed: int = SEED_DEFAULT,
) -> TripProbability:
    """P(standing leakage ≥ trip point) for a set of loads on one device, dry and at switch-on.

    The pure function the split planner calls for a candidate circuit. With the ``samples`` and ``seed`` that
    ``check`` used (``RiskResult.samples``, ``RiskResult.seed``) and the loads in the same order it uses the same
    draws, so it returns what ``check`` reported for that circuit (up to float32 summation order). Raises
    ValueError for an unprotected device.
    """
    if not device.protected:
        raise ValueError(f"device '{device.key}' does not trip on residual current")
    result = group_trip_probabilities(
        [0] * len(loads), loads, 1, [(device.no_trip_ma, device.trip_ma)], sum_rule=sum_rule, samples=samples, seed=seed
    )[0]
    assert result is not None
    return result


def leakage_quantiles(
    loads: Sequence[LeakageDistribution],
    probabilities: Sequence[float],
    *,
    sum_rule: str = "phasor",
    samples: int = SAMPLES_MAX,
    seed: int = SEED_DEFAULT,
) -> np.ndarray:
    """Quantiles of one circuit's dry standing leakage [mA] (e.g. 0.025, 0.5, 0.975 for a 95 % interval).

    The interval from the sorted Monte Carlo values is the coverage interval of JCGM 101:2008 clause 7.7.
    """
    rows = _Rows.build([0] * len(loads), loads)
    fixed = _fixed_sums(rows, sum_rule, 1)
    dry = None
    for _, sums in _random_sums(rows, sum_rule, samples, seed):
        dry, _ = _combine(sums + fixed[:, :, None], sum_rule)
    if dry is None:
        dry, _ = _combine(fixed[:, :, None], sum_rule)
    return np.quantile(dry[0], np.asarray(probabilities, dtype=float))


def likelihood_text(p: TripProbability | None, switch_on: bool = False) -> str:
    """A trip likelihood for people: '2.4% ±0.1', '<0.03%' (no sample reached the no-trip level), '-'."""
    if p is None:
        return "-"
    value, se = (p.switch_on, p.switch_on_se) if switch_on else (p.dry, p.dry_se)
    bound = p.upper_95(switch_on)
    if bound is not None:
        return f"<{100 * bound:.2g}%"
    if not p.sampled or se == 0.0:
        return f"{100 * value:.3g}%"
    digits = max(0, min(3, 1 - math.floor(math.log10(100 * se))))
    return f"{100 * value:.{digits}f}% ±{100 * se:.{digits}f}"


# --- From the check's estimates to distributions -------------------------------------------------------------------
def _describe(
    results: Sequence[LoadResult], params: RiskParameters
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Shape code, centre [mA], spread, phasor coefficient, switch-on factor and cap of each estimated load."""
    n = len(results)
    appliances: dict[int, tuple[int, Any]] = {}
    code = np.fromiter((_appliance_code(appliances, r.appliance) for r in results), dtype=np.int64, count=n)
    rows = [a for _, a in appliances.values()]  # per catalogue row; index -1 (no row) takes the last entries
    basis_value = [a.upper_ma if params.basis == "upper" else a.typical_ma for a in rows]
    ratio = np.array([a.typical_ma / v if v > 0.0 else 0.0 for a, v in zip(rows, basis_value)] + [1.0])
    sigma = np.array([model_sigma(a, params) for a in rows] + [0.0])
    cap_ratio = np.array([a.upper_ma / a.typical_ma if a.typical_ma > 0.0 else math.inf for a in rows] + [math.inf])
    heating = np.array([a.heating for a in rows] + [False])
    basis = np.array([r.basis for r in results], dtype=object)
    is_load = np.fromiter((r.load is not None for r in results), dtype=bool, count=n)
    catalogue = (basis == CATALOGUE) & (code >= 0)
    spread = np.where(
        catalogue, sigma[code], np.where(basis == MEASURED, params.meter_accuracy, params.component_tolerance)
    )
    factor = np.where(is_load & heating[code], params.switch_on_factor, 1.0)
    leakage = np.fromiter((r.leakage_ma for r in results), dtype=float, count=n)
    phasor = np.fromiter((r.phasor_ma for r in results), dtype=complex, count=n)
    coefficient = np.divide(phasor, leakage, out=np.ones(n, dtype=complex), where=leakage > 0.0)
    quantity = np.fromiter((r.quantity if r.load is not None else 1 for r in results), dtype=float, count=n)
    sum_sigma, sum_mu = fenton_wilkinson(quantity, math.log(params.unit_spread))
    # Two levels: the row's units share one model factor (σ = ``spread``) and vary unit to unit; their sum is the
    # Fenton-Wilkinson lognormal, so the row is one lognormal of σ² = σ_model² + σ_sum², median typical·e^μ_sum.
    spread = np.where(catalogue, np.hypot(spread, sum_sigma), spread)
    centre = leakage * np.where(catalogue, ratio[code] * np.exp(sum_mu) / quantity, 1.0)
    cap = np.where(catalogue, cap_ratio[code] * quantity / np.exp(sum_mu), math.inf)
    return np.where(catalogue, 2, 1).astype(np.int8), centre, spread.astype(float), coefficient, factor, cap


def model_sigma(appliance: Any, params: RiskParameters) -> float:
    """σ of ln(leakage) between models of one catalogue kind [dimensionless].

    A published upper value is a product standard's limit, not a percentile of real units: the spread is the
    ``Model spread`` setting (σ = ln of its geometric standard deviation) and the limit only caps the draws. A
    from-memory upper value is a high-percentile judgement: σ = ln(upper / typical) / Φ⁻¹(``Upper percentile``).
    """
    if appliance.upper_source.kind is Kind.PUBLISHED:
        return math.log(params.model_spread)
    return lognormal_sigma(appliance.typical_ma, appliance.upper_ma, params.upper_percentile)


def fenton_wilkinson(quantity: np.ndarray, sigma: float) -> tuple[np.ndarray, np.ndarray]:
    """The lognormal that matches the mean and variance of a sum of ``quantity`` independent lognormal units,
    each of median 1 and σ = ``sigma``: returns (σ_sum, μ_sum) with ln(sum) ~ N(μ_sum, σ_sum²).

    Fenton-Wilkinson: σ_sum² = ln(1 + (e^{σ²} − 1) / n), μ_sum = ln n + σ²/2 − σ_sum²/2 (Fenton, IRE Trans. Comm.
    Systems 8(1), 1960). Exact for n = 1.
    """
    n = np.maximum(np.asarray(quantity, dtype=float), 1.0)
    s2 = sigma * sigma
    sum_s2 = np.log1p(np.expm1(s2) / n)
    return np.sqrt(sum_s2), np.log(n) + s2 / 2.0 - sum_s2 / 2.0


def _appliance_code(appliances: dict[int, Any], appliance: Any) -> int:
    """Index of a catalogue row in ``appliances`` (added on first sight), or -1 for none."""
    if appliance is None:
        return -1
    key = id(appliance)
    if key not in appliances:
        appliances[key] = (len(appliances), appliance)
    return appliances[key][0]


def distribution(result: LoadResult, params: RiskParameters) -> LeakageDistribution:
    """The distribution of one estimated load (or cable run), in its circuit's phasor frame.

    Measured: uniform ± meter accuracy; computed and cable: uniform ± component tolerance; catalogue: lognormal
    with the typical value (rescaled to the supply) as median; heating elements carry the switch-on factor.
    """
    shape, centre, spread, coefficient, factor, cap = _describe([result], params)
    return LeakageDistribution(
        SHAPES[int(shape[0])],
        float(centre[0]),
        float(spread[0]),
        complex(coefficient[0]),
        float(factor[0]),
        float(cap[0]),
    )


def circuit_distributions(result: Estimate, params: RiskParameters) -> tuple[list[int], list[LeakageDistribution]]:
    """Circuit index and distribution of every placed load and cable run, in the check's order."""
    index = result.project.circuit_index()
    placed = [r for r in result.loads if r.circuit_id is not None]
    circuits = [index[r.circuit_id.lower()] for r in result.loads if r.circuit_id is not None]
    return circuits, [distribution(r, params) for r in placed]


def _check_rows(result: Estimate, params: RiskParameters) -> _Rows:
    """The check's placed loads and cable runs as arrays, grouped by circuit index, each weighted by how much its
    waveform counts towards its device's trip point (:func:`leakbudget.estimate.trip_weight`)."""
    index = result.project.circuit_index()
    placed = [r for r in result.loads if r.circuit_id is not None]
    group = np.fromiter(
        (index[r.circuit_id.lower()] for r in result.loads if r.circuit_id is not None),
        dtype=np.int64,
        count=len(placed),
    )
    shape, centre, spread, coefficient, factor, cap = _describe(placed, params)
    coefficient = coefficient * trip_weights(result.project, placed)
    return _Rows.from_arrays(group, shape, centre, spread, coefficient, factor, cap)


# What the device measures: the residual current, the phasor sum of the leakage it sees. The budget may be gated
# on the arithmetic sum (the conservative figure), but the likelihood of a trip is computed on what trips it.
LIKELIHOOD_SUM = "phasor"


def method_lines(params: RiskParameters, samples: int, sum_rule: str = LIKELIHOOD_SUM) -> list[str]:
    """How the likelihood was computed, in sentences with sources, for the results."""
    return [
        f"Monte Carlo, {samples:,} samples, seed {params.seed}, on the {sum_rule} sum (the residual current the "
        "device measures); ± is one standard error; '<x' means no sample reached the no-trip level (95 % bound "
        "3/N, the rule of three).",
        "Model: trip point uniform between the device's no-trip and trip levels; measured values "
        f"±{100 * params.meter_accuracy:g} % (Meter accuracy, rectangular per JCGM 100:2008 4.3.7), computed "
        f"values and cable runs ±{100 * params.component_tolerance:g} % (Component tolerance); catalogue values "
        f"lognormal in two levels, the units of a row sharing one model (geometric spread "
        f"{params.model_spread:g}, Model spread, where the upper value is a published limit; else upper = "
        f"{100 * params.upper_percentile:g}th percentile, Upper percentile) and varying unit to unit (geometric "
        f"spread {params.unit_spread:g}, Unit spread; their sum by Fenton-Wilkinson), never above the upper value "
        "(a unit above it is faulty, not standing leakage); at switch-on after idle, every heating element × "
        f"{params.switch_on_factor:g} (Switch-on factor), one common cause for all of them.",
    ]


def assess(result: Estimate) -> RiskResult:
    """Trip probability of every protected circuit of a check; also sets ``CircuitResult.risk``."""
    settings = result.project.settings
    params = RiskParameters.from_settings(settings)
    rows = _check_rows(result, params)
    levels = [
        (c.circuit.device.no_trip_ma, c.circuit.device.trip_ma) if c.circuit.device.protected else None
        for c in result.circuits
    ]
    protected = np.array([lv is not None for lv in levels], dtype=bool)
    random_rows = int(np.count_nonzero((rows.shape != 0) & protected[rows.group])) if len(rows.group) else 0
    samples = params.samples if params.samples is not None else auto_samples(random_rows)
    probabilities = _trip_probabilities(rows, len(result.circuits), levels, LIKELIHOOD_SUM, samples, params.seed)
    for c, p in zip(result.circuits, probabilities):
        c.risk = p
    return RiskResult(probabilities, samples, params.seed, LIKELIHOOD_SUM, params, method_lines(params, samples))
