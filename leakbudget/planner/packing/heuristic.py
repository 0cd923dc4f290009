"""Fast plans for large packings: evict, best-fit decreasing, then local improvement.

1. Repair: items stay where they are; from each over-full bin the fewest items are evicted (the smallest item
   that alone cures the excess, else the largest, repeatedly).
2. Place the evicted and unplaced items, largest first, on the open bin they fit most tightly (best-fit
   decreasing), opening a new bin of the first type that takes the item when none fits. ``first_fit_decreasing``
   is the textbook variant (first bin that fits), kept as the baseline the planner is measured against.
   Leakage and current make this a two-dimensional (vector) packing, where best fit pairs items heavy in the
   same capacity (two copiers near a circuit's current limit, its leakage budget half empty); a second
   construction therefore opens as many new bins as the lower bound says first and spreads the items dominated
   by the less scarce capacity across all bins before best-fitting the rest. The better of the two is kept.
3. Improve until the deadline: empty new bins by moving their items (or shifting one item out of a full bin to
   make room); bring moved items back to their start bin, relocating items that were moved in; move items that
   were moved anyway off the tightest bin.
Every step keeps every bin within both spare capacities, so each intermediate plan is feasible.
"""

from __future__ import annotations

import time
from collections.abc import Callable

import numpy as np

from leakbudget.planner.packing.problem import Packing, Solution, compact

SHIFT_CANDIDATE_BINS = 8  # bins examined when shifting one item out to make room (limits the work per item)
HEADROOM_ROUNDS = 200  # moves tried when lowering the tightest bin's use
SPREAD_STEPS = 100  # the spreading construction retries with 1 % more new bins opened first, while time allows


class Unplaceable(Exception):
    """Some items fit on no open bin and on no new bin; ``items`` are their indices in the packing."""

    def __init__(self, items: list[int], partial: np.ndarray) -> None:
        super().__init__(f"{len(items)} item(s) fit nowhere")
        self.items = items
        self.partial = partial  # (n,) bin of each item, −1 where it could not be placed


