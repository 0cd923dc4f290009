from leakbudget.cli import script

script()
