"""Validated access to one table of the user's input (a workbook sheet or a catalogue CSV).

A :class:`RawTable` keeps the header as the user typed it and each data row with its row number in the file, so
every problem can be reported as "file, sheet, row, column (cell): what is wrong; what to do".

Access is by row (``table.number(row, "Leakage", "mA")``), but the work is done by column: the first access to a
column cleans, and for numbers converts, the whole column at once, each distinct text once, and later accesses are
list lookups. A bad cell is remembered, not raised, until its row asks for it, so the first problem reported is the
same as cell-by-cell reading would find. The reader puts such cells in the grid itself too (:class:`Unreadable`:
a formula without saved result, an error value) and merged ranges' values (:class:`MergedValue`).
"""

from __future__ import annotations

import csv
import io
import unicodedata
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date, datetime, time, timedelta
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING, Any, final

from leakbudget.errors import CatalogueError, WorkbookError
from leakbudget.input.schema import Column, Sheet, normalise
from leakbudget.input.units import UnitProblem, to_unit
from leakbudget.xlsx.cells import column_letter

if TYPE_CHECKING:
    from leakbudget.input.ranges import Plausible

HEADER_SEARCH_ROWS = 20  # a header may sit below a title block; look this far down for it

YES = frozenset({"yes", "y", "true", "1", "x", "fixed"})
NO = frozenset({"no", "n", "false", "0", ""})
_DATES = (datetime, date, time, timedelta)

Row = tuple[int, list[Any]]  # (1-based row number in the file, cell values)


@final  # never subclassed: `type(x) is Unreadable` tells it apart from every other value
@dataclass(frozen=True)
class Unreadable:
    """A cell whose value cannot be used (not a valid quantity, a formula with no saved result, an error value,
    NaN): it counts as content, and reading it raises ``message`` + ``hint`` as a WorkbookError for its row."""

    message: str
    hint: str


@dataclass(frozen=True)
class MergedValue:
    """The value of a merged range, on one row it covers. A name or choice reads as the value (the user sees it
    on every row); a number is refused, since one figure over several rows may be meant for each or for all."""

    value: Any
    ref: str  # the merged range, e.g. "D2:D4"

    def refused(self) -> Unreadable:
        shown = int(self.value) if isinstance(self.value, float) and self.value.is_integer() else self.value
        return Unreadable(
            f"the cells {self.ref} are merged, so '{shown}' could be meant for each row or for all of them together",
            "unmerge the cells and type the value in each row it applies to",
        )


# Merged cells, as python-calamine reports them: ((first row, first column), (last row, last column)), 0-based.
MergedRange = tuple[tuple[int, int], tuple[int, int]]
NAN = Unreadable("the cell holds NaN, which is not a number", "type the value again, or clear the cell")


def is_blank(value: Any) -> bool:
    """True for an empty cell: None, "" or whitespace-only text (NaN is not blank: reading it is an error)."""
    if value is None or value == "":
        return True
    if type(value) is str:
        return not value.strip()
    return False


def _has_content(row: list[Any]) -> bool:
    return any(v is not None and v != "" and not is_blank(v) for v in row)


def _in_spec(spec: Sheet, name: str) -> bool:
    try:
        spec.column(name)
    except KeyError:
        return False
    return True


def _put(grid: list[list[Any]], i: int, j: int, value: Any) -> None:
    """Set grid[i][j], growing the grid with empty cells as needed."""
    while len(grid) <= i:
        grid.append([])
    row = grid[i]
    if len(row) <= j:
        row.extend([""] * (j + 1 - len(row)))
    row[j] = value


def _spread_merged(
    grid: list[list[Any]],
    merged: Sequence[MergedRange],
    header_index: int,
    contract: Mapping[int, Column],
    kept: set[int],
) -> None:
    """Put a merged range's value on every table row it covers, in the contract's columns, as a MergedValue.

    Only ranges that start below the header and span several rows count; a merge within one row, or one that
    starts in the header or above it, changes nothing (the value stays in its first cell).
    """
    for (r0, c0), (r1, _c1) in merged:
        if c0 not in contract or r0 <= header_index or r1 <= r0 or r0 >= len(grid):
            continue
        first = grid[r0][c0] if c0 < len(grid[r0]) else None
        if is_blank(first):
            continue
        cell = MergedValue(first, f"{column_letter(c0)}{r0 + 1}:{column_letter(c0)}{r1 + 1}")
        for i in range(r0, min(r1, len(grid) - 1) + 1):
            if i in kept:
                _put(grid, i, c0, cell)


