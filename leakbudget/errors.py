"""The one exception hierarchy of leakbudget.

Every message is one sentence a user can act on: it names the file, sheet, row and column where it can, the bad
value, and what to do. The command line turns any :class:`LeakbudgetError` into ``Error: …`` and exit code 2.
"""

from __future__ import annotations

from pathlib import Path


class LeakbudgetError(Exception):
    """Base of every error meant for the user (never a bug)."""


class WorkbookError(LeakbudgetError):
    """Something in the user's workbook is missing, malformed or inconsistent."""

    def __init__(
        self,
        message: str,
        *,
        path: str | Path | None = None,
        sheet: str | None = None,
        row: int | None = None,
        column: str | None = None,
        cell: str | None = None,
        hint: str | None = None,
    ) -> None:
        self.path = Path(path) if path is not None else None
        self.sheet = sheet
        self.row = row
        self.column = column
        self.cell = cell
        self.detail = message
        self.hint = hint
        super().__init__(self._compose())

    def _compose(self) -> str:
        where: list[str] = []
        if self.path is not None:
            where.append(self.path.name)
        if self.sheet is not None:
            where.append(f"sheet '{self.sheet}'")
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column is not None:
            where.append(f"column '{self.column}'")
        if self.cell is not None:
            where.append(f"cell {self.cell}")
        text = self.detail.rstrip(".")
        if where:
            text = ", ".join(where) + ": " + text
        if self.hint:
            text += "; " + self.hint.rstrip(".")
        return text + "."


class CatalogueError(LeakbudgetError):
    """The appliance or cable catalogue is malformed (shipped or user rows)."""


class WriteBackError(LeakbudgetError):
    """The results could not be written safely (file open elsewhere, not writable, …); nothing was changed."""


class ReportError(LeakbudgetError):
    """The report could not be written where asked (bad output path or name); nothing was written."""
