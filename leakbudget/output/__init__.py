"""Every naming of fields at the edges: the documents ``--json`` prints and the rows of the result sheets.

:mod:`~leakbudget.output.check`, :mod:`~leakbudget.output.split` and :mod:`~leakbudget.output.review` each turn one
command's result into one record per circuit, load or finding; the JSON document, the result sheet, the Python
API's DataFrames and the report all read those records, so they always agree. :mod:`~leakbudget.output.palette`
holds the colours every chart uses.
"""
