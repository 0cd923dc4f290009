"""Validated access to one table of the user's input (a workbook sheet or a catalogue CSV).

A :class:`RawTable` keeps the header as the user typed it and each data row with its row number in the file, so
every problem can be reported as "file, sheet, row, column (cell): what is wrong; what to do".

Access is by row (``table.number(row, "Leakage", "mA")``), but the work is done by column: the first access to a
column cleans, and for numbers converts, the whole column at once, each distinct text once, and later accesses are
list lookups. A bad cell is remembered, not raised, until its row asks for it. A sheet of many rows is read a
column at a time (:meth:`RawTable.texts`, :meth:`~RawTable.numbers`, :meth:`~RawTable.flags`,
:meth:`~RawTable.choices`): the same values the row accessors answer, with :data:`BAD` where the row accessor would
find a problem; only such a cell is then read again through its row accessor, which records the problem. The reader puts such cells in the
grid itself too (:class:`Unreadable`: a formula without saved result, an error value) and merged ranges' values
(:class:`MergedValue`).

A table given :class:`Problems` collects instead of raising: an accessor that meets a bad cell records its
sentence and answers None, and ``with table.reading(row):`` records a problem the row's own checks raise and goes on
with the next row, so one run finds every bad cell of every sheet (:meth:`Problems.raise_if_any`).
"""

from __future__ import annotations

import csv
import io
import re
import unicodedata
from collections.abc import Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import date, datetime, time, timedelta
from importlib import resources
from operator import itemgetter
from pathlib import Path
from typing import TYPE_CHECKING, Any, Final, final

from leakbudget.errors import PROBLEM_LIMIT, CatalogueError, WorkbookError, WorkbookProblems
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


@final
class _Bad:
    """The type of :data:`BAD`."""

    __slots__ = ()

    def __repr__(self) -> str:
        return "BAD"


BAD: Final = _Bad()  # in a column read whole: this cell has a problem; read it with the row accessor to record it


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
    if row.count("") == len(row):  # the common blank row, counted in C (a stray far cell makes a million of them)
        return False
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


_CELL_REF = re.compile(r"([A-Z]+)([0-9]+)")