@dataclass
class RawTable:
    """One sheet's header and data rows, with positions for error messages."""

    path: Path
    sheet: str
    header_row: int  # 1-based row number of the header in the file
    columns: dict[str, int]  # normalised column name -> 0-based column index
    typed_names: dict[str, str]  # normalised column name -> the name as the user typed it
    rows: list[Row] = field(default_factory=list)  # (1-based row number, cell values), in file order
    renamed: dict[str, str] = field(default_factory=dict)  # a former column name as typed -> the current name
    # Whole columns, computed on first access and indexed by row number: column as asked -> cell values, …
    _values: dict[str, list[Any]] = field(default_factory=dict, repr=False)
    _texts: dict[str, list[str | Unreadable | None]] = field(default_factory=dict, repr=False)
    _numbers: dict[tuple[str, str, str | None], list[float | Unreadable | None]] = field(
        default_factory=dict, repr=False
    )

    @classmethod
    def from_grid(
        cls,
        path: Path,
        sheet_name: str,
        grid: list[list[Any]],
        spec: Sheet,
        merged: Sequence[MergedRange] = (),
        unreadable: Mapping[tuple[int, int], Unreadable] | None = None,
    ) -> RawTable:
        """Find the header row (the first of the top rows that names the sheet's first required column) and
        keep the non-blank rows below it. Raises WorkbookError when no header is found or a required column is
        missing.

        ``unreadable`` cells (by 0-based row and column) are placed in the contract's columns below the header;
        ``merged`` ranges below the header are read as the user sees them (see :func:`_spread_merged`)."""
        key = normalise(next(c.name for c in spec.columns if c.required))
        header_index = None
        for i, row in enumerate(grid[:HEADER_SEARCH_ROWS]):
            if any(isinstance(v, str) and normalise(v) == key for v in row):
                header_index = i
                break
        if header_index is None:
            raise WorkbookError(
                f"no header row with a '{spec.columns[0].name}' column in the first {HEADER_SEARCH_ROWS} rows",
                path=path,
                sheet=sheet_name,
                hint=f"put the column names ({', '.join(c.name for c in spec.columns if c.required)}, …) in one row",
            )
        columns: dict[str, int] = {}
        typed: dict[str, str] = {}
        renamed: dict[str, str] = {}
        for j, value in enumerate(grid[header_index]):
            if isinstance(value, str) and value.strip():
                name = normalise(value)
                new = spec.renamed(name)
                if new is not None:
                    name = normalise(new.name)
                if name in columns and (new is not None or typed[name] in renamed):
                    old, current = (value.strip(), j) if new is not None else (typed[name], columns[name])
                    other = columns[name] if new is not None else j
                    raise WorkbookError(
                        f"the column '{old}' (column {column_letter(current)}) is the former name of "
                        f"'{spec.column(name).name}', which is there too (column {column_letter(other)})",
                        path=path,
                        sheet=sheet_name,
                        row=header_index + 1,
                        cell=f"{column_letter(current)}{header_index + 1}",
                        hint=f"keep one of them, named '{spec.column(name).name}'",
                    )
                if new is not None:
                    renamed[value.strip()] = new.name
                if name in columns:
                    raise WorkbookError(
                        f"the column '{value.strip()}' appears twice (also column {column_letter(columns[name])})",
                        path=path,
                        sheet=sheet_name,
                        row=header_index + 1,
                        cell=f"{column_letter(j)}{header_index + 1}",
                        hint="rename or delete one of them",
                    )
                columns[name] = j
                typed[name] = value.strip()
        for col in spec.columns:
            if col.required and normalise(col.name) not in columns:
                raise WorkbookError(
                    f"the required column '{col.name}' is missing",
                    path=path,
                    sheet=sheet_name,
                    row=header_index + 1,
                    hint=f"add a '{col.name}' column to the header row ({col.help})",
                )
        contract = {j: spec.column(name) for name, j in columns.items() if _in_spec(spec, name)}
        for (i, j), cell in (unreadable or {}).items():
            if i > header_index and j in contract:
                _put(grid, i, j, cell)
        kept = {i for i in range(header_index + 1, len(grid)) if _has_content(grid[i])}
        if merged:
            _spread_merged(grid, merged, header_index, contract, kept)
        rows = [(i + 1, grid[i]) for i in sorted(kept)]
        return cls(path, sheet_name, header_index + 1, columns, typed, rows, renamed=renamed)

    def has(self, column: str) -> bool:
        return normalise(column) in self.columns

    def raw(self, row: Row, column: str) -> Any:
        """The cell's value (a merged range's, on each row it covers), or None when the column is absent or the
        cell blank. Raises for an :class:`Unreadable` cell."""
        values = self._values.get(column)
        if values is None:
            values = self._values[column] = self._column_values(column)
        value = values[row[0]]
        if type(value) is MergedValue:
            value = _plain(value.value)
        if type(value) is Unreadable:
            raise self.error(row, column, value.message, hint=value.hint)
        return value

    def _column_values(self, column: str) -> list[Any]:
        """Every row's cell of ``column``, indexed by row number, blanks (see :func:`is_blank`) as None."""
        values: list[Any] = [None] * (self.rows[-1][0] + 1 if self.rows else 0)
        j = self.columns.get(normalise(column))
        if j is None:
            return values
        for number, cells in self.rows:
            if j < len(cells):
                values[number] = _plain(cells[j])
        return values

    def error(self, row: Row | int, column: str | None, message: str, hint: str | None = None) -> WorkbookError:
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
            texts = self._texts[column] = [_as_text(value) for value in values]
        text = texts[row[0]]
        if type(text) is Unreadable:
            raise self.error(row, column, text.message, hint=text.hint)
        return text

    def number(
        self,
        row: Row,
        column: str,
        default_unit: str,
        target_unit: str | None = None,
        *,
        positive: bool = False,
        non_negative: bool = True,
        plausible: Plausible | None = None,
    ) -> float | None:
        """The cell as a float in ``target_unit`` (bare numbers in ``default_unit``), or None when blank.

        With ``plausible`` (a range in ``target_unit``), a value outside it is refused with the range's hint."""
        key = (column, default_unit, target_unit)
        numbers = self._numbers.get(key)
        if numbers is None:
            numbers = self._numbers[key] = self._column_numbers(column, default_unit, target_unit)
        result = numbers[row[0]]
        if result is None:
            return None
        if type(result) is Unreadable:
            raise self.error(row, column, result.message, hint=result.hint)
        if positive and result <= 0:
            raise self.error(row, column, f"'{self.text(row, column)}' must be greater than zero")
        if non_negative and result < 0:
            raise self.error(row, column, f"'{self.text(row, column)}' must not be negative")
        if plausible is not None and (problem := plausible.problem(result)) is not None:
            raise self.error(
                row,
                column,
                f"'{self.text(row, column)}' is {result:g} {plausible.unit}, {problem}",
                hint=plausible.hint,
            )
        return result

    def _column_numbers(
        self, column: str, default_unit: str, target_unit: str | None
    ) -> list[float | Unreadable | None]:
        """Every row's cell of ``column`` converted (each distinct text or number once), problems kept as such."""
        values = self._values.get(column)
        if values is None:
            values = self._values[column] = self._column_values(column)
        converted: dict[Any, float | Unreadable] = {}  # str and float keys only (True == 1 must not share an entry)
        out: list[float | Unreadable | None] = []
        for value in values:
            kind = type(value)
            if value is None:
                out.append(None)
            elif kind is Unreadable:
                out.append(value)
            elif kind is MergedValue:
                out.append(value.refused())
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

    def choice(self, row: Row, column: str, allowed: tuple[str, ...], default: str | None = None) -> str | None:
        """The cell as one of ``allowed`` (case-insensitive), or ``default`` when blank."""
        text = self.text(row, column)
        if text is None:
            return default
        low = text.lower().replace("_", "-")
        for a in allowed:
            if low == a.lower():
                return a
        raise self.error(
            row, column, f"'{text}' is not one of {', '.join(allowed)}", hint=f"use one of {', '.join(allowed)}"
        )


