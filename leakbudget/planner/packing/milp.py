"""Exact plans for one packing: a MILP solved with scipy.optimize.milp (HiGHS).

Variables: x[i, j] = 1 when item i goes on existing bin j (only pairs the item may use); x[i, t, s] = 1 when it
goes on slot s of new-circuit type t; y[t, s] = 1 when that slot is used; in the second stage a continuous U.

Constraints: each item on exactly one bin; on every existing bin Σ leakage ≤ spare and Σ current ≤ spare; on
every slot Σ leakage ≤ spare · y and Σ current ≤ spare · y; x[i, t, s] ≤ y[t, s] (a tighter relaxation).
Symmetry breaking among the interchangeable slots of one type (the usual rule for identical bins): y[t, s+1] ≤
y[t, s], and the r-th item (0-based, largest first among those allowed on the type) only on slots s ≤ r; any plan
can be renumbered to meet both, so no optimum is lost.

Stage 1 minimises (n + 1) · Σ y + moves, i.e. new circuits first, then moves (moves ≤ n). Stage 2 fixes both
counts and minimises U subject to base + Σ leakage ≤ U · budget on every bin: the tightest bin's budget use.
"""

from __future__ import annotations

import math
import os
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import numpy as np

from leakbudget.planner.packing.problem import Packing, Solution, compact

_INT_TOL = 0.5  # a binary above this is taken as 1


@dataclass(slots=True)
class ExactResult:
    solution: Solution | None  # None when the solver found no plan in time (or none exists)
    proven: bool  # stage 1 proven optimal (new circuits, then moves)
    infeasible: bool  # proven that no plan exists within the slots offered
    new_bound: int  # lower bound on new bins from the solver (0 when it gives none)
    headroom_proven: bool = False


