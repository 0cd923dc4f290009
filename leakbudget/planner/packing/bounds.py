"""Lower bounds on the number of new circuits a packing needs.

Bin-packing bounds (items of size w into bins of capacity C), each a valid lower bound on the optimum:

- L1, the continuous bound ⌈Σ w / C⌉;
- L2 (Martello & Toth, "Lower bounds and reduction procedures for the bin packing problem", Discrete Applied
  Mathematics 28 (1990) 59–70): for 0 ≤ α ≤ C/2 let J1 = {w > C − α}, J2 = {C − α ≥ w > C/2},
  J3 = {C/2 ≥ w ≥ α}; then L(α) = |J1| + |J2| + max(0, ⌈(Σ_{J3} w − (|J2|·C − Σ_{J2} w)) / C⌉), and
  L2 = max over α of L(α). It suffices to try α = 0 and every distinct size ≤ C/2.

Existing circuits are bins that are already partly full and differ in size. To use L2, every bin is relaxed to
the common capacity C′ = max(new-bin capacity, largest spare) and each existing bin e is modelled as a C′ bin
holding a dummy item of size C′ − spare_e. Any plan packs items and dummies into |E| + k such bins, so
k ≥ L2(items ∪ dummies, C′) − |E|. The continuous bound k ≥ ⌈(Σ w − Σ spare) / C⌉ uses the true new-bin size.
Both are applied to leakage and to current, each item taking its smallest figure over the bins it may use; the
largest bound counts. The LP relaxation bound is computed by :mod:`leakbudget.planner.packing.milp`.
"""

from __future__ import annotations

import math

import numpy as np

from leakbudget.planner.packing.problem import Packing

_TOL = 1e-9  # ceil tolerance for sums of floats (sizes are mA or A; 1e-9 is far below any real figure)


def _ceil(x: float) -> int:
    return int(math.ceil(x - _TOL))


def continuous_bound(sizes: np.ndarray, capacity: float) -> int:
    """L1 = ⌈Σ sizes / capacity⌉ (0 for no items)."""
    return max(0, _ceil(float(np.sum(sizes)) / capacity)) if len(sizes) else 0


def l2_bound(sizes: np.ndarray, capacity: float) -> int:
    """Martello–Toth L2 lower bound on the bins of size ``capacity`` that hold items of ``sizes``.

    Every size must be ≤ capacity. Runs in O(n log n): sizes sorted once, each α evaluated from prefix sums.
    """
    w = np.sort(np.asarray(sizes, dtype=float))[::-1]  # decreasing
    w = w[w > 0]
    if w.size == 0:
        return 0
    c = float(capacity)
    prefix = np.concatenate([[0.0], np.cumsum(w)])
    neg = -w  # increasing, for searchsorted

    def count_greater(x: float) -> int:  # number of sizes > x
        return int(np.searchsorted(neg, -x, side="left"))

    def count_at_least(x: float) -> int:  # number of sizes ≥ x
        return int(np.searchsorted(neg, -x, side="right"))

    half = c / 2.0
    alphas = np.unique(np.concatenate([[0.0], w[w <= half + _TOL]]))
    n_half = count_greater(half)
    best = 0
    for alpha in alphas.tolist():
        n1 = count_greater(c - alpha)
        n12 = n_half  # |J1| + |J2|
        s2 = prefix[n12] - prefix[n1]
        n2 = n12 - n1
        n3_end = count_at_least(alpha) if alpha > 0 else w.size
        s3 = prefix[n3_end] - prefix[n12]
        bound = n12 + max(0, _ceil((s3 - (n2 * c - s2)) / c))
        best = max(best, bound)
    return max(best, continuous_bound(w, c))


def new_bins_bound(sizes: np.ndarray, spares: np.ndarray, new_capacity: float) -> int:
    """Lower bound on new bins when items of ``sizes`` go into existing bins with ``spares`` or new bins of
    ``new_capacity`` (the dummy-item construction in the module docstring, and the continuous bound)."""
    sizes = np.asarray(sizes, dtype=float)
    spares = np.clip(np.asarray(spares, dtype=float), 0.0, None)
    if sizes.size == 0 or not math.isfinite(new_capacity):
        return 0
    common = max(new_capacity, float(spares.max()) if spares.size else 0.0)
    if not math.isfinite(common):
        return 0
    if float(sizes.max()) > common:
        raise ValueError("an item is larger than every bin; the caller reports it as unplaceable")
    dummies = common - spares
    l2 = l2_bound(np.concatenate([sizes, dummies]), common) - spares.size
    l1 = _ceil((float(sizes.sum()) - float(spares.sum())) / new_capacity)
    return max(0, l1, l2)


def packing_bound(p: Packing) -> int:
    """Lower bound on the new bins of a packing: the larger of the leakage and the current bounds.

    Each item counts with its smallest figure over the bins it may use; new bins count with the largest spare of
    any type (both relaxations keep the bound valid). 0 when the packing has no new-bin types.
    """
    if p.n_types == 0 or p.n_items == 0:
        return 0
    e = p.n_existing
    best = 0
    for matrix, spare in ((p.leak_ma, p.spare_leak_ma), (p.amps_a, p.spare_amps_a)):
        masked = np.where(p.allowed, matrix, np.inf)
        sizes = masked.min(axis=1)
        capacity = float(spare[e:].max())
        if not math.isfinite(capacity) or not np.all(np.isfinite(sizes)):
            continue
        existing = spare[:e]
        if not np.all(np.isfinite(existing)):
            # a bin without a current limit takes any current: the current bound says nothing
            continue
        best = max(best, new_bins_bound(sizes, existing, capacity))
    return best
