"""The split planner's numeric problem: pack movable loads onto existing circuits or new ones.

One :class:`Packing` is an independent sub-problem (a room group): ``n`` movable items, ``e`` existing circuits
("bins") and ``t`` kinds of new circuit that may be added ("types"). Matrices have one column per existing bin
followed by one column per type; a new bin of type ``k`` uses column ``e + k``. A load's leakage and current can
depend on the circuit it sits on (its supply), so both are matrices. Plain numpy arrays, unit-suffixed names.

The objective, in this order: (1) fewest new bins; (2) fewest items whose bin differs from their start bin (an
unplaced item always counts: placing it is a change the designer makes); (3) the lowest budget use on the
tightest bin (leakage ÷ budget), i.e. the largest headroom left.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

# Leakage: a margin of 0.1 µA is kept below every budget, far below any figure that matters, so that a plan
# passes the check's strict "leakage ≤ budget" test whatever the order of a floating-point sum. A MILP solution
# may break a row by the solver's feasibility tolerance (HiGHS: about 1e-7 on rows, 1e-6 on integrality); plans
# from the solver are accepted up to SOLVER_TOLERANCE_MA and SOLVER_TOLERANCE_A over a spare, less than the
# margin for leakage and than the allowance planner_rules.CURRENT_TOLERANCE_A leaves for current.
MARGIN_MA = 1e-4
# A bin filled to exactly its spare is feasible, whichever order its figures are added in: sums of floats differ in
# the last bits (3.4 + 7.5 + 3.2 is 14.100000000000001 A, the heuristic's 14.1 - 3.4 - 7.5 - 3.2 is not below 0), so
# a total may pass its spare by this much (1e-9 mA or A is far below any real figure; modelling choice).
FLOAT_SUM_TOLERANCE = 1e-9
SOLVER_TOLERANCE_MA = 5e-5
SOLVER_TOLERANCE_A = 2.5e-4


@dataclass(slots=True)
class Packing:
    """One independent packing problem (see the module docstring for the column layout)."""

    leak_ma: np.ndarray  # (n, e + t) leakage of item i on a bin of column j [mA]
    amps_a: np.ndarray  # (n, e + t) current of item i on a bin of column j [A]
    allowed: np.ndarray  # (n, e + t) bool: item i may go on a bin of column j (room, leg)
    spare_leak_ma: np.ndarray  # (e + t,) leakage a bin can still take (budget − fixed − cable − margin) [mA]
    spare_amps_a: np.ndarray  # (e + t,) current a bin can still take (rating × load factor − fixed) [A]; inf
    budget_ma: np.ndarray  # (e + t,) the bin's budget [mA]
    base_ma: np.ndarray  # (e + t,) leakage on the bin before any item (fixed loads, cable) [mA]
    start: np.ndarray  # (n,) int: the existing bin item i is on now, −1 when unplaced
    n_existing: int

    @property
    def n_items(self) -> int:
        return int(self.start.shape[0])

    @property
    def n_types(self) -> int:
        return int(self.spare_leak_ma.shape[0]) - self.n_existing

    def fits_alone(self) -> np.ndarray:
        """(n, e + t) bool: item i alone fits a bin of column j (allowed, within both spare capacities)."""
        return self.allowed & (self.leak_ma <= self.spare_leak_ma) & (self.amps_a <= self.spare_amps_a)

    def moves_lower_bound(self) -> int:
        """A lower bound on moves: unplaced items, plus for each over-full bin the fewest of its items whose
        removal can bring it back within both capacities (the largest first; taken per capacity, the larger)."""
        total = int(np.count_nonzero(self.start < 0))
        for j in range(self.n_existing):
            on = np.flatnonzero(self.start == j)
            if on.size == 0:
                continue
            need = 0
            for weights, spare in (
                (self.leak_ma[on, j], self.spare_leak_ma[j]),
                (self.amps_a[on, j], self.spare_amps_a[j]),
            ):
                excess = float(weights.sum()) - float(spare)
                if excess > 0:
                    removed = np.cumsum(np.sort(weights)[::-1])
                    need = max(need, int(np.searchsorted(removed, excess - 1e-12)) + 1)
            total += need
        return total


@dataclass(slots=True)
class Solution:
    """Where each item goes: ``bin_of[i] < e`` an existing bin, else new bin ``bin_of[i] − e``."""

    bin_of: np.ndarray  # (n,) int
    new_types: list[int]  # type (0 … t−1) of each new bin

    def column(self, p: Packing) -> np.ndarray:
        """(n,) matrix column of each item's bin."""
        cols = self.bin_of.copy()
        new = cols >= p.n_existing
        if new.any():
            cols[new] = p.n_existing + np.asarray(self.new_types, dtype=np.int64)[cols[new] - p.n_existing]
        return cols

    @property
    def new_count(self) -> int:
        return len(self.new_types)

    def moves(self, p: Packing) -> int:
        return int(np.count_nonzero(self.bin_of != p.start))

    def bin_totals(self, p: Packing) -> tuple[np.ndarray, np.ndarray]:
        """Leakage [mA] and current [A] the items put on each bin (existing bins, then new bins)."""
        cols = self.column(p)
        rows = np.arange(p.n_items)
        size = p.n_existing + self.new_count
        leak = np.bincount(self.bin_of, weights=p.leak_ma[rows, cols], minlength=size)
        amps = np.bincount(self.bin_of, weights=p.amps_a[rows, cols], minlength=size)
        return leak, amps

    def bin_columns(self, p: Packing) -> np.ndarray:
        return np.concatenate([np.arange(p.n_existing), p.n_existing + np.asarray(self.new_types, dtype=np.int64)])

    def max_use(self, p: Packing) -> float:
        """Budget used on the tightest bin: max over bins of (base + items) ÷ budget (existing bins always count,
        new bins when used)."""
        leak, _ = self.bin_totals(p)
        cols = self.bin_columns(p)
        use = (p.base_ma[cols] + leak) / p.budget_ma[cols]
        return float(use.max()) if use.size else 0.0

    def violations(self, p: Packing, solver: bool = False) -> list[str]:
        """Broken packing constraints, in words (empty when the solution is feasible for this packing).

        ``solver``: the plan comes from the MILP solver, whose tolerance is allowed (see SOLVER_TOLERANCE_MA)."""
        problems: list[str] = []
        cols = self.column(p)
        rows = np.arange(p.n_items)
        bad = np.flatnonzero(~p.allowed[rows, cols])
        problems += [f"item {i} on a bin it may not use" for i in bad]
        leak, amps = self.bin_totals(p)
        spare_cols = self.bin_columns(p)
        over_leak = leak > p.spare_leak_ma[spare_cols] + (SOLVER_TOLERANCE_MA if solver else FLOAT_SUM_TOLERANCE)
        over_amps = amps > p.spare_amps_a[spare_cols] + (SOLVER_TOLERANCE_A if solver else FLOAT_SUM_TOLERANCE)
        problems += [f"bin {j} over its leakage spare" for j in np.flatnonzero(over_leak)]
        problems += [f"bin {j} over its current spare" for j in np.flatnonzero(over_amps)]
        used = np.unique(self.bin_of[self.bin_of >= p.n_existing]) - p.n_existing
        if used.size != self.new_count:
            problems.append("a new bin is empty")
        return problems

    def key(self, p: Packing) -> tuple[int, int, float]:
        """Lexicographic objective (new bins, moves, tightest use); smaller is better."""
        return self.new_count, self.moves(p), round(self.max_use(p), 9)


def compact(bin_of: np.ndarray, new_types: list[int], n_existing: int) -> Solution:
    """Renumber new bins 0 … k−1 in order of first use, dropping empty ones."""
    bin_of = bin_of.copy()
    mapping: dict[int, int] = {}
    types: list[int] = []
    for i, b in enumerate(bin_of.tolist()):
        if b >= n_existing:
            if b not in mapping:
                mapping[b] = len(types)
                types.append(new_types[b - n_existing])
            bin_of[i] = n_existing + mapping[b]
    return Solution(bin_of, types)
