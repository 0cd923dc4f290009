"""The OpenDocument spreadsheet (.ods) package layer, with no domain knowledge: guard the read, write result tables.

:mod:`~leakbudget.ods.guard` refuses what is not an .ods spreadsheet or would exhaust the machine (zip bombs,
unsafe entry names, DTDs, far cells) before python-calamine sees it, with :mod:`~leakbudget.ods.scan` counting
what calamine would build from ``content.xml``; :mod:`~leakbudget.ods.package` writes result tables into
``content.xml`` (:mod:`~leakbudget.ods.tables` makes them, :mod:`~leakbudget.ods.content` finds where they go),
keeping every user table and every other entry byte for byte, and replaces the file with
:mod:`leakbudget.xlsx.files`. It sits on the .xlsx layer and shares its limits. Design notes: ``docs/reading.md``.
"""