class _State:
    """Bins with their residual capacities and members; new bins live after the existing ones."""

    def __init__(self, p: Packing) -> None:
        e, n = p.n_existing, p.n_items
        size = e + n  # at most one new bin per item
        self.p = p
        self.col = np.zeros(size, dtype=np.int64)
        self.col[:e] = np.arange(e)
        self.cap_leak = np.zeros(size)
        self.cap_amps = np.zeros(size)
        self.cap_leak[:e] = p.spare_leak_ma[:e]
        self.cap_amps[:e] = p.spare_amps_a[:e]
        self.res_leak = self.cap_leak.copy()
        self.res_amps = self.cap_amps.copy()
        self.open = np.zeros(size, dtype=bool)
        self.open[:e] = True
        self.limit = e  # bins [0, limit) have been opened at some time
        self.bin_of = np.full(n, -1, dtype=np.int64)
        self.members: list[set[int]] = [set() for _ in range(size)]
        rows = np.where(p.allowed, p.leak_ma, np.inf)
        amps = np.where(p.allowed, p.amps_a, np.inf)
        spare_l = np.where(p.spare_leak_ma > 0, p.spare_leak_ma, np.inf)
        spare_a = np.where(np.isfinite(p.spare_amps_a) & (p.spare_amps_a > 0), p.spare_amps_a, np.inf)
        # size of an item for ordering: its tightest share of a bin it may use, in either capacity
        self.size = np.maximum((rows / spare_l).min(axis=1), (amps / spare_a).min(axis=1))

    # -- basic moves -------------------------------------------------------------------------------------
    def weight(self, i: int, b: int) -> tuple[float, float]:
        c = self.col[b]
        return float(self.p.leak_ma[i, c]), float(self.p.amps_a[i, c])

    def put(self, i: int, b: int) -> None:
        w, a = self.weight(i, b)
        self.res_leak[b] -= w
        self.res_amps[b] -= a
        self.bin_of[i] = b
        self.members[b].add(i)
        self.open[b] = True

    def take(self, i: int) -> int:
        b = int(self.bin_of[i])
        w, a = self.weight(i, b)
        self.res_leak[b] += w
        self.res_amps[b] += a
        self.bin_of[i] = -1
        self.members[b].discard(i)
        if b >= self.p.n_existing and not self.members[b]:
            self.open[b] = False
        return b

    def fits(self, i: int, b: int) -> bool:
        c = self.col[b]
        return bool(
            self.p.allowed[i, c]
            and self.p.leak_ma[i, c] <= self.res_leak[b]
            and self.p.amps_a[i, c] <= self.res_amps[b]
        )

    def fitting(self, i: int, exclude: tuple[int, ...] = ()) -> np.ndarray:
        """Open bins item i fits on now (indices)."""
        lim = self.limit
        cols = self.col[:lim]
        ok = (
            self.open[:lim]
            & self.p.allowed[i, cols]
            & (self.p.leak_ma[i, cols] <= self.res_leak[:lim])
            & (self.p.amps_a[i, cols] <= self.res_amps[:lim])
        )
        for b in exclude:
            if b < lim:
                ok[b] = False
        return np.flatnonzero(ok)

    def tightest(self, i: int, bins: np.ndarray) -> int:
        """Of ``bins`` (where i fits), the one i fills most tightly (smallest leftover share of either capacity)."""
        cols = self.col[bins]
        left_l = (self.res_leak[bins] - self.p.leak_ma[i, cols]) / np.maximum(self.cap_leak[bins], 1e-12)
        with np.errstate(invalid="ignore"):
            left_a = (self.res_amps[bins] - self.p.amps_a[i, cols]) / np.maximum(self.cap_amps[bins], 1e-12)
        left_a = np.where(np.isfinite(left_a), left_a, np.inf)
        return int(bins[int(np.argmin(np.minimum(left_l, left_a)))])

    def open_type(self, t: int) -> int:
        """Open an empty new bin of type t and return it."""
        p = self.p
        c = p.n_existing + t
        b = self.limit
        self.limit += 1
        self.col[b] = c
        self.cap_leak[b] = self.res_leak[b] = p.spare_leak_ma[c]
        self.cap_amps[b] = self.res_amps[b] = p.spare_amps_a[c]
        self.open[b] = True
        return b

    def open_new(self, i: int) -> int:
        """Open a new bin of the first type item i fits on alone; −1 if none."""
        p = self.p
        e = p.n_existing
        for t in range(p.n_types):
            c = e + t
            if p.allowed[i, c] and p.leak_ma[i, c] <= p.spare_leak_ma[c] and p.amps_a[i, c] <= p.spare_amps_a[c]:
                return self.open_type(t)
        return -1

    def solution(self) -> Solution:
        p = self.p
        e = p.n_existing
        types = [int(self.col[b]) - e for b in range(e, self.limit)]
        return compact(self.bin_of, types, e)

    # -- construction ------------------------------------------------------------------------------------
    def repair(self) -> list[int]:
        """Put every placed item on its start bin, evict the fewest from over-full bins; return the pool."""
        p = self.p
        pool = [int(i) for i in np.flatnonzero(p.start < 0)]
        for i in np.flatnonzero(p.start >= 0).tolist():
            self.put(i, int(p.start[i]))
        for b in range(p.n_existing):
            while self.res_leak[b] < 0 or self.res_amps[b] < 0:
                over_l, over_a = -self.res_leak[b], -self.res_amps[b]
                members = sorted(self.members[b], key=lambda k: self.size[k])
                curing = [k for k in members if self.weight(k, b)[0] >= over_l and self.weight(k, b)[1] >= over_a]
                if curing:
                    victim = curing[0]
                else:

                    def share(k: int, b: int = b, over_l: float = over_l, over_a: float = over_a) -> float:
                        w, a = self.weight(k, b)
                        return (min(w / over_l, 1.0) if over_l > 0 else 0.0) + (
                            min(a / over_a, 1.0) if over_a > 0 else 0.0
                        )

                    victim = max(members, key=share)
                self.take(victim)
                pool.append(victim)
        return pool

    def place_all(self, pool: list[int], best_fit: bool) -> list[int]:
        """Place ``pool`` largest first; return the items that fit nowhere."""
        failed: list[int] = []
        for i in sorted(pool, key=lambda k: -self.size[k]):
            bins = self.fitting(i)
            if bins.size:
                b = self.tightest(i, bins) if best_fit else int(bins[0])
            else:
                b = self.open_new(i)
            if b < 0:
                failed.append(i)
            else:
                self.put(i, b)
        return failed

    def place_spread(self, pool: list[int], pre_open: int) -> list[int]:
        """Vector-packing construction for one new-bin type: open ``pre_open`` new bins (a lower bound on what
        is needed), spread the items dominated by the less scarce capacity over the bins (the one with the most
        of that capacity left first, so such items are not paired), then best-fit the rest, largest first.
        Returns the items that fit nowhere."""
        p = self.p
        e = p.n_existing
        cap_l, cap_a = float(p.spare_leak_ma[e]), float(p.spare_amps_a[e])
        if not (np.isfinite(cap_a) and cap_l > 0 and cap_a > 0):
            return self.place_all(pool, best_fit=True)
        for _ in range(pre_open):
            self.open_type(0)
        items = np.asarray(pool, dtype=np.int64)
        share_l = p.leak_ma[items, e] / cap_l
        share_a = p.amps_a[items, e] / cap_a
        room_l = float(self.res_leak[: self.limit][self.open[: self.limit]].sum()) / cap_l
        room_a = float(self.res_amps[: self.limit][self.open[: self.limit]].sum()) / cap_a
        leak_scarce = share_l.sum() / max(room_l, 1e-12) >= share_a.sum() / max(room_a, 1e-12)
        heavy = (share_a > share_l) if leak_scarce else (share_l > share_a)
        spread_res = self.res_amps if leak_scarce else self.res_leak
        failed: list[int] = []
        order_key = share_a if leak_scarce else share_l
        heavy_rows = np.flatnonzero(heavy)
        for r in heavy_rows[np.argsort(-order_key[heavy_rows], kind="stable")].tolist():
            i = int(items[r])
            bins = self.fitting(i)
            b = int(bins[np.argmax(spread_res[bins])]) if bins.size else self.open_new(i)
            if b < 0:
                failed.append(i)
            else:
                self.put(i, b)
        failed += self.place_all(items[~heavy].tolist(), best_fit=True)
        for b in range(e, self.limit):
            if not self.members[b]:
                self.open[b] = False
        return failed

    # -- improvement -------------------------------------------------------------------------------------
    def _shift_to_fit(self, i: int, banned: tuple[int, ...]) -> int:
        """Make room for item i on some open bin by moving one item from it to another bin; return the bin."""
        p = self.p
        lim = self.limit
        cols = self.col[:lim]
        ok = self.open[:lim] & p.allowed[i, cols]
        for b in banned:
            if b < lim:
                ok[b] = False
        bins = np.flatnonzero(ok)
        if bins.size == 0:
            return -1
        deficit = np.maximum(p.leak_ma[i, cols[bins]] - self.res_leak[bins], 0) / np.maximum(self.cap_leak[bins], 1e-12)
        for b in bins[np.argsort(deficit)][:SHIFT_CANDIDATE_BINS].tolist():
            w, a = self.weight(i, b)
            # prefer moving items that are moved anyway (no extra move)
            order = sorted(self.members[b], key=lambda k: (self.bin_of[k] == p.start[k], self.size[k]))
            for k in order:
                wk, ak = self.weight(k, b)
                if self.res_leak[b] + wk < w or self.res_amps[b] + ak < a:
                    continue
                self.take(k)
                targets = self.fitting(k, exclude=(b, *banned))
                if targets.size:
                    self.put(k, self.tightest(k, targets))
                    return b
                self.put(k, b)
        return -1

    def eliminate_new_bins(self, deadline: float) -> None:
        """Try to empty each new bin, least filled first."""
        e = self.p.n_existing
        order = sorted(
            (b for b in range(e, self.limit) if self.open[b]),
            key=lambda b: self.res_leak[b] / max(float(self.cap_leak[b]), 1e-12),
            reverse=True,
        )
        for b in order:
            if time.monotonic() > deadline:
                return
            if not self.open[b]:
                continue
            items = sorted(self.members[b], key=lambda k: -self.size[k])
            undo: list[tuple[int, int]] = []  # (item, bin it came from) for every step, to roll back
            ok = True
            for i in items:
                self.take(i)
                self.open[b] = False
                undo.append((i, b))
                targets = self.fitting(i, exclude=(b,))
                if targets.size:
                    self.put(i, self.tightest(i, targets))
                    continue
                snapshot = self.bin_of.copy()
                c = self._shift_to_fit(i, banned=(b,))
                if c >= 0:
                    moved = np.flatnonzero(snapshot != self.bin_of)
                    undo.extend((int(k), int(snapshot[k])) for k in moved)
                    self.put(i, c)
                    continue
                ok = False
                break
            if not ok:
                for i, src in reversed(undo):
                    if self.bin_of[i] >= 0:
                        self.take(i)
                    self.put(i, src)

    def restore_moved(self, deadline: float) -> None:
        """Bring moved items back to their start bin, relocating items moved in there when that makes room."""
        p = self.p
        moved_out = np.flatnonzero((p.start >= 0) & (self.bin_of != p.start)).tolist()
        for i in sorted(moved_out, key=lambda k: self.size[k]):
            if time.monotonic() > deadline:
                return
            home = int(p.start[i])
            if self.fits(i, home):
                self.take(i)
                self.put(i, home)
                continue
            w, a = self.weight(i, home)
            guests = sorted((k for k in self.members[home] if p.start[k] != home), key=lambda k: -self.size[k])
            relocated: list[tuple[int, int]] = []
            for k in guests:
                if self.res_leak[home] >= w and self.res_amps[home] >= a:
                    break
                targets = self.fitting(k, exclude=(home,))
                if targets.size == 0:
                    continue
                self.take(k)
                dest = self.tightest(k, targets)
                self.put(k, dest)
                relocated.append((k, home))
            if self.res_leak[home] >= w and self.res_amps[home] >= a:
                self.take(i)
                self.put(i, home)
            else:
                for k, back in reversed(relocated):
                    self.take(k)
                    self.put(k, back)

    def lower_tightest(self, deadline: float) -> None:
        """Move items that are moved anyway off the tightest bin while that lowers the highest budget use."""
        p = self.p
        base = p.base_ma[self.col]
        budget = p.budget_ma[self.col]
        for _ in range(HEADROOM_ROUNDS):
            if time.monotonic() > deadline:
                return
            lim = self.limit
            use = np.where(
                self.open[:lim], (base[:lim] + self.cap_leak[:lim] - self.res_leak[:lim]) / budget[:lim], -np.inf
            )
            b = int(np.argmax(use))
            free = [k for k in self.members[b] if self.bin_of[k] != p.start[k]]
            best: tuple[float, int, int] | None = None
            for k in free:
                w, _ = self.weight(k, b)
                targets = self.fitting(k, exclude=(b,))
                if targets.size == 0:
                    continue
                after = (
                    base[targets] + self.cap_leak[targets] - self.res_leak[targets] + p.leak_ma[k, self.col[targets]]
                ) / budget[targets]
                j = int(np.argmin(after))
                worst = max(float(after[j]), (base[b] + self.cap_leak[b] - self.res_leak[b] - w) / budget[b])
                if worst < use[b] - 1e-12 and (best is None or worst < best[0]):
                    best = (worst, k, int(targets[j]))
            if best is None:
                return
            _, k, dest = best
            self.take(k)
            self.put(k, dest)