class _Model:
    """Index bookkeeping for one packing with ``slots[t]`` slots per type."""

    def __init__(self, p: Packing, slots: list[int]) -> None:
        self.p = p
        e = p.n_existing
        n = p.n_items
        self.slots = slots
        pairs_i: list[np.ndarray] = []
        pairs_b: list[np.ndarray] = []  # existing bin j, or −(1 + slot id) for a slot
        ex_i, ex_j = np.nonzero(p.allowed[:, :e])
        pairs_i.append(ex_i)
        pairs_b.append(ex_j)
        self.slot_type: list[int] = []
        self.slot_index: list[int] = []
        self.slot_col: list[int] = []
        # size for the symmetry order: the item's share of the type's spare, in the tighter capacity
        for t, count in enumerate(slots):
            c = e + t
            items = np.flatnonzero(p.allowed[:, c])
            if count == 0 or items.size == 0:
                continue
            with np.errstate(divide="ignore", invalid="ignore"):
                share = np.maximum(
                    p.leak_ma[items, c] / p.spare_leak_ma[c], np.nan_to_num(p.amps_a[items, c] / p.spare_amps_a[c])
                )
            order = items[np.argsort(-share, kind="stable")]
            first_slot = len(self.slot_type)
            for s in range(count):
                self.slot_type.append(t)
                self.slot_index.append(s)
                self.slot_col.append(c)
            for rank, i in enumerate(order.tolist()):
                top = min(rank, count - 1)
                pairs_i.append(np.full(top + 1, i))
                pairs_b.append(-(1 + first_slot + np.arange(top + 1)))
        self.pair_item = np.concatenate(pairs_i).astype(np.int64)
        self.pair_bin = np.concatenate(pairs_b).astype(np.int64)
        self.n_x = self.pair_item.size
        self.n_y = len(self.slot_type)
        is_slot = self.pair_bin < 0
        slot_of = np.where(is_slot, -self.pair_bin - 1, -1)
        self.pair_slot = slot_of
        col = self.pair_bin.copy()
        col[is_slot] = np.asarray(self.slot_col, dtype=np.int64)[slot_of[is_slot]]
        self.pair_col = col
        self.pair_leak = p.leak_ma[self.pair_item, col]
        self.pair_amps = p.amps_a[self.pair_item, col]
        self.n = n
        self.start_pair = np.full(n, -1, dtype=np.int64)
        on_start = (~is_slot) & (self.pair_bin == p.start[self.pair_item])
        self.start_pair[self.pair_item[on_start]] = np.flatnonzero(on_start)

    # rows are collected as (coefficient triplets, lower, upper)
    def rows(self, with_u: bool) -> tuple[object, np.ndarray, np.ndarray]:
        from scipy.sparse import coo_matrix

        p = self.p
        e = p.n_existing
        nx, ny = self.n_x, self.n_y
        r: list[np.ndarray] = []
        c: list[np.ndarray] = []
        v: list[np.ndarray] = []
        lo: list[float] = []
        hi: list[float] = []
        row = 0

        def add(cols: np.ndarray, vals: np.ndarray, low: float, high: float) -> None:
            nonlocal row
            r.append(np.full(cols.size, row))
            c.append(cols)
            v.append(vals)
            lo.append(low)
            hi.append(high)
            row += 1

        by_item = np.argsort(self.pair_item, kind="stable")
        bounds = np.searchsorted(self.pair_item[by_item], np.arange(self.n + 1))
        for i in range(self.n):
            cols = by_item[bounds[i] : bounds[i + 1]]
            add(cols, np.ones(cols.size), 1.0, 1.0)
        u_col = nx + ny
        for j in range(e):
            cols = np.flatnonzero(self.pair_bin == j)
            if cols.size == 0:
                continue
            add(cols, self.pair_leak[cols], -np.inf, float(p.spare_leak_ma[j]))
            if math.isfinite(p.spare_amps_a[j]):
                add(cols, self.pair_amps[cols], -np.inf, float(p.spare_amps_a[j]))
            if with_u:
                add(
                    np.append(cols, u_col),
                    np.append(self.pair_leak[cols], -p.budget_ma[j]),
                    -np.inf,
                    -float(p.base_ma[j]),
                )
        for s in range(ny):
            cols = np.flatnonzero(self.pair_slot == s)
            tcol = self.slot_col[s]
            y = nx + s
            add(np.append(cols, y), np.append(self.pair_leak[cols], -p.spare_leak_ma[tcol]), -np.inf, 0.0)
            if math.isfinite(p.spare_amps_a[tcol]):
                add(np.append(cols, y), np.append(self.pair_amps[cols], -p.spare_amps_a[tcol]), -np.inf, 0.0)
            for k in cols.tolist():
                add(np.array([k, y]), np.array([1.0, -1.0]), -np.inf, 0.0)
            if s + 1 < ny and self.slot_type[s + 1] == self.slot_type[s]:
                add(np.array([y + 1, y]), np.array([1.0, -1.0]), -np.inf, 0.0)
            if with_u:
                add(
                    np.concatenate([cols, [y, u_col]]),
                    np.concatenate([self.pair_leak[cols], [p.base_ma[tcol], -p.budget_ma[tcol]]]),
                    -np.inf,
                    0.0,
                )
        n_vars = nx + ny + (1 if with_u else 0)
        matrix = coo_matrix((np.concatenate(v), (np.concatenate(r), np.concatenate(c))), shape=(row, n_vars))
        return matrix.tocsr(), np.asarray(lo), np.asarray(hi)

    def moves_row(self) -> tuple[np.ndarray, np.ndarray, float]:
        """Columns and coefficients of Σ x[i, start(i)] and the number of items that move anyway."""
        placed = self.start_pair >= 0
        cols = self.start_pair[placed]
        return cols, np.ones(cols.size), float(self.n - cols.size)

    def decode(self, x: np.ndarray) -> Solution:
        e = self.p.n_existing
        chosen = np.flatnonzero(x[: self.n_x] > _INT_TOL)
        bin_of = np.full(self.n, -1, dtype=np.int64)
        slot = self.pair_slot[chosen]
        bin_of[self.pair_item[chosen]] = np.where(slot >= 0, e + slot, self.pair_bin[chosen])
        types = [self.slot_type[s] for s in range(self.n_y)]
        return compact(bin_of, types, e)