class Problems:
    """The problems of one reading of a workbook, collected instead of raised.

    The first problem of a cell counts; a later one on the same cell follows from it (a Leakage that could not be
    read is then also "blank") and is dropped. At most :data:`~leakbudget.errors.PROBLEM_LIMIT` are kept and the
    rest counted, so a sheet of a million bad cells costs a count, not a million sentences.
    """

    def __init__(self, path: Path, limit: int = PROBLEM_LIMIT) -> None:
        self.path = path
        self.limit = limit
        self.kept: list[WorkbookError] = []
        self.count = 0
        self._cells: set[tuple[str | None, int | None, str | None]] = set()
        self._rows: set[tuple[str | None, int]] = set()

    def __bool__(self) -> bool:
        return self.count > 0

    def add(self, problem: WorkbookError) -> None:
        """Record ``problem`` (each problem of a :class:`~leakbudget.errors.WorkbookProblems`)."""
        if isinstance(problem, WorkbookProblems):
            for each in problem.problems:
                self.add(each)
            self.count += problem.unlisted
            return
        key = (problem.sheet, problem.row, problem.column if problem.row is not None else problem.detail)
        if key in self._cells:
            return
        self._cells.add(key)
        if problem.row is not None:
            self._rows.add((problem.sheet, problem.row))
        self.count += 1
        if len(self.kept) < self.limit:
            self.kept.append(problem)

    def failed(self, sheet: str, row: int, column: str | None = None) -> bool:
        """True when a problem was recorded on ``row`` of ``sheet`` (in ``column``, as the user typed its name)."""
        if column is not None:
            return (sheet, row, column) in self._cells
        return (sheet, row) in self._rows

    def raise_if_any(self, sheet_order: Sequence[str] = ()) -> None:
        """Raise :class:`~leakbudget.errors.WorkbookProblems` with every problem recorded, in the workbook's
        order (``sheet_order``: the sheets as the workbook lists them; then row, then column)."""
        if not self.count:
            return
        order = {name: i for i, name in enumerate(sheet_order)}

        def place(problem: WorkbookError) -> tuple[int, int, int]:
            sheet = -1 if problem.sheet is None else order.get(problem.sheet, len(order))
            match = _CELL_REF.fullmatch(problem.cell or "")
            column = -1
            if match is not None:
                column = 0
                for letter in match.group(1):
                    column = column * 26 + ord(letter) - 64
            return (sheet, problem.row or 0, column)

        listed = sorted(self.kept, key=place)
        raise WorkbookProblems(self.path, listed, self.count - len(listed))


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
    problems: Problems | None = None  # when given, bad cells are recorded here and read as None
    _place: dict[int, int] = field(default_factory=dict, init=False, repr=False)  # row number -> index
    # Whole columns, computed on first access and indexed by row number: column as asked -> cell values, …
    _values: dict[str, list[Any]] = field(default_factory=dict, repr=False)
    _texts: dict[str, list[str | Unreadable | None]] = field(default_factory=dict, repr=False)
    _numbers: dict[tuple[str, str, str | None], list[float | Unreadable | None]] = field(
        default_factory=dict, repr=False
    )
    _whole: dict[tuple[Any, ...], list[Any]] = field(default_factory=dict, repr=False)  # texts(), numbers(), …
    _cells: list[list[Any]] | None = field(default=None, init=False, repr=False)  # the rows' cells, in order
    _width: int = field(default=0, init=False, repr=False)  # the shortest row's number of cells

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

    def only(self, rows: list[Row]) -> RawTable:
        """The same sheet with only ``rows`` (recording into the same :class:`Problems`)."""
        return RawTable(
            self.path,
            self.sheet,
            self.header_row,
            self.columns,
            self.typed_names,
            rows,
            renamed=self.renamed,
            problems=self.problems,
        )

    def __post_init__(self) -> None:
        self._place = {number: k for k, (number, _) in enumerate(self.rows)}  # column lists hold the kept rows

    @contextmanager
    def reading(self, row: Row) -> Iterator[None]:
        """Read one row: a problem the row raises is recorded (when collecting) and reading goes on after the
        ``with`` block."""
        try:
            yield
        except WorkbookError as exc:
            self.record(exc)

    def record(self, problem: WorkbookError) -> None:
        """Record a problem a row's own checks raised, or raise it again when not collecting."""
        if self.problems is None:
            raise problem
        self.problems.add(problem)

    def failed(self, row: Row, *columns: str) -> bool:
        """True when a problem was recorded on ``row`` (in one of ``columns``, when given); never when not
        collecting (the first problem was raised)."""
        if self.problems is None:
            return False
        if not columns:
            return self.problems.failed(self.sheet, row[0])
        return any(self.problems.failed(self.sheet, row[0], self.typed_names.get(normalise(c), c)) for c in columns)

    def refuse(self, row: Row | int, column: str | None, message: str, hint: str | None = None) -> None:
        """Raise the problem, or record it when collecting (the accessor then answers None)."""
        problem = self.error(row, column, message, hint=hint)
        if self.problems is None:
            raise problem
        self.problems.add(problem)

    def has(self, column: str) -> bool:
        return normalise(column) in self.columns

    def raw(self, row: Row, column: str) -> Any:
        """The cell's value (a merged range's, on each row it covers), or None when the column is absent or the
        cell blank. Refuses an :class:`Unreadable` cell (see :meth:`refuse`)."""
        value = self._value_column(column)[self._place[row[0]]]
        if type(value) is MergedValue:
            value = _plain(value.value)
        if type(value) is Unreadable:
            self.refuse(row, column, value.message, hint=value.hint)
            return None
        return value

    def _value_column(self, column: str) -> list[Any]:
        values = self._values.get(column)
        if values is None:
            values = self._values[column] = self._column_values(column)
        return values

    def _grid(self) -> list[list[Any]]:
        if self._cells is None:
            self._cells = [cells for _, cells in self.rows]
            self._width = min(map(len, self._cells), default=0)
        return self._cells

    def _column_values(self, column: str) -> list[Any]:
        """Every row's cell of ``column``, indexed by row number, blanks (see :func:`is_blank`) as None."""
        j = self.columns.get(normalise(column))
        if j is None:
            return [None] * len(self.rows)  # one per kept row: a far stray cell costs nothing here
        grid = self._grid()
        if j < self._width:  # every row has the cell: one C-level pass
            cells_j: Iterable[Any] = map(itemgetter(j), grid)
        else:
            cells_j = (cells[j] if j < len(cells) else "" for cells in grid)
        # _plain, inlined for the common plain text and number (a million cells at building scale)
        return [
            (v if v.strip() else None)
            if (kind := type(v)) is str
            else (v if v == v else NAN)
            if kind is float
            else _plain(v)
            for v in cells_j
        ]

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
        text = self._text_column(column)[self._place[row[0]]]
        if type(text) is Unreadable:
            self.refuse(row, column, text.message, hint=text.hint)
            return None
        return text

    def _text_column(self, column: str) -> list[str | Unreadable | None]:
        texts = self._texts.get(column)
        if texts is None:
            nfc = unicodedata.normalize
            texts = self._texts[column] = [
                None if v is None else nfc("NFC", v.strip()) if type(v) is str else _as_text(v)
                for v in self._value_column(column)
            ]
        return texts

    def texts(self, column: str) -> list[Any]:
        """Every row's :meth:`text` of ``column``, in row order; :data:`BAD` where :meth:`text` finds a problem."""
        key = ("text", column)
        got: list[Any] | None = self._whole.get(key)
        if got is None:
            texts: list[Any] = self._text_column(column)
            if Unreadable in set(map(type, texts)):
                got = [BAD if type(t) is Unreadable else t for t in texts]
            else:
                got = texts  # the same list: no cell is unreadable
            self._whole[key] = got
        return got

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
        """The cell as a float in ``target_unit`` (bare numbers in ``default_unit``), or None when blank (or bad,
        when collecting problems).

        With ``plausible`` (a range in ``target_unit``), a value outside it is refused with the range's hint."""
        k = self._place[row[0]]
        checked = self.numbers(
            column, default_unit, target_unit, positive=positive, non_negative=non_negative, plausible=plausible
        )[k]
        if checked is not BAD:
            return checked
        result = self._number_column(column, default_unit, target_unit)[k]
        problem: tuple[str, str | None]
        if type(result) is Unreadable:
            problem = (result.message, result.hint)
        elif positive and result <= 0:  # type: ignore[operator]
            problem = (f"'{self.text(row, column)}' must be greater than zero", None)
        elif non_negative and result < 0:  # type: ignore[operator]
            problem = (f"'{self.text(row, column)}' must not be negative", None)
        else:
            assert plausible is not None and result is not None
            why = plausible.problem(result)
            problem = (f"'{self.text(row, column)}' is {result:g} {plausible.unit}, {why}", plausible.hint)
        self.refuse(row, column, problem[0], hint=problem[1])
        return None

    def numbers(
        self,
        column: str,
        default_unit: str,
        target_unit: str | None = None,
        *,
        positive: bool = False,
        non_negative: bool = True,
        plausible: Plausible | None = None,
    ) -> list[Any]:
        """Every row's :meth:`number` of ``column`` (same arguments), in row order; :data:`BAD` where
        :meth:`number` finds a problem."""
        key = ("number", column, default_unit, target_unit, positive, non_negative, plausible)
        got: list[Any] | None = self._whole.get(key)
        if got is None:

            def good(value: float) -> bool:
                return (
                    (not positive or value > 0)
                    and (not non_negative or value >= 0)
                    and (plausible is None or plausible.holds(value))
                )

            got = self._whole[key] = [
                v if v is None or (type(v) is not Unreadable and good(v)) else BAD
                for v in self._number_column(column, default_unit, target_unit)
            ]
        return got

    def _number_column(
        self, column: str, default_unit: str, target_unit: str | None
    ) -> list[float | Unreadable | None]:
        key = (column, default_unit, target_unit)
        numbers = self._numbers.get(key)
        if numbers is None:
            numbers = self._numbers[key] = self._column_numbers(column, default_unit, target_unit)
        return numbers

    def _column_numbers(
        self, column: str, default_unit: str, target_unit: str | None
    ) -> list[float | Unreadable | None]:
        """Every row's cell of ``column`` converted (each distinct text or number once), problems kept as such."""
        values = self._value_column(column)
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
        value = self.flags(column)[self._place[row[0]]]
        if value is not BAD:
            return value
        text = self.text(row, column)  # an unreadable cell is refused here
        if text is not None:
            self.refuse(row, column, f"'{text}' is not yes or no", hint="type yes or no")
        return None

    def flags(self, column: str) -> list[Any]:
        """Every row's :meth:`flag` of ``column``, in row order; :data:`BAD` where :meth:`flag` finds a problem."""
        key = ("flag", column)
        got: list[Any] | None = self._whole.get(key)
        if got is None:
            texts = self._text_column(column)
            words: dict[Any, Any] = {t: _yes_no(t) for t in set(texts) if type(t) is str}
            got = self._whole[key] = [None if t is None else words.get(t, BAD) for t in texts]
        return got

    def choice(self, row: Row, column: str, allowed: tuple[str, ...], default: str | None = None) -> str | None:
        """The cell as one of ``allowed`` (case-insensitive), or ``default`` when blank (None when it is none of them,
        when collecting problems)."""
        value = self.choices(column, allowed, default)[self._place[row[0]]]
        if value is not BAD:
            return value
        text = self.text(row, column)  # an unreadable cell is refused here
        if text is None:
            return default
        self.refuse(
            row, column, f"'{text}' is not one of {', '.join(allowed)}", hint=f"use one of {', '.join(allowed)}"
        )
        return None

    def choices(self, column: str, allowed: tuple[str, ...], default: str | None = None) -> list[Any]:
        """Every row's :meth:`choice` of ``column`` (same arguments), in row order; :data:`BAD` where
        :meth:`choice` finds a problem."""
        key = ("choice", column, allowed, default)
        got: list[Any] | None = self._whole.get(key)
        if got is None:
            texts = self._text_column(column)
            words: dict[Any, Any] = {t: _chosen(t, allowed) for t in set(texts) if type(t) is str}
            got = self._whole[key] = [default if t is None else words.get(t, BAD) for t in texts]
        return got


def _yes_no(text: str) -> bool | _Bad:
    low = text.lower()
    if low in YES:
        return True
    if low in NO:
        return False
    return BAD


def _chosen(text: str, allowed: tuple[str, ...]) -> str | _Bad:
    low = text.lower().replace("_", "-")
    for a in allowed:
        if low == a.lower():
            return a
    return BAD


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
    plain = default_unit == "dimensionless"
    if isinstance(value, _DATES):
        return Unreadable(
            f"'{value}' is a date or time, not a quantity",
            "format the cell as a number and type " + ("a plain number" if plain else f"the value in {default_unit}"),
        )
    try:
        return to_unit(value, default_unit, target_unit)
    except UnitProblem as exc:
        hint = "type a plain number" if plain else f"type a number (taken in {default_unit}) or a number with a unit"
        return Unreadable(str(exc), exc.hint or hint)


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
