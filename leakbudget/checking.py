"""The check: estimate every load, sum and judge every circuit, then the trip likelihood and the readings.

The orchestrator above the physics (:mod:`leakbudget.estimate`, :mod:`leakbudget.risk`,
:mod:`leakbudget.readings`); it reads and writes nothing (:mod:`leakbudget.api` does).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from leakbudget.devices import Status
from leakbudget.estimate import Estimate, LoadResult, estimate, evaluate
from leakbudget.model import Project
from leakbudget.protection import DeviceResult, evaluate_tree
from leakbudget.readings import ReadingResult, reconcile
from leakbudget.risk import RiskResult, assess


@dataclass
class CheckResult(Estimate):
    """The estimate with each protected circuit's trip likelihood and the Readings sheet reconciled."""

    risk: RiskResult | None = None  # trip likelihoods and how they were computed
    readings: list[ReadingResult] = field(default_factory=list)  # Readings sheet reconciled with the estimate
    devices: list[DeviceResult] = field(default_factory=list)  # shared devices (Protection sheet) and their totals

    @property
    def all_ok(self) -> bool:
        fine = (Status.OK, Status.UNPROTECTED)
        return all(c.status in fine for c in self.circuits) and all(d.status in fine for d in self.devices)

    @property
    def unplaced(self) -> list[LoadResult]:
        return [r for r in self.loads if r.load is not None and r.circuit_id is None]


def check(project: Project) -> CheckResult:
    """Estimate every load, evaluate every circuit, then its trip likelihood and any readings."""
    loads = estimate(project)
    result = CheckResult(project, evaluate(project, loads), loads)
    result.risk = assess(result)
    mark_marginal(result)
    result.devices = evaluate_tree(result, result.risk.samples)
    result.readings = reconcile(result)
    return result


def mark_marginal(result: CheckResult) -> None:
    """One verdict: a circuit within budget whose switch-on trip likelihood is above the ``Switch-on limit``
    setting gets the status ``marginal`` (between ok and over-budget)."""
    limit = float(result.project.settings["Switch-on limit"])
    for c in result.circuits:
        if c.status is Status.OK and c.risk is not None and c.risk.switch_on > limit:
            c.status = Status.MARGINAL
