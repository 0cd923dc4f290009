"""leakbudget: standing earth-leakage budgets for GFCI/RCD-protected circuits.

A planning aid, not a substitute for measurement, the local wiring code and licensed practice.
The library never imports typer or rich; the command line lives in :mod:`leakbudget.cli`.
"""

from leakbudget.about import CAUTION, __version__

__all__ = ["CAUTION", "__version__"]
