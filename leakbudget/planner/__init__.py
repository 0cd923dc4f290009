"""The split planner: the fewest changes that bring every protected circuit within budget and rating.

From a workbook's project it proposes where each load goes so that, on every protected circuit, the standing
leakage is within budget and the load current within rating × load factor, with loads only on circuits that
serve their room, loads marked Stays left alone and unplaced loads placed (the rules: :mod:`leakbudget.planner.rules`).
Objective, in order: fewest new circuits, fewest moved loads, most headroom on the tightest circuit.

How:
1. :mod:`leakbudget.planner.build` reports circuits no plan can fix and loads that fit nowhere, and splits the
   rest into independent room groups, each a :class:`~leakbudget.planner.packing.problem.Packing`.
2. Every group gets a fast plan (:mod:`leakbudget.planner.packing.heuristic`) and lower bounds
   (:mod:`leakbudget.planner.packing.bounds`; the LP relaxation for large groups); groups up to ``exact_max_items``
   movable loads the bounds do not settle are solved exactly (:mod:`leakbudget.planner.packing.milp`, HiGHS), then
   polished for headroom, all within the time limit.
3. The plan is applied to a copy of the project, checked by :func:`leakbudget.checking.check` and re-verified by
   :func:`leakbudget.planner.rules.verify_plan`, independently of the solver.

Leakage sum: the plan keeps the arithmetic sum (Σ of magnitudes, the conservative figure) within budget, whatever
the ``Sum`` setting; the phasor sum is never larger, so a plan valid on the arithmetic sum is valid on both. With
``Sum = phasor`` this is a conservative proxy: the planner may move a load that the phasor sum would allow.

"Optimal" means proven fewest new circuits and, with that, fewest moves; the headroom tie-break is reported
separately (``headroom_optimal``).

Modules: :mod:`~leakbudget.planner.split` (the entry point, :func:`plan_split`), :mod:`~leakbudget.planner.plan`
(one plan), :mod:`~leakbudget.planner.likelihood_cap` (planning again under a trip-likelihood cap),
:mod:`~leakbudget.planner.build` (the problem from a project), :mod:`~leakbudget.planner.rules` (what a plan may
do, and its independent verification) and :mod:`~leakbudget.planner.packing` (the numeric packing problem, with no
electrical knowledge).
"""
