"""The command line: typer commands (:mod:`leakbudget.cli.app`) over :mod:`leakbudget.api`."""

from leakbudget.cli.app import app, main, script

__all__ = ["app", "main", "script"]
