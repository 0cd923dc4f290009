"""A planned copy of the user's workbook: planned changes written as cells of its Loads and Circuits sheets.

Plain data comes in (:class:`PlannedChanges`: which Loads row goes on which circuit, the new circuits, the circuits
that hang under another shared device or get a device of their own); this module finds the cells with the reader's
own header matching (:class:`~leakbudget.input.table.RawTable`) and has :mod:`leakbudget.xlsx.edit` write them
into a new file. It knows nothing of how the plan was made.

* Loads: the ``Circuit`` cell of each row named, and nothing else.
* Circuits: each new circuit is a row appended below the table, one value per column the sheet has, written so
  that the reader reads the circuit back as it is (numbers as numbers in the sheet's units, a blank where a blank
  reads the same and the default's provenance should stay, e.g. a Voltage the Settings give); its ``Note`` says it
  is proposed. A column the sheet lacks is added after its last column only where a blank would read differently
  (``Note`` always, since it carries the mark). New cells take the style of the row above.
* A circuit re-hung under another shared device gets its new ``Protected by``; one given a device of its own
  (an RCBO) also its new ``Device`` and ``RCD type``.

Refused, one sentence each, with nothing written: a cell to change that lies inside a merged range (its value
would be hidden or read for several rows) and a cell that holds a formula.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from leakbudget.errors import WorkbookError
from leakbudget.input.schema import CIRCUITS, LOADS, SETTINGS, Sheet, normalise
from leakbudget.input.table import RawTable, is_blank
from leakbudget.input.units import to_unit
from leakbudget.model import Circuit
from leakbudget.settings import Settings
from leakbudget.workbook.read import TYPED_SUPPLY, _find_sheet, _market_supply, _table, open_grids, read_settings
from leakbudget.xlsx.cells import column_letter
from leakbudget.xlsx.edit import Cell, CellRefused, CellWrite, SheetEdit, edit_sheets

LENGTH_DIGITS = (
    12  # significant digits a converted cable length keeps (m -> the Length unit and back is exact to 1e-12)
)


@dataclass(frozen=True)
class CircuitUpdate:
    """An existing circuit that hangs under another shared device, or gets a device of its own."""

    circuit_id: str
    protected_by: str | None  # its new Protected by (None: blank)
    device_key: str | None = None  # a device of its own (an RCBO): its key; None keeps the Device cell
    rcd_type: str | None = None  # with device_key: the RCD type of that device (None: blank)


@dataclass(frozen=True)
class PlannedChanges:
    load_circuits: Mapping[int, str | None]  # Loads sheet row (1-based, as the reader gives it) -> circuit id
    new_circuits: Sequence[Circuit] = ()  # appended to Circuits, in this order
    circuit_updates: Sequence[CircuitUpdate] = ()


@dataclass(frozen=True)
class WrittenCell:
    """One cell written into the copy."""

    sheet: str
    row: int  # 1-based
    column: str  # the column's header, as in the sheet
    cell: str  # e.g. "B7"
    value: Cell


@dataclass
class PlannedCopy:
    """What :func:`write_planned_copy` wrote: the file and every cell, by purpose."""

    path: Path
    loads_sheet: str
    circuits_sheet: str
    load_cells: dict[int, WrittenCell] = field(default_factory=dict)  # Loads row -> its Circuit cell
    new_circuit_rows: dict[str, int] = field(default_factory=dict)  # new circuit id -> its row in Circuits
    new_circuit_cells: list[WrittenCell] = field(default_factory=list)
    updated_cells: dict[str, list[WrittenCell]] = field(default_factory=dict)  # existing circuit id -> its cells
    added_columns: list[WrittenCell] = field(default_factory=list)  # header cells added

    @property
    def cells(self) -> list[WrittenCell]:
        """Every cell written, header cells first."""
        updated = [cell for cells in self.updated_cells.values() for cell in cells]
        return [*self.added_columns, *self.load_cells.values(), *self.new_circuit_cells, *updated]


def write_planned_copy(source: Path, changes: PlannedChanges, out: Path) -> PlannedCopy:
    """Write to ``out`` a copy of the workbook ``source`` holding ``changes`` (see the module docstring).

    ``source`` is only read. Raises :class:`WorkbookError` for a cell to change that is merged or holds a formula,
    and :class:`~leakbudget.errors.WriteBackError` when ``out`` cannot be written; in both cases nothing is written.
    """
    source, out = Path(source), Path(out)
    grids = open_grids(source)
    settings, _ = read_settings(_table(grids, SETTINGS, source))
    loads = _SheetCells(grids, LOADS, source)
    circuits = _SheetCells(grids, CIRCUITS, source)
    copy = PlannedCopy(out, loads.name, circuits.name)
    circuit_column = loads.column("Circuit", copy)
    for row, circuit_id in sorted(changes.load_circuits.items()):
        copy.load_cells[row] = loads.write(row, circuit_column, circuit_id, loads.near(row, circuit_column))
    _append_circuits(circuits, changes.new_circuits, settings, copy)
    _update_circuits(circuits, changes.circuit_updates, copy)
    try:
        edit_sheets(source, [loads.edit(), circuits.edit()], out)
    except CellRefused as exc:
        sheet = loads if exc.sheet == loads.name else circuits
        shown = f" (={exc.formula[:60]})" if exc.formula else ""
        raise WorkbookError(
            f"the cell holds a formula{shown}, which leakbudget does not replace, so the planned value cannot be "
            "written there",
            path=source,
            sheet=exc.sheet,
            row=exc.row,
            column=sheet.header_name(exc.column),
            cell=exc.ref,
            hint="type the value in place of the formula in your spreadsheet program, save, and run again",
        ) from None
    return copy


def _append_circuits(circuits: _SheetCells, new: Sequence[Circuit], settings: Settings, copy: PlannedCopy) -> None:
    """New circuits as rows below the table, columns the sheet lacks added where a blank would read otherwise."""
    rows = [circuit_cells(c, settings) for c in new]
    for column in CIRCUITS.columns:
        if any(needed for cells in rows for name, _, needed in cells if name == column.name):
            circuits.column(column.name, copy)
    first = circuits.last_row + 1
    for k, (circuit, cells) in enumerate(zip(new, rows)):
        row = first + k
        copy.new_circuit_rows[circuit.circuit_id] = row
        for name, value, _ in cells:
            j = circuits.find(name)
            if j is not None and value is not None:
                style = (circuits.last_row, j) if circuits.last_row > circuits.header else None
                copy.new_circuit_cells.append(circuits.write(row, j, value, style))


def _update_circuits(circuits: _SheetCells, updates: Sequence[CircuitUpdate], copy: PlannedCopy) -> None:
    for update in updates:
        row = circuits.row_of(update.circuit_id)
        values: list[tuple[str, str | None]] = [("Protected by", update.protected_by)]
        if update.device_key is not None:
            values += [("Device", update.device_key), ("RCD type", update.rcd_type)]
        for name, value in values:
            j = circuits.find(name)
            if j is None and value is None:
                continue  # a blank reads the same
            j = circuits.column(name, copy) if j is None else j
            cell = circuits.write(row, j, value, circuits.near(row, j))
            copy.updated_cells.setdefault(update.circuit_id, []).append(cell)


def circuit_cells(c: Circuit, settings: Settings) -> list[tuple[str, Cell, bool]]:
    """(column, value, needed) for every Circuits column: the value that reads back as ``c`` (None: leave the cell
    blank), and whether a blank cell would read differently, so that a sheet without the column needs it added.

    Voltage and Frequency are left blank where the blank's default (the Settings, else the device's market) gives
    the same value and ``c`` took it from there, so the copy keeps that default's provenance.
    """
    supply_typed = c.supply_source == TYPED_SUPPLY
    if c.device.protected:
        default_v, default_f, _, _ = _market_supply(c.device.market, settings)
    else:  # an unprotected circuit's blank depends on the sheet's other devices: write the figures
        default_v = default_f = float("nan")
    voltage_needed = supply_typed or c.voltage_v != default_v
    frequency_needed = supply_typed or c.frequency_hz != default_f
    length: float | None = None
    if c.cable_length_m is not None:
        length = float(f"{to_unit(c.cable_length_m, 'm', settings.length_unit):.{LENGTH_DIGITS}g}")
    values: dict[str, tuple[Cell, bool]] = {
        "Circuit": (c.circuit_id, True),
        "Device": (c.device.key, True),
        "RCD type": (c.rcd_type, c.rcd_type is not None),
        "Voltage": (c.voltage_v if voltage_needed else None, voltage_needed),
        "Frequency": (c.frequency_hz if frequency_needed else None, frequency_needed),
        "System": (c.system, c.system != "single"),
        "Rating": (c.rating_a, c.rating_a is not None),
        "Cable length": (length, length is not None),
        "Cable": (c.cable_key, c.cable_key != str(settings["Default cable"]).lower()),
        "Rooms": (", ".join(c.rooms) or None, bool(c.rooms)),
        "Shared neutral": ("yes" if c.shared_neutral else None, c.shared_neutral),
        "Note": (c.note, True),
        "Protected by": (c.protected_by, c.protected_by is not None),
        "Phase": (c.phase, c.phase != "L1"),
        "Purpose": (c.purpose, c.purpose != "mixed"),
        "Neutral-earth bond": ("yes" if c.neutral_earth_bond else None, c.neutral_earth_bond),
    }
    return [(col.name, *values[col.name]) for col in CIRCUITS.columns]


class _SheetCells:
    """One of the user's sheets as the reader locates it, and the cells to write into it."""

    def __init__(self, grids: Any, spec: Sheet, path: Path) -> None:
        found = _find_sheet(grids, spec, path)
        assert found is not None  # Loads and Circuits are required sheets; the plan was made from them
        self.name, grid = found
        self.path, self.merged = path, grid.merged
        self.table = RawTable.from_grid(path, self.name, grid.cells, spec, grid.merged, grid.unreadable)
        self.header = self.table.header_row
        self.last_row = max([self.header, *(number for number, _ in self.table.rows)])
        self.columns = dict(self.table.columns)  # normalised name -> 0-based column
        self.headers = {j: self.table.typed_names[name] for name, j in self.columns.items()}
        used = [
            j for i in range(self.header - 1, len(grid.cells)) for j, v in enumerate(grid.cells[i]) if not is_blank(v)
        ]
        self.free = max(used, default=-1) + 1  # the first column empty from the header row down
        self.cells: dict[tuple[int, int], CellWrite] = {}

    def find(self, name: str) -> int | None:
        return self.columns.get(normalise(name))

    def header_name(self, column: int) -> str:
        return self.headers.get(column, column_letter(column))

    def column(self, name: str, copy: PlannedCopy) -> int:
        """The column ``name``, added after the sheet's last column (header cell styled like the last header)."""
        j = self.find(name)
        if j is not None:
            return j
        j, self.free = self.free, self.free + 1
        last_header = max(self.columns.values(), default=None)
        self.columns[normalise(name)] = j
        self.headers[j] = name
        style = (self.header, last_header) if last_header is not None else None
        copy.added_columns.append(self.write(self.header, j, name, style))
        return j

    def near(self, row: int, column: int) -> tuple[int, int] | None:
        """The cell whose style a new cell at (row, column) of the table takes: the one above, or below the
        header."""
        if row - 1 > self.header:
            return row - 1, column
        return (row + 1, column) if row + 1 <= self.last_row else None

    def row_of(self, circuit_id: str) -> int:
        for row in self.table.rows:
            text = self.table.text(row, "Circuit")
            if text is not None and text.lower() == circuit_id.lower():
                return row[0]
        raise KeyError(f"circuit {circuit_id} is not on sheet '{self.name}'")

    def write(self, row: int, column: int, value: Cell, style_from: tuple[int, int] | None) -> WrittenCell:
        self._refuse_merged(row, column)
        self.cells[(row, column)] = CellWrite(value, style_from)
        return WrittenCell(self.name, row, self.header_name(column), f"{column_letter(column)}{row}", value)

    def _refuse_merged(self, row: int, column: int) -> None:
        """A cell inside a merged range shows (and reads) the range's first value, so it cannot take its own."""
        i, j = row - 1, column
        for (r0, c0), (r1, c1) in self.merged:
            if r0 <= i <= r1 and c0 <= j <= c1 and (r1 > r0 or (i, j) != (r0, c0)):
                ref = f"{column_letter(c0)}{r0 + 1}:{column_letter(c1)}{r1 + 1}"
                raise WorkbookError(
                    f"the cells {ref} are merged, so the planned value cannot be written into this one alone",
                    path=self.path,
                    sheet=self.name,
                    row=row,
                    column=self.header_name(column),
                    cell=f"{column_letter(column)}{row}",
                    hint="unmerge the cells in your spreadsheet program (type the value in each row), save, and run "
                    "again",
                )

    def edit(self) -> SheetEdit:
        return SheetEdit(self.name, dict(self.cells))
