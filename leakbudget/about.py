"""What the tool is: its name, its version (the one source of it) and the caution every output carries."""

__version__ = "0.1.0"

TOOL = f"leakbudget {__version__}"

CAUTION = (
    "leakbudget is a planning aid: it estimates standing leakage, it does not measure it. Measure with a "
    "leakage clamp, follow the local code in force and licensed practice, test every GFCI/RCD with its test "
    "button and an instrument after installation, and never remove or up-rate protection to cure nuisance trips."
)