def first_fit_decreasing(p: Packing) -> Solution:
    """The textbook baseline: repair, then first-fit decreasing (existing bins first, in order)."""
    state = _State(p)
    failed = state.place_all(state.repair(), best_fit=False)
    if failed:
        raise Unplaceable(failed, state.bin_of.copy())
    return state.solution()


def improve(p: Packing, deadline: float) -> Solution:
    """The best of best-fit decreasing and the spreading construction (single new-bin type; tried with the lower
    bound's number of bins opened first, then a few more while half the time is left), then local improvement
    until ``deadline`` (a ``time.monotonic()`` value). Raises :class:`Unplaceable`."""
    from leakbudget.planner.packing.bounds import packing_bound

    start = time.monotonic()
    build_until = start + 0.5 * max(deadline - start, 0.0)
    best: _State | None = None

    def attempt(construct: Callable[[_State], list[int]]) -> None:
        nonlocal best
        state = _State(p)
        failed = construct(state)
        if failed:
            raise Unplaceable(failed, state.bin_of.copy())
        state.eliminate_new_bins(build_until)
        if best is None or state.solution().key(p) < best.solution().key(p):
            best = state

    attempt(lambda st: st.place_all(st.repair(), best_fit=True))
    if p.n_types == 1:
        pre_open = packing_bound(p)
        step = max(1, pre_open // SPREAD_STEPS)
        while True:

            def spread(st: _State, opened: int = pre_open) -> list[int]:
                return st.place_spread(st.repair(), opened)

            attempt(spread)
            assert best is not None
            pre_open += step
            if pre_open >= best.solution().new_count or time.monotonic() > build_until:
                break
    assert best is not None
    best.restore_moved(deadline)
    best.eliminate_new_bins(deadline)
    best.lower_tightest(deadline)
    return best.solution()
