"""The hand-over report: a document of facts, tables, charts and text, laid out as HTML and as A4 PDF.

:mod:`~leakbudget.reporting.document` is the format-free model; :mod:`~leakbudget.reporting.content` fills it from
the check, review and split documents (so every number equals ``--json`` to the digit);
:mod:`~leakbudget.reporting.html` and :mod:`~leakbudget.reporting.pdf` lay it out;
:mod:`~leakbudget.reporting.charts` draws the charts; :mod:`~leakbudget.reporting.write` writes the files. Design
notes: ``docs/report.md``.
"""
