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
  magnitude of the phasor sum); the check computes it on the phasor sum, the residual current the device measures.
  P(trip) = P(S ≥ T) = E[F_T(S)], F_T(s) = clip((s − a) / (b − a), 0, 1): the trip point is integrated exactly
  and only S is sampled (conditional Monte Carlo; the estimator's variance is never larger than that of counting
  trips). Standard error = sample standard deviation of F_T(S) / √N. When no sample reaches the no-trip level the
  estimate is 0 and the 95 % upper bound is 3 / N (the "rule of three", Hanley & Lippman-Hand, JAMA 249(13), 1983).

* Directions in the phasor sum (two modelling choices, both stated in the method lines the results print). A
  row's phasor is its magnitude draw times a direction. Most rows have a fixed one (their line and nature); two
  kinds draw theirs per sample, the units of one row sharing one draw as they share their magnitude's:

  - a row whose catalogue nature is mixed (resistive and capacitive parts, nominally 45°: a catalogue figure, or a
    measured one split by that nature) turns by δ uniform in ±45° about its nominal direction, so that its
    leakage angle is uniform between 0° (resistive) and 90° (capacitive); its magnitude stays the row's draw.
    Computed rows (``Y capacitance``, ``Insulation resistance``) have a known angle and do not turn;
  - a line-to-line load's share f on its first line: which line is the heavier is unknown, so f = ½ ± D, either
    sign equally likely, D uniform with mean |f_set − ½|, f_set the ``Line imbalance`` setting: D ~ U(0, 2(f_set −
    ½)) up to f_set = 75 %, U(2(f_set − ½) − ½, ½) above (f stays within 0–100 %). The row's phasor at a draw is
    its point estimate's (at f_set) plus (f − f_set) × ∂phasor/∂f
    (:attr:`leakbudget.estimate.LoadResult.imbalance_ma`), scaled with its magnitude draw.

  Rows with neither keep their fixed weights (the fast path); the arithmetic sum has no directions to draw.

