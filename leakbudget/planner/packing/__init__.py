"""The split planner's numeric core: a two-resource bin-packing problem with eligibility, and nothing electrical.

:mod:`~leakbudget.planner.packing.problem` defines the problem and a solution; :mod:`~leakbudget.planner.packing.bounds`
gives lower bounds (L1, Martello–Toth L2); :mod:`~leakbudget.planner.packing.heuristic` a fast plan;
:mod:`~leakbudget.planner.packing.milp` the exact model solved by HiGHS (scipy), imported only when needed.
"""
