"""leakbudget: standing earth-leakage budgets for GFCI/RCD-protected circuits.

A planning aid, not a substitute for measurement, the local wiring code and licensed practice.
The library never imports typer or rich; the command line lives in :mod:`leakbudget.cli`.
"""

__version__ = "0.1.0"

CAUTION = (
    "leakbudget is a planning aid: it estimates standing leakage, it does not measure it. Measure with a "
    "leakage clamp, follow the local code in force and licensed practice, test every GFCI/RCD with its test "
    "button and an instrument after installation, and never remove or up-rate protection to cure nuisance trips."
)