* Random numbers: two streams (uniform and standard normal), seeded from the ``Seed`` setting, each a matrix
  of ``positions × samples``. The k-th load of a circuit with a random magnitude uses row k. A third stream of
  the same seed (independent of the first two, which stay as they were) draws the directions, a matrix
  ``positions × 2 × samples`` (the turn of a mixed-nature row, the first line's share of a line-to-line load):
  the k-th row of a circuit with a random direction uses position k. So a circuit's result depends only on
  its own loads, their order and the seed (never on the other circuits), and :func:`trip_probability` on a
  circuit's loads reproduces what ``check`` printed for it. Estimates of different circuits share draws, so they
  are correlated with one another; each one alone is unbiased with the stated standard error.

* A circuit under a shared device (a Protection-sheet RCD) draws from streams of its own instead, keyed by its
  name (:func:`stream_key`; the same three matrices, a child of the seed's ``SeedSequence`` that the common
  streams never use), at the same positions. Its result still depends only on its own loads, their order, its
  name and the seed, and the draws of circuits under one device are independent of one another, so the device
  sums the very draws its circuits were judged on: one draw per load feeds every device above it
  (:mod:`leakbudget.protection`), and the device's likelihood agrees with its circuits'.

All arrays are numpy; work is vectorised over loads and samples, in blocks of bounded size.
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field, fields
from functools import lru_cache
from statistics import NormalDist
from typing import Any, NamedTuple

import numpy as np

from leakbudget.devices import Device
from leakbudget.estimate import CATALOGUE, COMPUTED, MEASURED, Estimate, LoadResult, trip_weights
from leakbudget.leakage import NATURE_ANGLE_DEG
from leakbudget.provenance import Kind
from leakbudget.settings import (
    COMPONENT_TOLERANCE_DEFAULT,
    LINE_IMBALANCE_DEFAULT,
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
# From this many draws (random rows × samples) on, a sampling sums its groups with one sparse matrix product per
# block (about 20× faster than numpy's reduceat down the rows, but scipy.sparse takes about 0.15 s to import).
SPARSE_SUM_ELEMENTS = 20_000_000
STREAM_CACHE_ELEMENTS = 4_000_000  # random-number matrices up to this size are kept for reuse (16 MB each)
RULE_OF_THREE = 3.0  # 95 % upper bound on a probability after 0 events in N trials is 3 / N (Hanley 1983)

# Shapes of a load's distribution.
FIXED = "fixed"
UNIFORM = "uniform"
LOGNORMAL = "lognormal"
SHAPES = (FIXED, UNIFORM, LOGNORMAL)

# A mixed-nature row's leakage angle is drawn uniform from 0° (resistive) to 90° (capacitive) about its nominal 45°:
# a turn of at most ±45° (a modelling choice: the catalogue says only that both parts are present).
MIXED_ANGLE_SPREAD_DEG = min(NATURE_ANGLE_DEG["mixed"], 90.0 - NATURE_ANGLE_DEG["mixed"])


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

    The direction draws of the phasor sum (see the module's text; defaults: none): at a draw the coefficient is
    ``coefficient × e^{jδ} × (1 + (f − line_share) × imbalance)``. ``imbalance`` is the coefficient's relative
    change per unit of a line-to-line load's share f on its first line, (∂c/∂f) / c (0 for a load on one line;
    relative, so that turning or weighting ``coefficient`` carries it along) [dimensionless]; ``line_share`` is the
    share ``coefficient`` was computed at (the ``Line imbalance`` setting), which also sets the mean imbalance of
    the draws [dimensionless]; ``angle_spread_deg`` is the half-width of the uniform turn δ about ``coefficient``'s
    direction (45 for a mixed-nature row, 0 for a fixed angle) [degrees].

    Which draws it takes (see the module's text; defaults: the common streams, at its place among its group's
    rows): ``stream`` is the key of its circuit's own streams (:func:`stream_key`; 0 = the common streams);
    ``position`` its row in the magnitude streams and ``direction_position`` in the direction stream (-1 = its
    place among its group's sampled rows). A device that sums several circuits gives each row the stream and
    positions it has in its circuit (:func:`with_circuit_draws`), so that it sums the circuits' own draws.
    """

    shape: str
    centre_ma: float
    spread: float = 0.0
    coefficient: complex = 1.0 + 0.0j
    switch_on_factor: float = 1.0
    cap: float = math.inf
    imbalance: complex = 0j
    line_share: float = 0.5
    angle_spread_deg: float = 0.0
    stream: int = 0
    position: int = -1
    direction_position: int = -1


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
    line_share: float = LINE_IMBALANCE_DEFAULT  # a line-to-line load's share on its first line (Line imbalance)
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
            line_share=float(settings["Line imbalance"]),
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
    """P(T ≤ I) for a trip point T uniform between the no-trip and trip levels [mA]; arrays broadcast (float32
    draws stay float32)."""
    current = np.asarray(current_ma)
    if current.dtype != np.float32:
        current = current.astype(float)
    return np.clip((current - no_trip_ma) / (trip_ma - no_trip_ma), 0.0, 1.0)


def auto_samples(random_rows: int) -> int:
    """Samples for ``random_rows`` random loads: SAMPLES_MAX, fewer for huge workbooks, never below SAMPLES_MIN."""
    if random_rows <= 0:
        return SAMPLES_MAX
    return int(min(SAMPLES_MAX, max(SAMPLES_MIN, ELEMENT_BUDGET // random_rows // 100 * 100)))


KEYED_STREAMS = 3  # spawn_key (3, key) of the seed's SeedSequence: a circuit's own streams (0-2 are the common ones)


def stream_key(circuit_id: str) -> int:
    """The 64-bit key of a circuit's own streams: from its name (case-insensitive), so that it never depends on
    the other circuits or on the sheet's order."""
    return int.from_bytes(hashlib.blake2b(circuit_id.lower().encode(), digest_size=8).digest(), "little") or 1


def _capacity(positions: int, least: int = 16) -> int:
    return max(least, 1 << (positions - 1).bit_length())


def _streams(seed: int, positions: int, samples: int, key: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Uniform and standard-normal draws, ``positions × samples`` each, from two independent seeded streams (the
    common ones for ``key`` 0, else a circuit's own, :func:`stream_key`).

    numpy fills the matrices row by row, so the first k rows are the same whatever ``positions`` is; small
    requests are served as slices of a cached larger matrix (the split planner calls this many times).
    """
    capacity = _capacity(positions, 16 if key == 0 else 4)
    if capacity * samples <= STREAM_CACHE_ELEMENTS:
        uniform, normal = _cached_streams(seed, capacity, samples, key)
        return uniform[:positions], normal[:positions]
    return _draw_streams(seed, positions, samples, key)


def _sequences(seed: int, key: int) -> list[np.random.SeedSequence]:
    """The three child sequences (uniform, normal, directions): the seed's own children for the common streams,
    the children of spawn key (KEYED_STREAMS, key) for a circuit's."""
    if key == 0:
        return np.random.SeedSequence(seed).spawn(3)
    return np.random.SeedSequence(seed, spawn_key=(KEYED_STREAMS, key)).spawn(3)


def _draw_streams(seed: int, positions: int, samples: int, key: int = 0) -> tuple[np.ndarray, np.ndarray]:
    uniform_seq, normal_seq, _ = _sequences(seed, key)
    uniform = np.random.Generator(np.random.PCG64(uniform_seq)).random((positions, samples), dtype=np.float32)
    normal = np.random.Generator(np.random.PCG64(normal_seq)).standard_normal((positions, samples), dtype=np.float32)
    return uniform, normal


@lru_cache(maxsize=64)
def _cached_streams(seed: int, positions: int, samples: int, key: int = 0) -> tuple[np.ndarray, np.ndarray]:
    uniform, normal = _draw_streams(seed, positions, samples, key)
    uniform.flags.writeable = False
    normal.flags.writeable = False
    return uniform, normal


def _direction_stream(seed: int, positions: int, samples: int, key: int = 0) -> np.ndarray:
    """Uniform draws for the directions, ``positions × 2 × samples`` ([k, 0] a turn, [k, 1] a line share).

    The third child sequence (:func:`_sequences`; the first two feed :func:`_streams`, which it leaves as they
    were); filled position by position, so the first k positions are the same whatever ``positions`` is.
    """
    capacity = _capacity(positions, 16 if key == 0 else 4)
    if 2 * capacity * samples <= STREAM_CACHE_ELEMENTS:
        return _cached_direction_stream(seed, capacity, samples, key)[:positions]
    return _draw_direction_stream(seed, positions, samples, key)


def _draw_direction_stream(seed: int, positions: int, samples: int, key: int = 0) -> np.ndarray:
    sequence = _sequences(seed, key)[2]
    return np.random.Generator(np.random.PCG64(sequence)).random((positions, 2, samples), dtype=np.float32)


@lru_cache(maxsize=64)
def _cached_direction_stream(seed: int, positions: int, samples: int, key: int = 0) -> np.ndarray:
    turns = _draw_direction_stream(seed, positions, samples, key)
    turns.flags.writeable = False
    return turns


@dataclass
class _Rows:
    """Load distributions as arrays, sorted by group (circuit), sheet order kept within a group."""

    group: np.ndarray  # int64
    shape: np.ndarray  # 0 fixed, 1 uniform, 2 lognormal
    centre: np.ndarray  # [mA]
    spread: np.ndarray
    coefficient: np.ndarray  # complex, the nominal direction
    factor: np.ndarray  # switch-on factor
    cap: np.ndarray  # lognormal draws are bounded at cap × centre
    imbalance: np.ndarray  # complex, (∂coefficient / ∂(first line's share)) / coefficient
    share: np.ndarray  # the first line's share the coefficient was computed at
    turn: np.ndarray  # half-width of the uniform turn about the nominal direction [rad]
    stream: np.ndarray  # uint64 key of the row's streams (0 = the common ones)
    pos: np.ndarray  # int64 row in the magnitude streams (-1 = its place among its group's sampled rows)
    dpos: np.ndarray  # int64 row in the direction stream (-1 = likewise)

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
        imbalance: np.ndarray | None = None,
        share: np.ndarray | None = None,
        turn: np.ndarray | None = None,
        stream: np.ndarray | None = None,
        pos: np.ndarray | None = None,
        dpos: np.ndarray | None = None,
    ) -> _Rows:
        """Sort by group (stable) and mark rows without spread, or with nothing to spread, as fixed."""
        n = len(group)
        imbalance = np.zeros(n, dtype=complex) if imbalance is None else imbalance
        share = np.full(n, 0.5) if share is None else share
        turn = np.zeros(n) if turn is None else turn
        stream = np.zeros(n, dtype=np.uint64) if stream is None else stream.astype(np.uint64)
        pos = np.full(n, -1, dtype=np.int64) if pos is None else pos.astype(np.int64)
        dpos = np.full(n, -1, dtype=np.int64) if dpos is None else dpos.astype(np.int64)
        shape = np.where((spread <= 0.0) | (centre <= 0.0), 0, shape).astype(np.int8)
        order = np.argsort(group, kind="stable")
        columns = (group, shape, centre, spread, coefficient, factor, cap, imbalance, share, turn, stream, pos, dpos)
        return cls(*(column[order] for column in columns))

    @classmethod
    def build(cls, groups: Sequence[int], loads: Sequence[LeakageDistribution]) -> _Rows:
        columns = list(zip(*loads)) if loads else [()] * len(LeakageDistribution._fields)
        shape = np.array([SHAPES.index(s) for s in columns[0]], dtype=np.int8)
        return cls.from_arrays(
            np.asarray(groups, dtype=np.int64),
            shape,
            np.asarray(columns[1], dtype=float),
            np.asarray(columns[2], dtype=float),
            np.asarray(columns[3], dtype=complex),
            np.asarray(columns[4], dtype=float),
            np.asarray(columns[5], dtype=float),
            np.asarray(columns[6], dtype=complex),
            np.asarray(columns[7], dtype=float),
            np.radians(np.asarray(columns[8], dtype=float)),
            np.asarray(columns[9], dtype=np.uint64),
            np.asarray(columns[10], dtype=np.int64),
            np.asarray(columns[11], dtype=np.int64),
        )

    def subset(self, keep: np.ndarray) -> _Rows:
        return _Rows(*(getattr(self, f.name)[keep] for f in fields(self)))

    def directed(self) -> np.ndarray:
        """Rows whose direction is drawn per sample: a turn, or a line-to-line share that varies (not ½)."""
        return ((self.turn > 0.0) | ((self.imbalance != 0.0) & (self.share != 0.5))) & (self.centre > 0.0)

    def random(self, sum_rule: str) -> np.ndarray:
        """Rows that are sampled: a random magnitude, or (phasor sum) a random direction."""
        random = self.shape != 0
        return random | self.directed() if sum_rule == "phasor" else random

    def weights(self, sum_rule: str) -> np.ndarray:
        """Per-row weights whose weighted sums make S: (arithmetic) Σv, Σv(f−1); (phasor) re, im, dry and extra.

        The phasor weights are the nominal directions; :func:`_turned` adds what a drawn direction changes."""
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
    cap: np.ndarray,
    pick: Callable[[int, np.ndarray], np.ndarray],
    samples: int,
) -> np.ndarray:
    """Leakage draws [mA], one row per sampled load: centre × (1 + a(2U − 1)) or centre × min(exp(σZ), cap);
    a fixed magnitude (a row sampled for its direction only) is its centre. ``pick(0, rows)`` gives the uniform
    draws of the selected rows, ``pick(1, rows)`` their normal draws (fresh float32 arrays)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        z_cap = np.where(spread > 0.0, np.log(cap) / np.where(spread > 0.0, spread, 1.0), np.inf)

    def lognormal(rows: np.ndarray) -> np.ndarray:
        z = pick(1, rows)
        np.minimum(z, z_cap[rows, None].astype(np.float32), out=z)
        z *= spread[rows, None].astype(np.float32)
        np.exp(z, out=z)
        z *= centre[rows, None].astype(np.float32)
        return z

    def uniform_(rows: np.ndarray) -> np.ndarray:
        u = pick(0, rows)
        u *= (2.0 * spread[rows] * centre[rows])[:, None].astype(np.float32)
        u += ((1.0 - spread[rows]) * centre[rows])[:, None].astype(np.float32)
        return u

    uni, fixed = shape == 1, shape == 0
    if not fixed.any():
        if not uni.any():
            return lognormal(np.ones(len(shape), dtype=bool))
        if uni.all():
            return uniform_(uni)
    values = np.empty((len(shape), samples), dtype=np.float32)
    values[fixed] = centre[fixed, None]
    if uni.any():
        values[uni] = uniform_(uni)
    logn = ~(uni | fixed)
    if logn.any():
        values[logn] = lognormal(logn)
    return values


def _gather(matrices: dict[int, np.ndarray], key: np.ndarray, pos: np.ndarray) -> np.ndarray:
    """Rows ``pos`` of the stream matrices ``matrices[key]``, one per selected row, as a fresh array."""
    if len(matrices) == 1:
        (only,) = matrices.values()
        return only[pos]
    out = np.empty((len(pos), *next(iter(matrices.values())).shape[1:]), dtype=np.float32)
    for k in np.unique(key).tolist():
        at = key == k
        out[at] = matrices[int(k)][pos[at]]
    return out


def _places(group: np.ndarray, explicit: np.ndarray, chosen: np.ndarray) -> np.ndarray:
    """Each chosen row's stream row: its explicit position, else its place among its group's chosen rows."""
    pos = np.zeros(len(group), dtype=np.int64)
    pos[chosen] = _positions(group[chosen])
    given = chosen & (explicit >= 0)
    pos[given] = explicit[given]
    return pos


def _stream_matrices(
    draw: Callable[[int, int, int, int], Any], seed: int, keys: np.ndarray, pos: np.ndarray, samples: int
) -> dict[int, Any]:
    """The stream matrices of every key among the rows, each as deep as its rows need."""
    return {int(k): draw(seed, int(pos[keys == k].max()) + 1, samples, int(k)) for k in np.unique(keys).tolist()}


def _share_offsets(u: np.ndarray, share: np.ndarray) -> np.ndarray:
    """f − share for draws of a line-to-line load's first line share f, from uniforms ``u`` (rows × samples).

    f = ½ ± D, the sign from the uniform's half, D uniform on [lo, hi] with mean m = |share − ½|: hi = min(2m, ½),
    lo = 2m − hi (so D ~ U(0, 2m) while 2m ≤ ½, and f never leaves 0–1).
    """
    m = np.minimum(np.abs(share - 0.5), 0.5)
    hi = np.minimum(2.0 * m, 0.5)
    lo = 2.0 * m - hi
    v = 2.0 * u - 1.0  # U(−1, 1): its sign picks the heavier line, its size the place in [lo, hi]
    d = np.abs(v)
    d *= (hi - lo)[:, None].astype(np.float32)
    d += lo[:, None].astype(np.float32)
    np.copysign(d, v, out=d)
    d += (0.5 - share)[:, None].astype(np.float32)
    return d


def _turned(
    values: np.ndarray,
    coefficient: np.ndarray,
    imbalance: np.ndarray,
    share: np.ndarray,
    turn: np.ndarray,
    u: np.ndarray,
) -> np.ndarray:
    """What drawn directions add to the nominal phasors [mA]: rows × (real, imaginary) × samples, float32.

    A row's phasor at a draw is v·c·e^{jδ}·(1 + (f − share)·r): v its magnitude draw, c its nominal coefficient,
    r its relative change per unit of its first line's share (``imbalance``), δ uniform in ±``turn`` (from
    ``u[:, 0]``) and f the first line's share (from ``u[:, 1]``, :func:`_share_offsets`). Returned minus the
    nominal v·c, so that every row keeps the fixed weights of :meth:`_Rows.weights`.
    """
    k, samples = values.shape
    moved = (imbalance != 0.0).any()
    turned = (turn > 0.0).any()
    # g = e^{jδ}(1 + t·r) − 1, the relative change of the row's phasor
    if moved:
        t = _share_offsets(u[:, 1], share)
        w_re = t * imbalance.real.astype(np.float32)[:, None]  # (1 + t·r) − 1
        w_im = t * imbalance.imag.astype(np.float32)[:, None]
    if turned:
        delta = 2.0 * u[:, 0] - 1.0
        delta *= turn.astype(np.float32)[:, None]
        cos_m1, sin = np.cos(delta), np.sin(delta)
        cos_m1 -= np.float32(1.0)
        if moved:  # (cos δ − 1)(1 + w_re) − sin δ·w_im + w_re, and sin δ·(1 + w_re) + cos δ·w_im
            g_re = cos_m1 * w_re
            g_re += cos_m1
            g_re -= sin * w_im
            g_re += w_re
            g_im = sin * w_re
            g_im += sin
            g_im += (cos_m1 + np.float32(1.0)) * w_im
        else:
            g_re, g_im = cos_m1, sin
    else:
        g_re, g_im = w_re, w_im
    a = coefficient.real.astype(np.float32)[:, None]
    b = coefficient.imag.astype(np.float32)[:, None]
    out = np.empty((k, 2, samples), dtype=np.float32)
    np.multiply(g_re, a, out=out[:, 0])  # c·g, times the magnitude
    out[:, 0] -= g_im * b
    np.multiply(g_im, a, out=out[:, 1])
    out[:, 1] += g_re * b
    out *= values[:, None, :]
    return out


def _segment_sums(
    values: np.ndarray, group: np.ndarray, weights: np.ndarray, sparse: bool = False
) -> tuple[np.ndarray, np.ndarray]:
    """Weighted sums of ``values`` rows per run of equal group ids: (groups, sums[group, weight, sample]).

    With ``sparse``, as one product of a sparse (group, weight) × row matrix of the weights with ``values``; else
    one reduceat per weight. Both add each group's rows in order in float32."""
    starts = np.flatnonzero(np.r_[True, group[1:] != group[:-1]])
    segs = group[starts]
    if sparse:
        from scipy.sparse import csr_array

        n_weights, samples = len(weights), values.shape[1]
        seg_of = np.repeat(np.arange(len(segs)), np.diff(np.r_[starts, len(group)]))
        which, row = np.nonzero(weights)
        matrix = csr_array(
            (weights[which, row].astype(np.float32), (seg_of[row] * n_weights + which, row)),
            shape=(len(segs) * n_weights, len(group)),
        )
        return segs, (matrix @ values).reshape(len(segs), n_weights, samples)
    sums = np.zeros((len(segs), len(weights), values.shape[1]), dtype=np.float32)
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


def _add_directed(sums: np.ndarray, seg: np.ndarray, rank: np.ndarray, extra: np.ndarray, change: np.ndarray) -> None:
    """Add what drawn directions change (``change``: rows × (real, imaginary) × samples) to the phasor sums of their
    groups (``seg``: each row's index in ``sums``), dry and at switch-on (× the row's switch-on extra).

    The rows of one rank (their place among their group's rows with a drawn direction) are in different groups,
    so each rank is one scatter without repeated indices: no reduction over the few rows a group has.
    """
    heating = extra != 0.0
    for r in np.unique(rank).tolist():
        at = rank == r
        sums[seg[at], :2] += change[at]
        hot = at & heating
        if hot.any():
            sums[seg[hot], 2:] += change[hot] * extra[hot, None, None].astype(np.float32)


def _random_sums(
    rows: _Rows, sum_rule: str, samples: int, seed: int, block_elements: int = BLOCK_ELEMENTS
) -> Iterator[tuple[np.ndarray, np.ndarray]]:
    """Weighted sums over each group's random loads, per sample: yields (group ids, sums[group, weight, sample]).

    Groups come in order, each exactly once, in blocks of at most ``block_elements`` draws; a group cut by a
    block boundary is carried into the next block. Rows with a drawn direction (phasor sum) add what their draw
    changes (:func:`_turned`), summed with unit weights; the other rows keep their fixed weights.
    """
    random = rows.random(sum_rule)
    group = rows.group[random]
    if len(group) == 0:
        return
    sampled = rows.subset(random)
    shape, centre, spread, cap = sampled.shape, sampled.centre, sampled.spread, sampled.cap
    weights = sampled.weights(sum_rule)
    n = len(group)
    magnitude = shape != 0
    key = sampled.stream
    pos = _places(group, sampled.pos, magnitude)
    any_magnitude = bool(magnitude.any())
    streams = _stream_matrices(
        _streams,
        seed,
        key[magnitude] if any_magnitude else np.zeros(1, dtype=np.uint64),
        pos[magnitude] if any_magnitude else np.zeros(1, dtype=np.int64),
        samples,
    )
    uniforms = {k: v[0] for k, v in streams.items()}
    normals = {k: v[1] for k, v in streams.items()}
    directed = sampled.directed() if sum_rule == "phasor" else np.zeros(n, dtype=bool)
    if directed.any():
        d_pos = _places(group, sampled.dpos, directed)
        d_rank = _places(group, np.full(n, -1, dtype=np.int64), directed)  # place in its group: one scatter per rank
        turns = _stream_matrices(_direction_stream, seed, key[directed], d_pos[directed], samples)
        extra = sampled.factor - 1.0
    step = max(1, block_elements // samples)
    sparse = n * samples >= SPARSE_SUM_ELEMENTS
    carry_group: int | None = None
    carry: np.ndarray | None = None
    for i in range(0, n, step):
        j = min(n, i + step)
        block_key, block_pos = key[i:j], pos[i:j]

        def pick(which: int, chosen: np.ndarray, block_key: np.ndarray = block_key, block_pos: np.ndarray = block_pos):
            return _gather(normals if which else uniforms, block_key[chosen], block_pos[chosen])

        values = _draw(shape[i:j], centre[i:j], spread[i:j], cap[i:j], pick, samples)
        segs, sums = _segment_sums(values, group[i:j], weights[:, i:j], sparse)
        if directed[i:j].any():
            d = np.flatnonzero(directed[i:j]) + i
            change = _turned(
                values[d - i],
                sampled.coefficient[d],
                sampled.imbalance[d],
                sampled.share[d],
                sampled.turn[d],
                _gather(turns, key[d], d_pos[d]),
            )
            _add_directed(sums, np.searchsorted(segs, group[d]), d_rank[d], extra[d], change)
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
    fixed = ~rows.random(sum_rule)
    weights = rows.weights(sum_rule)
    return np.stack(
        [np.bincount(rows.group[fixed], weights=rows.centre[fixed] * w[fixed], minlength=n_groups) for w in weights],
        axis=1,
    )


def _mean_se(y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean over samples (last axis) and its standard error, std / √N."""
    n = y.shape[-1]
    mean = y.mean(axis=-1, dtype=np.float64)
    return mean, (y.std(axis=-1, ddof=1, dtype=np.float64) / math.sqrt(n) if n > 1 else np.zeros(y.shape[:-1]))


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
    lo32, hi32 = lo.astype(np.float32), hi.astype(np.float32)
    for segs, sums in _random_sums(rows, sum_rule, samples, seed, block_elements):
        sums += fixed[segs][:, :, None]
        dry, sw = _combine(sums, sum_rule)  # float32, like the draws
        a, b = lo32[segs, None], hi32[segs, None]
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


def phasor_samples(
    loads: Sequence[LeakageDistribution],
    *,
    samples: int = SAMPLES_MAX,
    seed: int = SEED_DEFAULT,
) -> tuple[np.ndarray, np.ndarray]:
    """One group's phasor sum per sample, dry and at switch-on [mA, complex]: the values whose magnitudes the
    likelihood integrates over (a group of loads of several circuits, with their draws, sums exactly their
    circuits' samples)."""
    rows = _Rows.build([0] * len(loads), loads)
    fixed = _fixed_sums(rows, "phasor", 1)[0].astype(float)
    sums = np.broadcast_to(fixed[:, None], (4, samples)).copy()
    for _, random_sums in _random_sums(rows, "phasor", samples, seed):
        sums += random_sums[0]
    return sums[0] + 1j * sums[1], (sums[0] + sums[2]) + 1j * (sums[1] + sums[3])


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
class _Described(NamedTuple):
    """The distribution columns of estimated loads (as :class:`LeakageDistribution`, the turn in degrees)."""

    shape: np.ndarray
    centre: np.ndarray
    spread: np.ndarray
    coefficient: np.ndarray
    factor: np.ndarray
    cap: np.ndarray
    imbalance: np.ndarray
    share: np.ndarray
    angle_spread_deg: np.ndarray


def _describe(results: Sequence[LoadResult], params: RiskParameters) -> _Described:
    """Shape code, centre [mA], spread, phasor coefficient, switch-on factor, cap and the direction draws (how the
    coefficient moves with a line-to-line load's share, the share, the turn) of each estimated load."""
    n = len(results)
    appliances: dict[int, tuple[int, Any]] = {}
    code = np.fromiter((_appliance_code(appliances, r.appliance) for r in results), dtype=np.int64, count=n)
    rows = [a for _, a in appliances.values()]  # per catalogue row; index -1 (no row) takes the last entries
    basis_value = [a.upper_ma if params.basis == "upper" else a.typical_ma for a in rows]
    ratio = np.array([a.typical_ma / v if v > 0.0 else 0.0 for a, v in zip(rows, basis_value)] + [1.0])
    sigma = np.array([model_sigma(a, params) for a in rows] + [0.0])
    cap_ratio = np.array([a.upper_ma / a.typical_ma if a.typical_ma > 0.0 else math.inf for a in rows] + [math.inf])
    heating = np.array([a.heating for a in rows] + [False])
    mixed = np.array([a.nature == "mixed" for a in rows] + [False])
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
    moves = np.fromiter((r.imbalance_ma for r in results), dtype=complex, count=n)
    # relative to the phasor, so that turning or weighting the coefficient (a board line, a waveform) carries it
    imbalance = np.divide(moves, phasor, out=np.zeros(n, dtype=complex), where=(phasor != 0.0) & (leakage > 0.0))
    share = np.where(imbalance != 0.0, params.line_share, 0.5)
    # The angle of a mixed-nature row's figure (catalogue, or measured and split by that nature) is drawn; a computed
    # row's is known from its C and R.
    turn = np.where(is_load & mixed[code] & (basis != COMPUTED), MIXED_ANGLE_SPREAD_DEG, 0.0)
    quantity = np.fromiter((r.quantity if r.load is not None else 1 for r in results), dtype=float, count=n)
    sum_sigma, sum_mu = fenton_wilkinson(quantity, math.log(params.unit_spread))
    # Two levels: the row's units share one model factor (σ = ``spread``) and vary unit to unit; their sum is the
    # Fenton-Wilkinson lognormal, so the row is one lognormal of σ² = σ_model² + σ_sum², median typical·e^μ_sum.
    spread = np.where(catalogue, np.hypot(spread, sum_sigma), spread)
    centre = leakage * np.where(catalogue, ratio[code] * np.exp(sum_mu) / quantity, 1.0)
    cap = np.where(catalogue, cap_ratio[code] * quantity / np.exp(sum_mu), math.inf)
    shape = np.where(catalogue, 2, 1).astype(np.int8)
    return _Described(shape, centre, spread.astype(float), coefficient, factor, cap, imbalance, share, turn)


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
    with the typical value (rescaled to the supply) as median; heating elements carry the switch-on factor; a
    mixed-nature row turns, a line-to-line load's share on its first line is drawn (the module's text).
    """
    return _distributions(_describe([result], params))[0]


def _distributions(d: _Described, trip_weight: np.ndarray | float = 1.0) -> list[LeakageDistribution]:
    coefficient, imbalance = d.coefficient * trip_weight, d.imbalance
    return [
        LeakageDistribution(
            SHAPES[int(d.shape[i])],
            float(d.centre[i]),
            float(d.spread[i]),
            complex(coefficient[i]),
            float(d.factor[i]),
            float(d.cap[i]),
            complex(imbalance[i]),
            float(d.share[i]),
            float(d.angle_spread_deg[i]),
        )
        for i in range(len(d.shape))
    ]


def distributions(results: Sequence[LoadResult], params: RiskParameters) -> list[LeakageDistribution]:
    """:func:`distribution` of many loads at once (vectorised), in their order, without trip weights."""
    return _distributions(_describe(list(results), params))


def circuit_streams(project: Any) -> np.ndarray:
    """Each circuit's stream key, in sheet order: its own (:func:`stream_key`) under a shared device, else 0."""
    return np.array(
        [stream_key(c.circuit_id) if c.protected_by else 0 for c in project.circuits], dtype=np.uint64
    ).reshape(-1)


def circuit_distributions(result: Estimate, params: RiskParameters) -> tuple[list[int], list[LeakageDistribution]]:
    """Circuit index and distribution of every placed load and cable run, in the check's order, each in its
    circuit's phasor frame weighted by how much its waveform counts towards its device's trip point, with its
    circuit's stream, as the check computes them (:func:`_check_rows`)."""
    index = result.project.circuit_index()
    placed = [r for r in result.loads if r.circuit_id is not None]
    circuits = [index[r.circuit_id.lower()] for r in result.loads if r.circuit_id is not None]
    keys = circuit_streams(result.project)
    loads = _distributions(_describe(placed, params), trip_weights(result.project, placed))
    return circuits, [d._replace(stream=int(keys[c])) for c, d in zip(circuits, loads)]


def with_circuit_draws(circuits: Sequence[int], loads: Sequence[LeakageDistribution]) -> list[LeakageDistribution]:
    """The loads with the positions they have in their circuits' draws (``circuits[i]`` is the circuit of
    ``loads[i]``, in the check's order), so that a group that mixes circuits (a shared device) takes the draws
    each row has in its circuit: its magnitude among the circuit's rows with a random magnitude, its direction
    among those with a drawn direction (:meth:`_Rows.random`, :meth:`_Rows.directed`)."""
    if not loads:
        return []
    rows = _Rows.build(list(range(len(loads))), loads)  # one group per row: original order kept
    group = np.asarray(circuits, dtype=np.int64)
    order = np.argsort(group, kind="stable")
    out = list(loads)
    for chosen, field_name in ((rows.shape != 0, "position"), (rows.directed(), "direction_position")):
        sorted_chosen = chosen[order]
        places = np.full(len(loads), -1, dtype=np.int64)
        places[order[sorted_chosen]] = _positions(group[order][sorted_chosen])
        for i in np.flatnonzero(chosen).tolist():
            out[i] = (
                out[i]._replace(position=int(places[i]))
                if field_name == "position"
                else out[i]._replace(direction_position=int(places[i]))
            )
    return out


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
    d = _describe(placed, params)
    weight = trip_weights(result.project, placed)
    keys = circuit_streams(result.project)
    return _Rows.from_arrays(
        group,
        d.shape,
        d.centre,
        d.spread,
        d.coefficient * weight,
        d.factor,
        d.cap,
        d.imbalance,
        d.share,
        np.radians(d.angle_spread_deg),
        keys[group] if len(keys) else np.zeros(len(group), dtype=np.uint64),
    )


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
        *([direction_line(params)] if sum_rule == "phasor" else []),
    ]


def direction_line(params: RiskParameters) -> str:
    """The method line on the directions drawn in the phasor sum (both modelling choices)."""
    m = min(abs(params.line_share - 0.5), 0.5)
    hi = min(2.0 * m, 0.5)
    lo = 2.0 * m - hi
    if hi > 0.0:
        lines = (
            f"a line-to-line load's share on its first line 50 % ± D, D uniform between {100 * lo:g} % and "
            f"{100 * hi:g} %, either line the heavier with equal chance, so that the mean imbalance is the Line "
            f"imbalance setting's {100 * params.line_share:g} % / {100 * (1 - params.line_share):g} % (which the "
            "point estimate uses)"
        )
    else:
        lines = "a line-to-line load 50 % / 50 % on its lines (Line imbalance 50 %: symmetric, nothing drawn)"
    return (
        "Directions in the phasor sum, drawn per sample (modelling choices; the units of a row share one draw): "
        f"a mixed-nature row's leakage angle (nominally {NATURE_ANGLE_DEG['mixed']:g}°) uniform between 0° "
        f"(resistive) and 90° (capacitive); {lines}."
    )


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
    random_rows = int(np.count_nonzero(rows.random(LIKELIHOOD_SUM) & protected[rows.group])) if len(rows.group) else 0
    samples = params.samples if params.samples is not None else auto_samples(random_rows)
    probabilities = _trip_probabilities(rows, len(result.circuits), levels, LIKELIHOOD_SUM, samples, params.seed)
    for c, p in zip(result.circuits, probabilities):
        c.risk = p
    return RiskResult(probabilities, samples, params.seed, LIKELIHOOD_SUM, params, method_lines(params, samples))
