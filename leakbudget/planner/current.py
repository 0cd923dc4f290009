"""How `split` judges a circuit's current, the way the trade judges it: one rule, chosen by the ``Current rule``
setting, each part with its source.

Leakage is this tool's job; current is a limit a plan must not break. The parts:

* **A single cord-and-plug load** at most ``PLUG_SHARE`` (80 %) of its circuit's rating: NEC 2023 210.23(A)(1)
  for 15 and 20 A branch circuits (from memory); the same share for other ratings is from memory too (a UK 32 A
  ring takes 13 A plugs, far below it). A plug load above it may not be moved onto the circuit. It does not apply
  on a dedicated circuit, whose one appliance (a corded range on its 50 A circuit) is judged by the next part.
* **A dedicated circuit's one appliance** within the circuit's rating (NEC 2023 210.23 and 422.10 size the branch
  circuit to the appliance; from memory): a 50 A range on a 50 A circuit is as designed. A dedicated circuit keeps
  its appliance and takes nothing else.
* **The circuit's total**:

  - ``diversity`` (the default): the largest load in full and the ``Diversity`` share (0.4) of every other one,
    within the rating; common practice, in the manner of designers' diversity allowances (from memory);
  - ``all-on``: every load at once within rating × ``Load factor`` (0.8, common practice for continuous load,
    cf. NEC 210.19(A)/210.20(A));
  - ``strict``: ``all-on``, and a limit no plan can meet fails the plan (exit 1).

A limit broken by loads that must stay (marked Stays, on a dedicated or unprotected circuit) is a warning on that
circuit under ``diversity`` and ``all-on``, never a reason to add circuits; only ``strict`` makes it a blocker.
A plan never leaves a circuit above both its limit and the current it carries today.

The packing's constraint is linear in the loads' currents, so under ``diversity`` the planner uses a sufficient
linear form (:meth:`CurrentRule.linear_capacity_a`): Σ I ≤ (rating − (1 − d) × I_max) / d, I_max the largest
load that could end on the circuit. Every plan that meets it meets the rule; the rule itself is then checked on
the result (:meth:`CurrentRule.findings`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from leakbudget.model import Circuit
from leakbudget.settings import Settings

# NEC 2023 210.23(A)(1): a cord-and-plug-connected load on a 15 or 20 A branch circuit at most 80 % of its rating
# (from memory); applied to every rating, from memory.
PLUG_SHARE = 0.8
PLUG_SOURCE = "NEC 2023 210.23(A)(1) for 15 and 20 A circuits (from memory; the same share for others, from memory)"
DEDICATED_SOURCE = "NEC 2023 210.23 / 422.10: the circuit sized for its appliance (from memory)"
CURRENT_TOLERANCE_A = 1e-3  # a current within 1 mA above a limit is at the limit (rounding, not load)

PLUG = "plug"
LUMINAIRE = "luminaire"
HARD_WIRED = "hard-wired"
UNKNOWN = "unknown"


@dataclass(frozen=True, slots=True)
class CurrentRule:
    """The ``Current rule`` setting with its ``Diversity`` and ``Load factor`` [dimensionless]."""

    rule: str = "diversity"
    load_factor: float = 0.8
    diversity: float = 0.4

    @classmethod
    def from_settings(cls, settings: Settings) -> CurrentRule:
        return cls(str(settings["Current rule"]), float(settings["Load factor"]), float(settings["Diversity"]))

    @property
    def strict(self) -> bool:
        return self.rule == "strict"

    @property
    def all_on(self) -> bool:
        return self.rule != "diversity"

    def demand_a(self, currents: Sequence[float]) -> float:
        """The circuit's current by the rule [A]: Σ I (all-on), or I_max + d × (Σ I − I_max) (diversity)."""
        total = float(sum(currents))
        if self.all_on or not currents:
            return total
        largest = float(max(currents))
        return largest + self.diversity * (total - largest)

    def limit_a(self, circuit: Circuit) -> float:
        """What the demand may reach [A]: the rating (diversity; a dedicated circuit), rating × Load factor
        (all-on, strict); infinite without a rating."""
        if not circuit.rating_a:
            return math.inf
        if self.all_on and circuit.purpose != "dedicated":
            return circuit.rating_a * self.load_factor
        return circuit.rating_a

    def plug_limit_a(self, circuit: Circuit) -> float:
        """The most one cord-and-plug load may draw on the circuit [A] (``PLUG_SHARE`` × rating)."""
        return circuit.rating_a * PLUG_SHARE if circuit.rating_a else math.inf

    def linear_capacity_a(self, circuit: Circuit, largest_a: float) -> float:
        """A bound on Σ I that keeps the demand within the limit when no load is above ``largest_a`` [A]."""
        limit = self.limit_a(circuit)
        if math.isinf(limit) or self.all_on:
            return limit
        return max((limit - (1.0 - self.diversity) * largest_a) / self.diversity, 0.0)

    def describe(self) -> str:
        """The rule in words, with its sources, for the plan's method lines."""
        plug = f"a single plug load at most {PLUG_SHARE:.0%} of the rating ({PLUG_SOURCE})"
        if self.all_on:
            total = (
                f"every load at once within {self.load_factor:g} × rating (Load factor, common practice for "
                "continuous load)"
            )
        else:
            total = (
                f"the largest load in full and {self.diversity:.0%} of the others within the rating (Diversity, "
                "common practice, from memory)"
            )
        ending = (
            "; a limit no plan can meet fails the plan"
            if self.strict
            else "; a limit broken by loads that must stay is a warning"
        )
        return f"Current rule {self.rule}: {total}; {plug}; a dedicated appliance within its circuit's rating{ending}."

    def findings(self, circuit: Circuit, loads: Sequence[tuple[str, float, str]]) -> list[str]:
        """Every part of the rule the circuit's loads break, in words with the figures (empty when none).

        ``loads`` are (name, current [A], kind: plug, luminaire, hard-wired or unknown)."""
        if not circuit.rating_a or not loads:
            return []
        out = []
        rating = circuit.rating_a
        currents = [a for _, a, _ in loads]
        demand = self.demand_a(currents)
        limit = self.limit_a(circuit)
        if demand > limit + CURRENT_TOLERANCE_A:
            how = (
                f"{demand:.1f} A with every load on at once, above {self.load_factor:g} × {rating:g} A = {limit:.1f} A"
                if self.all_on and circuit.purpose != "dedicated"
                else f"{demand:.1f} A (the largest load in full, {self.diversity:.0%} of the others), above its "
                f"{rating:g} A rating"
                if not self.all_on
                else f"{demand:.1f} A, above its {rating:g} A rating"
            )
            out.append(f"{circuit.circuit_id} draws {how}")
        plug_limit = self.plug_limit_a(circuit)
        for name, amps, kind in loads:
            if kind == PLUG and amps > plug_limit + CURRENT_TOLERANCE_A and circuit.purpose != "dedicated":
                out.append(
                    f"'{name}' draws {amps:.1f} A, above {PLUG_SHARE:.0%} of {circuit.circuit_id}'s {rating:g} A "
                    f"rating ({plug_limit:.1f} A) for one plug load ({PLUG_SOURCE})"
                )
        return out
