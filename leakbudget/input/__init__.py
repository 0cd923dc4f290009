"""What a workbook may hold, and reading typed values from it.

:mod:`~leakbudget.input.schema` is the workbook contract (sheets, columns, default units, help texts; the reader,
the template and the README test all use it); :mod:`~leakbudget.input.table` gives validated access to one sheet
whose every problem names file, sheet, row, column and cell; :mod:`~leakbudget.input.units` reads quantities as
people type them; :mod:`~leakbudget.input.ranges` holds the plausible range of each kind of value, with its
source. No electrical knowledge beyond units and ranges.
"""