def _plain(value: Any) -> Any:
    """A grid cell as a column keeps it: None for a blank cell, :data:`NAN` for NaN, else the value."""
    if value is None or value == "":
        return None
    kind = type(value)
    if kind is str:
        return value if value.strip() else None
    if kind is float and value != value:  # NaN is the only value unequal to itself
        return NAN
    return value


def _as_text(value: Any) -> str | Unreadable | None:
    """A cell as text: stripped, in Unicode normal form C (one form for an "é" typed or pasted); numbers as
    written (12.0 -> '12'); a merged value's text; an Unreadable cell stays as it is."""
    kind = type(value)
    if value is None or kind is Unreadable:
        return value
    if kind is MergedValue:
        return _as_text(_plain(value.value))
    if kind is str:
        return unicodedata.normalize("NFC", value.strip())
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    if isinstance(value, _DATES):
        return str(value)
    return unicodedata.normalize("NFC", str(value).strip())


def _quantity(value: Any, default_unit: str, target_unit: str | None) -> float | Unreadable:
    """One non-blank cell as a float in ``target_unit``, or the problem with it."""
    if isinstance(value, _DATES):
        return Unreadable(
            f"'{value}' is a date or time, not a quantity",
            f"format the cell as a number and type the value in {default_unit}",
        )
    try:
        return to_unit(value, default_unit, target_unit)
    except UnitProblem as exc:
        return Unreadable(str(exc), f"type a number (taken in {default_unit}) or a number with a unit")


def _data_file(name: str) -> tuple[Path, str]:
    """The path and text of a shipped catalogue file (inside the wheel, or the source tree)."""
    try:
        ref = resources.files("leakbudget.appliance_data").joinpath(name)
        return Path(str(ref)), ref.read_text(encoding="utf-8")
    except (ModuleNotFoundError, FileNotFoundError):
        path = Path(__file__).resolve().parents[2] / "appliance_data" / name
        return path, path.read_text(encoding="utf-8")


def shipped_table(name: str, spec: Sheet) -> RawTable:
    """A CSV table shipped with the package (``appliance_data/NAME``), read and validated against ``spec``;
    a broken shipped file is a packaging fault, raised as :class:`CatalogueError`."""
    path, text = _data_file(name)
    grid: list[list[object]] = [list(r) for r in csv.reader(io.StringIO(text))]
    try:
        return RawTable.from_grid(path, name, grid, spec)
    except WorkbookError as exc:
        raise CatalogueError(str(exc)) from None
