"""The .xlsx package layer, with no domain knowledge: guard the read, graft result sheets in, replace the file.

:mod:`~leakbudget.xlsx.guard` refuses what is not a workbook or would exhaust the machine (zip bombs, DTDs, far
cells) before the reader sees it; :mod:`~leakbudget.xlsx.package` writes result sheets as new parts of the user's
package, keeping every other part byte for byte, and :mod:`~leakbudget.xlsx.edit` changes given cells of existing
sheets by byte splices (:mod:`~leakbudget.xlsx.rows`, :mod:`~leakbudget.xlsx.xml_text`,
:mod:`~leakbudget.xlsx.styles`, :mod:`~leakbudget.xlsx.cells`); :mod:`~leakbudget.xlsx.files` replaces the file
atomically with a backup. Design notes: ``docs/reading.md`` and ``docs/speed.md``.
"""
