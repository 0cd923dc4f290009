"""The split planner's entry point: one plan, or plans made again under a trip-likelihood cap."""

from __future__ import annotations

from leakbudget.input.units import UnitProblem
from leakbudget.model import Project
from leakbudget.planner.likelihood_cap import plan_within_cap
from leakbudget.planner.plan import PlannerError, SplitOptions, SplitPlan, check_options, plan_once
from leakbudget.progress import Progress
from leakbudget.settings import parse_likelihood_cap


def likelihood_cap_option(text: str) -> float:
    """The --max-trip-likelihood option ("1 %", 0.01) as a fraction, read as the setting of the same name is;
    PlannerError naming the option when it is not one."""
    try:
        return parse_likelihood_cap(text)
    except UnitProblem as exc:
        raise PlannerError(f"--max-trip-likelihood: {exc}.") from None


def plan_split(project: Project, options: SplitOptions = SplitOptions(), progress: Progress | None = None) -> SplitPlan:
    """Plan where every load goes (see :mod:`leakbudget.planner`); never returns a plan that breaks a limit.

    ``progress`` (optional, :mod:`leakbudget.progress`) hears of each stage: room groups planned, proved,
    widened, and the final check. With a trip-likelihood cap (``options.max_trip_likelihood``, else the ``Max
    trip likelihood`` setting) the plan is made again with tighter budgets until every protected circuit meets
    it (:mod:`leakbudget.planner.likelihood_cap`).
    """
    check_options(options)
    if options.max_trip_likelihood is not None or project.settings["Max trip likelihood"] is not None:
        return plan_within_cap(project, options, progress)
    return plan_once(project, options, progress)