@contextmanager
def _native_output_silenced() -> Iterator[None]:
    """HiGHS (C++) sometimes prints a diagnostic line straight to file descriptor 1 even with its display off;
    keep it out of the user's standard output, which may carry a JSON document."""
    try:
        sys.stdout.flush()
        saved = os.dup(1)
    except (OSError, ValueError):
        yield
        return
    devnull = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(devnull, 1)
        yield
    finally:
        os.dup2(saved, 1)
        os.close(saved)
        os.close(devnull)


def _solve(
    c: np.ndarray,
    integrality: np.ndarray,
    matrix: object,
    lo: np.ndarray,
    hi: np.ndarray,
    upper: np.ndarray,
    time_limit_s: float,
    gap: float,
) -> Any:  # scipy's OptimizeResult (scipy has no type stubs)
    from scipy.optimize import Bounds, LinearConstraint, milp

    with _native_output_silenced():
        return milp(
            c,
            integrality=integrality,
            bounds=Bounds(np.zeros(c.size), upper),
            constraints=LinearConstraint(matrix, lo, hi),
            options={"time_limit": max(time_limit_s, 0.05), "mip_rel_gap": gap, "presolve": True},
        )


def solve_exact(
    p: Packing, slots: list[int], min_new: int, min_moves: int, time_limit_s: float, headroom_time_s: float
) -> ExactResult:
    """Solve stage 1 (new circuits, then moves) and, if proven, stage 2 (headroom) for one packing.

    ``slots[t]`` is the most new bins of type t worth offering (the heuristic's total is enough: no optimum
    uses more); ``min_new`` and ``min_moves`` are known lower bounds, added as cuts. Times in seconds.
    """
    from scipy.sparse import vstack

    model = _Model(p, slots)
    nx, ny = model.n_x, model.n_y
    matrix, lo, hi = model.rows(with_u=False)
    big = model.n + 1
    cost = np.zeros(nx + ny)
    cost[nx:] = big
    mcols, mvals, always = model.moves_row()
    cost[mcols] -= 1.0  # moves = n − Σ x[i, start(i)]
    extra_lo, extra_hi = [], []
    extra = []
    if ny and min_new > 0:
        row = np.zeros(nx + ny)
        row[nx:] = 1.0
        extra.append(row)
        extra_lo.append(float(min_new))
        extra_hi.append(np.inf)
    if min_moves > 0 and mcols.size:
        row = np.zeros(nx + ny)
        row[mcols] = 1.0
        extra.append(row)
        extra_lo.append(-np.inf)
        extra_hi.append(float(model.n - min_moves))
    if extra:
        matrix = vstack([matrix, np.vstack(extra)]).tocsr()
        lo = np.concatenate([lo, extra_lo])
        hi = np.concatenate([hi, extra_hi])
    res = _solve(cost, np.ones(nx + ny), matrix, lo, hi, np.ones(nx + ny), time_limit_s, 0.0)
    offset = float(model.n)
    dual = getattr(res, "mip_dual_bound", None)
    new_bound = 0
    if dual is not None and math.isfinite(dual):
        new_bound = max(0, int(math.ceil((dual + offset - (big - 1)) / big - 1e-9)))
    if res.x is None:
        return ExactResult(None, False, res.status == 2, new_bound)
    sol = model.decode(res.x)
    proven = res.status == 0
    if proven:
        new_bound = sol.new_count
    if not proven or headroom_time_s <= 0:
        return ExactResult(sol, proven, False, new_bound)
    better, headroom_proven = _headroom(model, sol, headroom_time_s)
    return ExactResult(better or sol, True, False, new_bound, headroom_proven)


def best_headroom(p: Packing, sol: Solution, time_limit_s: float) -> tuple[Solution, bool]:
    """Stage 2 alone, for a plan already proven best on new bins and moves: the same counts with the most
    headroom on the tightest bin; returns the better plan and whether it is proven best."""
    slots = [min(int(p.allowed[:, p.n_existing + t].sum()), sol.new_count) for t in range(p.n_types)]
    better, proven = _headroom(_Model(p, slots), sol, time_limit_s)
    return better or sol, proven


