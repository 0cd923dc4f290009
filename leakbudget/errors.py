"""The one exception hierarchy of leakbudget.

Every message is one sentence a user can act on: it names the file, sheet, row and column where it can, the bad
value, and what to do. The command line turns any :class:`LeakbudgetError` into ``Error: …`` and exit code 2.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

# The problems of a workbook listed in one run; the rest are counted (a modelling choice: a screenful to work
# through, and a workbook with more is usually one mistake repeated, such as a unit in the wrong column).
PROBLEM_LIMIT = 50


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


class WorkbookProblems(WorkbookError):
    """Every problem found in one reading of a workbook, each a :class:`WorkbookError` with its own sentence.

    ``problems`` lists the first :data:`PROBLEM_LIMIT` found, in the workbook's order (sheet, row, column);
    ``unlisted`` counts the ones found beyond them. The text is the list, one sentence a line after a heading;
    with a single problem it is that problem's sentence, and the location attributes are that problem's.
    """

    def __init__(self, path: str | Path, problems: Sequence[WorkbookError], unlisted: int = 0) -> None:
        self.problems = list(problems)
        self.unlisted = unlisted
        only = self.problems[0] if len(self.problems) == 1 and not unlisted else None
        self.path = Path(path)
        self.sheet = only.sheet if only else None
        self.row = only.row if only else None
        self.column = only.column if only else None
        self.cell = only.cell if only else None
        self.detail = only.detail if only else f"{len(self.problems) + unlisted} problems"
        self.hint = only.hint if only else None
        LeakbudgetError.__init__(self, str(only) if only else self._listed())

    def _listed(self) -> str:
        total = len(self.problems) + self.unlisted
        name = self.path.name if self.path is not None else "the workbook"
        lines = [f"{name}: {total} problems; fix them all, then run again:"]
        lines += [f"- {problem}" for problem in self.problems]
        if self.unlisted:
            lines.append(f"- and {self.unlisted} more (the first {len(self.problems)} are listed).")
        return "\n".join(lines)


class CatalogueError(LeakbudgetError):
    """The appliance or cable catalogue is malformed (shipped or user rows)."""


class WriteBackError(LeakbudgetError):
    """The results could not be written safely (file open elsewhere, not writable, …); nothing was changed."""


class ReportError(LeakbudgetError):
    """The report could not be written where asked (bad output path or name); nothing was written."""
