"""Validated access to one table of the user's input (a workbook sheet or a catalogue CSV).

A :class:`RawTable` keeps the header as the user typed it and each data row with its row number in the file, so
every problem can be reported as "file, sheet, row, column (cell): what is wrong; what to do".

Access is by row (``table.number(row, "Leakage", "mA")``), but the work is done by column: the first access to a
column cleans, and for numbers converts, the whole column at once, each distinct text once, and later accesses are
list lookups. A bad cell is remembered, not raised, until its row asks for it, so the first problem reported is the
same as cell-by-cell reading would find.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import date, datetime, time, timedelta
from pathlib import Path
from typing import Any

from leakbudget.errors import WorkbookError
from leakbudget.schema import Sheet, normalise
from leakbudget.units import UnitProblem, to_unit

HEADER_SEARCH_ROWS = 20  # a header may sit below a title block; look this far down for it

YES = frozenset({"yes", "y", "true", "1", "x", "fixed"})
NO = frozenset({"no", "n", "false", "0", ""})
_DATES = (datetime, date, time, timedelta)

Row = tuple[int, list[Any]]  # (1-based row number in the file, cell values)


@dataclass(frozen=True)
class _Problem:
    """A cell that is not a valid quantity: raised as a WorkbookError when its row reads it."""

    message: str
    hint: str


def column_letter(index: int) -> str:
    """Spreadsheet column letter for a 0-based column index (0 → A, 27 → AB)."""
    letters = ""
    n = index + 1
    while n:
        n, rem = divmod(n - 1, 26)
        letters = chr(65 + rem) + letters
    return letters


def is_blank(value: Any) -> bool:
    """True for an empty cell: None, "", whitespace-only text, or NaN."""
    if value is None or value == "":
        return True
    kind = type(value)
    if kind is str:
        return not value.strip()
    if kind is float:
        return math.isnan(value)
    return False


def _has_content(row: list[Any]) -> bool:
    return any(v is not None and v != "" and not is_blank(v) for v in row)


@dataclass
class RawTable:
    """One sheet's header and data rows, with positions for error messages."""

    path: Path
    sheet: str
    header_row: int  # 1-based row number of the header in the file
    columns: dict[str, int]  # normalised column name -> 0-based column index
    typed_names: dict[str, str]  # normalised column name -> the name as the user typed it
    rows: list[Row] = field(default_factory=list)  # (1-based row number, cell values), in file order
    # Whole columns, computed on first access and indexed by row number: column as asked -> cell values, …
    _values: dict[str, list[Any]] = field(default_factory=dict, repr=False)
    _texts: dict[str, list[str | None]] = field(default_factory=dict, repr=False)
    _numbers: dict[tuple[str, str, str | None], list[float | _Problem | None]] = field(default_factory=dict,
                                                                                        repr=False)

    @classmethod
    def from_grid(cls, path: Path, sheet_name: str, grid: list[list[Any]], spec: Sheet) -> "RawTable":
        """Find the header row (the first of the top rows that names the sheet's first required column) and
        keep the non-blank rows below it. Raises WorkbookError when no header is found or a required column is
        missing."""
        key = normalise(next(c.name for c in spec.columns if c.required))
        header_index = None
        for i, row in enumerate(grid[:HEADER_SEARCH_ROWS]):
            if any(isinstance(v, str) and normalise(v) == key for v in row):
                header_index = i
                break
        if header_index is None:
            raise WorkbookError(
                f"no header row with a '{spec.columns[0].name}' column in the first {HEADER_SEARCH_ROWS} rows",
                path=path, sheet=sheet_name,
                hint=f"put the column names ({', '.join(c.name for c in spec.columns if c.required)}, …) in one row",
            )
        columns: dict[str, int] = {}
        typed: dict[str, str] = {}
        for j, value in enumerate(grid[header_index]):
            if isinstance(value, str) and value.strip():
                name = normalise(value)
                if name in columns:
                    raise WorkbookError(
                        f"the column '{value.strip()}' appears twice (also column {column_letter(columns[name])})",
                        path=path, sheet=sheet_name, row=header_index + 1, cell=f"{column_letter(j)}{header_index + 1}",
                        hint="rename or delete one of them",
                    )
                columns[name] = j
                typed[name] = value.strip()
        for col in spec.columns:
            if col.required and normalise(col.name) not in columns:
                raise WorkbookError(
                    f"the required column '{col.name}' is missing", path=path, sheet=sheet_name,
                    row=header_index + 1, hint=f"add a '{col.name}' column to the header row ({col.help})",
                )
        rows = [(header_index + 2 + k, row) for k, row in enumerate(grid[header_index + 1:]) if _has_content(row)]
        return cls(path, sheet_name, header_index + 1, columns, typed, rows)

    def has(self, column: str) -> bool:
        return normalise(column) in self.columns

    def raw(self, row: Row, column: str) -> Any:
        """The cell's value, or None when the column is absent or the cell blank."""
        values = self._values.get(column)
        if values is None:
            values = self._values[column] = self._column_values(column)
        return values[row[0]]

    def _column_values(self, column: str) -> list[Any]:
        """Every row's cell of ``column``, indexed by row number, blanks (see :func:`is_blank`) as None."""
        values: list[Any] = [None] * (self.rows[-1][0] + 1 if self.rows else 0)
        j = self.columns.get(normalise(column))
        if j is None:
            return values
        for number, cells in self.rows:
            if j < len(cells):
                value = cells[j]
                if not (value is None or value == "" or value != value  # NaN is the only value unequal to itself
                        or (type(value) is str and not value.strip())):
                    values[number] = value
        return values

    def error(self, row: Row | int, column: str | None, message: str, hint: str | None = None
              ) -> WorkbookError:
        number = row if isinstance(row, int) else row[0]
        cell = None
        name = None
        if column is not None:
            key = normalise(column)
            name = self.typed_names.get(key, column)
            if key in self.columns:
                cell = f"{column_letter(self.columns[key])}{number}"
        return WorkbookError(message, path=self.path, sheet=self.sheet, row=number, column=name, cell=cell, hint=hint)

    def text(self, row: Row, column: str) -> str | None:
        """The cell as stripped text (numbers as written, 12.0 → '12'), or None when blank."""
        texts = self._texts.get(column)
        if texts is None:
            values = self._values.get(column)
            if values is None:
                values = self._values[column] = self._column_values(column)
            texts = self._texts[column] = [
                None if value is None else value.strip() if type(value) is str else _as_text(value)
                for value in values
            ]
        return texts[row[0]]

    def number(self, row: Row, column: str, default_unit: str, target_unit: str | None = None,
               *, positive: bool = False, non_negative: bool = True) -> float | None:
        """The cell as a float in ``target_unit`` (bare numbers in ``default_unit``), or None when blank."""
        key = (column, default_unit, target_unit)
        numbers = self._numbers.get(key)
        if numbers is None:
            numbers = self._numbers[key] = self._column_numbers(column, default_unit, target_unit)
        result = numbers[row[0]]
        if result is None:
            return None
        if type(result) is _Problem:
            raise self.error(row, column, result.message, hint=result.hint)
        if positive and result <= 0:
            raise self.error(row, column, f"'{self.text(row, column)}' must be greater than zero")
        if non_negative and result < 0:
            raise self.error(row, column, f"'{self.text(row, column)}' must not be negative")
        return result

    def _column_numbers(self, column: str, default_unit: str, target_unit: str | None
                        ) -> list[float | _Problem | None]:
        """Every row's cell of ``column`` converted (each distinct text or number once), problems kept as such."""
        values = self._values.get(column)
        if values is None:
            values = self._values[column] = self._column_values(column)
        converted: dict[Any, float | _Problem] = {}  # str and float keys only (True == 1 must not share an entry)
        out: list[float | _Problem | None] = []
        for value in values:
            kind = type(value)
            if value is None:
                out.append(None)
            elif (kind is str or kind is float) and value in converted:
                out.append(converted[value])
            else:
                result = _quantity(value, default_unit, target_unit)
                if kind is str or kind is float:
                    converted[value] = result
                out.append(result)
        return out

    def flag(self, row: Row, column: str) -> bool | None:
        """The cell as yes/no (yes, y, true, 1, x / no, n, false, 0), or None when blank."""
        value = self.raw(row, column)
        if value is None:
            return None
        text = self.text(row, column)
        low = (text or "").lower()
        if low in YES:
            return True
        if low in NO:
            return False
        raise self.error(row, column, f"'{text}' is not yes or no", hint="type yes or no")

    def choice(self, row: Row, column: str, allowed: tuple[str, ...], default: str | None = None
               ) -> str | None:
        """The cell as one of ``allowed`` (case-insensitive), or ``default`` when blank."""
        text = self.text(row, column)
        if text is None:
            return default
        low = text.lower().replace("_", "-")
        for a in allowed:
            if low == a.lower():
                return a
        raise self.error(row, column, f"'{text}' is not one of {', '.join(allowed)}",
                         hint=f"use one of {', '.join(allowed)}")


def _as_text(value: Any) -> str:
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    if isinstance(value, _DATES):
        return str(value)
    return str(value).strip()


def _quantity(value: Any, default_unit: str, target_unit: str | None) -> float | _Problem:
    """One non-blank cell as a float in ``target_unit``, or the problem with it."""
    if isinstance(value, _DATES):
        return _Problem(f"'{value}' is a date or time, not a quantity",
                        f"format the cell as a number and type the value in {default_unit}")
    try:
        return to_unit(value, default_unit, target_unit)
    except UnitProblem as exc:
        return _Problem(str(exc), f"type a number (taken in {default_unit}) or a number with a unit")
