"""The user's workbook: reading it into a validated :class:`leakbudget.model.Project`, and the blank template.

:mod:`~leakbudget.workbook.read` reads the sheets (python-calamine, behind the package guard of
:mod:`leakbudget.xlsx.guard`); :mod:`~leakbudget.workbook.readings` parses the Readings sheet;
:mod:`~leakbudget.workbook.template` writes a blank workbook with instructions and drop-down lists;
:mod:`~leakbudget.workbook.apply` says which cells of Loads and Circuits a split plan changes, in a new copy
(``split --apply``). Writing results back is :mod:`leakbudget.xlsx.package`'s job.
"""
