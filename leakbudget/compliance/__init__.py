"""The compliance review: does each circuit have the protection the wiring code in force requires, and is it the
right kind?

:mod:`~leakbudget.compliance.codes` holds each code's requirements as data (NEC 2020 and 2023, IEC 60364,
BS 7671), every requirement with its source, edition and clause ("from memory" where not confirmed);
:mod:`~leakbudget.compliance.rules` applies them to a check result and returns findings (error, warning, info),
each with its source. The code in force, as adopted locally, always decides. Design notes: ``docs/review.md``.
"""
