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


def check_names(project: Project, options: SplitOptions) -> None:
    """--keep names loads and --avoid names circuits of the workbook: PlannerError for a name it does not have."""
    loads = {ld.name.strip().lower() for ld in project.loads}
    for name in options.keep:
        if name.strip().lower() not in loads:
            raise PlannerError(
                f"--keep '{name}' is not a load of sheet 'Loads' of {project.path.name}; give load names as in its "
                "Load column, separated by commas."
            )
    circuits = project.circuit_index()
    for name in options.avoid:
        if name.strip().lower() not in circuits:
            raise PlannerError(
                f"--avoid '{name}' is not a circuit of sheet 'Circuits' of {project.path.name}; give circuit ids as "
                "in its Circuit column, separated by commas."
            )


def plan_split(project: Project, options: SplitOptions = SplitOptions(), progress: Progress | None = None) -> SplitPlan:
    """Plan where every load goes (see :mod:`leakbudget.planner`); never returns a plan that breaks a limit.

    ``progress`` (optional, :mod:`leakbudget.progress`) hears of each stage: room groups planned, proved,
    widened, and the final check. With a trip-likelihood cap (``options.max_trip_likelihood``, else the ``Max
    trip likelihood`` setting) the plan is made again with tighter budgets until every protected circuit meets
    it (:mod:`leakbudget.planner.likelihood_cap`).
    """
    check_options(options)
    check_names(project, options)
    if options.max_trip_likelihood is not None or project.settings["Max trip likelihood"] is not None:
        return plan_within_cap(project, options, progress)
    return plan_once(project, options, progress)