def _headroom(model: _Model, sol: Solution, time_limit_s: float) -> tuple[Solution | None, bool]:
    """Stage 2: with new bins and moves fixed at ``sol``'s counts, minimise the tightest bin's budget use."""
    from scipy.sparse import vstack

    p = model.p
    nx, ny = model.n_x, model.n_y
    matrix, lo, hi = model.rows(with_u=True)
    n_vars = nx + ny + 1
    count = np.zeros(n_vars)
    count[nx : nx + ny] = 1.0
    keep = np.zeros(n_vars)
    mcols, mvals, always = model.moves_row()
    keep[mcols] = mvals
    placed = float(mcols.size)
    moves = sol.moves(p)
    matrix = vstack([matrix, np.vstack([count, keep])]).tocsr()
    lo = np.concatenate([lo, [-np.inf, placed + always - moves]])
    hi = np.concatenate([hi, [float(sol.new_count), np.inf]])
    cost = np.zeros(n_vars)
    cost[-1] = 1.0
    integrality = np.ones(n_vars)
    integrality[-1] = 0
    upper = np.ones(n_vars)
    upper[-1] = sol.max_use(p) + 1e-9
    res = _solve(cost, integrality, matrix, lo, hi, upper, time_limit_s, 1e-6)
    if res.x is None:
        return None, False
    candidate = model.decode(res.x)
    if (
        candidate.violations(p, solver=True)
        or candidate.key(p)[:2] != sol.key(p)[:2]
        or candidate.max_use(p) > sol.max_use(p)
    ):
        return None, False
    return candidate, res.status == 0


def lp_bound(p: Packing, time_limit_s: float = 5.0) -> int:
    """Lower bound on new bins from the LP relaxation with one aggregated, fractional bin per type.

    Variables x[i, j] ≥ 0 for allowed pairs and z[t] ≥ 0 (new bins of type t, fractional); each item fully
    assigned; existing bins within both spares; Σ over type t ≤ spare[t] · z[t] in both capacities. The LP
    optimum Σ z, rounded up, bounds the integer optimum (every plan is a feasible point). 0 when the LP is not
    solved within ``time_limit_s`` seconds.
    """
    from scipy.optimize import linprog
    from scipy.sparse import coo_matrix

    e, t, n = p.n_existing, p.n_types, p.n_items
    if t == 0 or n == 0:
        return 0
    pi, pj = np.nonzero(p.allowed)
    nx = pi.size
    leak = p.leak_ma[pi, pj]
    amps = p.amps_a[pi, pj]
    rows_r, rows_c, rows_v, b = [], [], [], []
    row = 0
    for j in range(e + t):
        cols = np.flatnonzero(pj == j)
        for weights, spare in ((leak, p.spare_leak_ma[j]), (amps, p.spare_amps_a[j])):
            if not math.isfinite(spare) or cols.size == 0:
                continue
            rows_r.append(np.full(cols.size + (1 if j >= e else 0), row))
            if j >= e:
                rows_c.append(np.append(cols, nx + j - e))
                rows_v.append(np.append(weights[cols], -spare))
                b.append(0.0)
            else:
                rows_c.append(cols)
                rows_v.append(weights[cols])
                b.append(float(spare))
            row += 1
    a_ub = coo_matrix(
        (np.concatenate(rows_v), (np.concatenate(rows_r), np.concatenate(rows_c))), shape=(row, nx + t)
    ).tocsr()
    a_eq = coo_matrix((np.ones(nx), (pi, np.arange(nx))), shape=(n, nx + t)).tocsr()
    cost = np.concatenate([np.zeros(nx), np.ones(t)])
    with _native_output_silenced():
        res = linprog(
            cost,
            A_ub=a_ub,
            b_ub=np.asarray(b),
            A_eq=a_eq,
            b_eq=np.ones(n),
            bounds=(0, None),
            method="highs",
            options={"time_limit": max(time_limit_s, 0.05)},
        )
    if res.status != 0:
        return 0
    return max(0, int(math.ceil(res.fun - 1e-6)))
