"""Read and validate the user's workbook (sheets Circuits, Loads, Settings, Appliances, Cables).

Reading uses python-calamine (fast, read-only; formulas give their cached values). Nothing here writes; the
result sheets are written by :mod:`leakbudget.xlsx.package`.

:func:`read_project` finds every problem in one run: each sheet's tables collect their bad cells
(:class:`~leakbudget.input.table.Problems`), a row with a problem is left out and its id or key remembered
(:class:`Unusable`), so that a reference to it is not reported as unknown too, and the checks between rows and
sheets run on what could be read. Then every problem is raised at once, in the workbook's order. A file that is not
a readable workbook at all still stops at once with its one sentence.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass, field
from functools import partial
from pathlib import Path
from typing import Any, TypeVar

from leakbudget import catalogue as cat
from leakbudget.devices import DEVICES, Device, device
from leakbudget.errors import WorkbookError
from leakbudget.input.ranges import (
    CABLE_LENGTH_M,
    FREQUENCY_HZ,
    SETTING_RANGES,
    STANDING_LEAKAGE_MA,
    VOLTAGE_V,
)
from leakbudget.input.schema import (
    APPLIANCES,
    CABLES,
    CIRCUITS,
    LOADS,
    LOCATIONS,
    PROTECTION,
    READINGS,
    SETTINGS,
    Sheet,
    normalise,
)
from leakbudget.input.table import BAD, MergedRange, Problems, RawTable, Row, Unreadable
from leakbudget.input.units import UnitProblem
from leakbudget.leakage import LEG_ANGLES_DEG, SYSTEMS, capacitive_current_ma, parse_leg, resistive_current_ma
from leakbudget.locations import LocationRow, rows_from_table
from leakbudget.model import CONNECTION_WORDS, PHASES, PURPOSES, Circuit, Load, Project, SharedDevice
from leakbudget.ods.guard import GuardedOds
from leakbudget.progress import Progress
from leakbudget.provenance import Source
from leakbudget.settings import (
    IEC_SUPPLY,
    SPECS_BY_NAME,
    SUPPLY_SOURCES,
    US_SUPPLY,
    Settings,
)
from leakbudget.workbook.readings import read_readings
from leakbudget.xlsx.guard import CellNote, GuardedPackage

WORKBOOK_SUFFIXES = (".xlsx", ".xlsm", ".ods")
ODS_SUFFIX = ".ods"
RCD_TYPES = ("AC", "A", "F", "B")
TYPED_SUPPLY = Source.measured("Circuits sheet (your value)")  # a circuit whose Voltage and Frequency are typed


def open_grids(path: Path) -> SheetGrids:
    """The workbook's sheets by name as typed; each is checked and read only when first asked for.

    Before python-calamine opens the file, :class:`~leakbudget.xlsx.guard.GuardedPackage` (for an .ods,
    :class:`~leakbudget.ods.guard.GuardedOds`) says what the file is when it is not such a package and applies the
    size limits; see :mod:`leakbudget.xlsx.guard` and :mod:`leakbudget.ods.guard`.
    """
    import python_calamine

    if not path.exists():
        raise WorkbookError("the file does not exist", path=path, hint="check the path")
    if path.is_dir():
        raise WorkbookError("this is a folder, not a workbook", path=path, hint="give the path of an .xlsx file")
    if path.suffix.lower() not in WORKBOOK_SUFFIXES:
        raise WorkbookError(
            f"leakbudget reads .xlsx and .ods workbooks, not '{path.suffix or 'no extension'}' files",
            path=path,
            hint="save it as an Excel 2007+ workbook (.xlsx) or an OpenDocument spreadsheet (.ods) from your "
            "spreadsheet program",
        )
    package = GuardedOds(path) if path.suffix.lower() == ODS_SUFFIX else GuardedPackage(path)
    try:
        if (
            isinstance(package, GuardedPackage) and package.encoded_targets
        ):  # calamine looks parts up by the literal target: give it decoded targets
            import io

            book = python_calamine.CalamineWorkbook.from_filelike(io.BytesIO(package.decoded_copy()))
        else:
            book = python_calamine.CalamineWorkbook.from_path(str(path))
        names = list(book.sheet_names)
    except python_calamine.PasswordError:
        raise WorkbookError(
            "the workbook is password-protected or encrypted", path=path, hint="save an unprotected copy and check that"
        ) from None
    except BaseException as exc:  # calamine reports damage with many exception types, and panics
        raise _unreadable_workbook(exc, path) from None
    return SheetGrids(path, package, book, names)


def _unreadable_workbook(exc: BaseException, path: Path, sheet: str | None = None) -> BaseException:
    """The error to raise for an exception from calamine (interrupts and exits pass through unchanged)."""
    if isinstance(exc, (KeyboardInterrupt, SystemExit, GeneratorExit, MemoryError)):
        return exc
    text = str(exc).strip()
    detail = f"{type(exc).__name__}: {text.splitlines()[0][:160]}" if text else type(exc).__name__
    kind = ".ods" if path.suffix.lower() == ODS_SUFFIX else ".xlsx"
    what = f"sheet '{sheet}' is damaged and cannot be read" if sheet else f"this is not a readable {kind} workbook"
    return WorkbookError(
        f"{what} ({detail})", path=path, hint=f"open it in your spreadsheet program and save it again as {kind}"
    )


@dataclass
class SheetGrid:
    """One sheet as read: cell values (row by row from A1), merged ranges, and cells calamine read as empty
    although they hold a formula without a saved result or an error value."""

    cells: list[list[Any]]
    merged: list[MergedRange]
    unreadable: dict[tuple[int, int], Unreadable]


class SheetGrids(Mapping[str, SheetGrid]):
    """The sheets of one workbook by name; a sheet is checked and read when first asked for, and only then."""

    def __init__(self, path: Path, package: GuardedPackage | GuardedOds, book: Any, names: list[str]) -> None:
        self.path, self.package, self.book, self.names = path, package, book, names
        self._read: dict[str, SheetGrid] = {}

    def __iter__(self) -> Iterator[str]:
        return iter(self.names)

    def __len__(self) -> int:
        return len(self.names)

    def __getitem__(self, name: str) -> SheetGrid:
        if name not in self._read:
            if name not in self.names:
                raise KeyError(name)
            scan = self.package.scan_sheet(name)
            try:
                sheet = self.book.get_sheet_by_name(name)
                cells = sheet.to_python(skip_empty_area=False)
                merged = list(sheet.merged_cell_ranges or scan.merged)  # calamine lists none for an .ods
            except BaseException as exc:
                raise _unreadable_workbook(exc, self.path, name) from None
            self._read[name] = SheetGrid(
                cells, merged, {key: _unreadable_cell(note) for key, note in scan.notes.items()}
            )
        return self._read[name]


def _unreadable_cell(note: CellNote) -> Unreadable:
    if note.error is not None:
        return Unreadable(
            f"the cell shows the error {note.error}",
            "correct the formula or the value it uses in your spreadsheet program and save",
        )
    formula = f" ={note.formula[:60]}" if note.formula else ""
    return Unreadable(
        f"the formula{formula} has no saved result (leakbudget reads saved results and calculates nothing)",
        "open the workbook in a spreadsheet program, let it calculate and save it",
    )


def _find_sheet(grids: Mapping[str, SheetGrid], spec: Sheet, path: Path) -> tuple[str, SheetGrid] | None:
    found = [name for name in grids if normalise(name) == normalise(spec.name)]
    if len(found) > 1:
        raise WorkbookError(
            f"the sheets {' and '.join(repr(n) for n in found)} both read as '{spec.name}'",
            path=path,
            hint="rename or delete one of them",
        )
    if found:
        return found[0], grids[found[0]]
    if spec.required:
        raise WorkbookError(
            f"the required sheet '{spec.name}' is missing (sheets found: {', '.join(grids) or 'none'})",
            path=path,
            hint=f"add a sheet named '{spec.name}' ({spec.help}) or start from `leakbudget template`",
        )
    return None


def _table(
    grids: Mapping[str, SheetGrid], spec: Sheet, path: Path, problems: Problems | None = None
) -> RawTable | None:
    """The sheet of ``spec`` as a table, or None when the workbook has none. With ``problems``, a sheet that cannot
    be read as a table (missing, damaged, no header) is recorded there and read as None, and the table collects
    its cells' problems there too."""
    try:
        found = _find_sheet(grids, spec, path)
        if found is None:
            return None
        name, sheet = found
        table = RawTable.from_grid(path, name, sheet.cells, spec, sheet.merged, sheet.unreadable)
    except WorkbookError as exc:
        if problems is None:
            raise
        problems.add(exc)
        return None
    table.problems = problems
    return table


@dataclass
class Unusable:
    """Ids and keys that rows with a problem define, so that references to them are not reported as unknown too.

    ``whole`` names the kinds ("circuit", "device", "appliance", "cable") whose sheet could not be read at all:
    every reference to one of them is then left unchecked."""

    circuits: set[str] = field(default_factory=set)
    devices: set[str] = field(default_factory=set)
    appliances: set[str] = field(default_factory=set)
    cables: set[str] = field(default_factory=set)
    whole: set[str] = field(default_factory=set)

    def has(self, kind: str, key: str) -> bool:
        """True when ``key`` (a ``kind`` of id or key) may exist but could not be read."""
        named = {"circuit": self.circuits, "device": self.devices, "appliance": self.appliances, "cable": self.cables}
        return kind in self.whole or key.strip().lower() in named[kind]


T = TypeVar("T")


def _rows_apart(
    table: RawTable, spec: Sheet, parse: Callable[[RawTable], list[T]], key_column: str
) -> tuple[list[T], set[str]]:
    """Run ``parse``, a table parser that stops at its first problem, on each row alone (so every row's problems
    are recorded), then on the rows without a problem together (for problems between rows, such as a key used
    twice). Every cell of the sheet's number columns (those with a unit in ``spec``) is read first, so that a row
    whose parser stops early still has each bad number recorded. Returns what it parsed and the keys (lower case)
    of the rows with a problem."""
    assert table.problems is not None
    for column in spec.columns:
        if column.unit is not None and table.has(column.name):
            for row in table.rows:
                table.number(row, column.name, column.unit)
    good: list[Row] = []
    broken: set[str] = set()
    for row in table.rows:
        with table.reading(row):
            parse(table.only([row]))
        if table.failed(row):
            broken.add((table.text(row, key_column) or "").strip().lower())
        else:
            good.append(row)
    try:
        return parse(table.only(good)), broken
    except WorkbookError as exc:
        table.problems.add(exc)
        return [], broken


def read_settings(table: RawTable | None) -> tuple[Settings, list[str]]:
    settings = Settings()
    warnings: list[str] = []
    if table is None:
        return settings, warnings
    seen: dict[str, int] = {}
    for row in table.rows:
        with table.reading(row):
            name = table.text(row, "Setting")
            if name is None:
                continue
            key = normalise(name)
            spec = SPECS_BY_NAME.get(key)
            if key in seen:
                raise table.error(
                    row,
                    "Setting",
                    f"the setting '{name}' is given twice (also row {seen[key]})",
                    hint="keep one row per setting",
                )
            seen[key] = row[0]
            raw = table.raw(row, "Value")
            if spec is None:
                settings.extra[key] = raw
                continue
            if raw is None:
                if table.failed(row, "Value"):
                    settings.broken.add(spec.name)
                continue
            try:
                settings.set(name, raw, f"row {row[0]}")
            except UnitProblem as exc:
                settings.broken.add(spec.name)
                meaning = f"{spec.name} means: {spec.help[:1].lower()}{spec.help[1:]}"
                raise table.error(row, "Value", f"setting '{name}': {exc}", hint=exc.hint or meaning) from None
            limits = SETTING_RANGES.get(spec.name)
            if limits is not None and (problem := limits.problem(settings[spec.name])) is not None:
                settings.broken.add(spec.name)
                raise table.error(
                    row,
                    "Value",
                    f"setting '{name}': '{table.text(row, 'Value')}' is {settings[spec.name]:g} {limits.unit}, {problem}",
                    hint=limits.hint,
                )
    return settings, warnings


def _market_supply(market: str, settings: Settings) -> tuple[float, float, Source, bool]:
    """Voltage, frequency, their source, and whether a built-in default was used."""
    default_v, default_f = US_SUPPLY if market == "us" else IEC_SUPPLY
    v = settings["Voltage"]
    f = settings["Frequency"]
    if v is not None and f is not None:
        return v, f, settings.sources["Voltage"], False
    return (v or default_v, f or default_f, SUPPLY_SOURCES[market], True)


def read_circuits(
    table: RawTable,
    settings: Settings,
    catalogue: cat.Catalogue,
    defaults_used: list[str],
    shared: dict[str, SharedDevice] | None = None,
    unusable: Unusable | None = None,
) -> list[Circuit]:
    """The Circuits sheet; every problem names its cell. A collecting table records every bad cell of every row
    (and the ids of rows with a problem in ``unusable``)."""
    shared = shared or {}
    unusable = unusable if unusable is not None else Unusable()
    circuits: list[Circuit] = []
    seen: dict[str, int] = {}
    markets = [
        device(table.text(r, "Device") or "none").market
        for r in table.rows
        if (table.text(r, "Device") or "none").lower() in DEVICES
    ]
    fallback_market = "iec" if markets.count("iec") > markets.count("us") else "us"
    defaulted: dict[str, list[str]] = {}
    default_cable = str(settings["Default cable"])
    default_cable_known = default_cable in catalogue.cables or unusable.has("cable", default_cable)
    if not default_cable_known and "Default cable" not in settings.broken:
        problem = WorkbookError(
            f"setting 'Default cable': unknown cable key '{default_cable}'",
            path=table.path,
            sheet="Settings",
            hint=f"use one of {', '.join(sorted(catalogue.cables))}",
        )
        if table.problems is None:
            raise problem
        table.problems.add(problem)
    for row in table.rows:
        cid = None
        with table.reading(row):
            cid = table.text(row, "Circuit")
            if cid is None:
                table.refuse(row, "Circuit", "the circuit id is blank", hint="give every circuit a unique id")
            elif cid.lower() in seen:
                table.refuse(
                    row,
                    "Circuit",
                    f"the circuit id '{cid}' is used twice (also row {seen[cid.lower()]})",
                    hint="give every circuit a unique id",
                )
            else:
                seen[cid.lower()] = row[0]
            dev = _circuit_device(table, row)
            rcd_type = table.choice(row, "RCD type", RCD_TYPES)
            system = table.choice(row, "System", SYSTEMS, "single") or "single"
            market = dev.market if dev is not None and dev.protected else fallback_market
            v_default, f_default, supply_source, used_default = _market_supply(market, settings)
            v = table.number(row, "Voltage", "V", positive=True, plausible=VOLTAGE_V)
            f = table.number(row, "Frequency", "Hz", positive=True, plausible=FREQUENCY_HZ)
            cable_text = table.text(row, "Cable")
            cable_key = (cable_text or default_cable).lower()
            if cable_text is not None and cable_key not in catalogue.cables and not unusable.has("cable", cable_key):
                table.refuse(
                    row,
                    "Cable",
                    f"'{cable_key}' is not a known cable key",
                    hint=f"use one of {', '.join(sorted(catalogue.cables))} (see `leakbudget cables`)",
                )
            # With a bad Length unit setting, bare numbers are read in m and not judged for plausibility.
            length_ok = "Length unit" not in settings.broken
            length = table.number(
                row, "Cable length", settings.length_unit, "m", plausible=CABLE_LENGTH_M if length_ok else None
            )
            rooms_text = table.text(row, "Rooms")
            rooms = tuple(r.strip() for r in rooms_text.split(",") if r.strip()) if rooms_text else ()
            rating = table.number(row, "Rating", "A", positive=True)
            note = table.text(row, "Note")
            shared_neutral = bool(table.flag(row, "Shared neutral"))
            protected_by = _protected_by(table, row, shared, board_level=True, unusable=unusable)
            phase = table.choice(row, "Phase", PHASES, "L1") or "L1"
            purpose = table.choice(row, "Purpose", PURPOSES, "mixed") or "mixed"
            bond = bool(table.flag(row, "Neutral-earth bond"))
            _check_phase(table, row, system, phase, protected_by, shared)
            if table.failed(row) or cid is None or dev is None:
                if cid is not None:
                    unusable.circuits.add(cid.lower())
                continue
            if v is not None and f is not None:
                supply_source = TYPED_SUPPLY
            else:
                parts = []
                if v is None:
                    parts.append(f"{v_default:g} V")
                if f is None:
                    parts.append(f"{f_default:g} Hz")
                label = f"{' '.join(parts)} ({'Settings sheet' if not used_default else supply_source})"
                defaulted.setdefault(label, []).append(cid)
            circuits.append(
                Circuit(
                    circuit_id=cid,
                    device=dev,
                    rcd_type=rcd_type,
                    voltage_v=v if v is not None else v_default,
                    frequency_hz=f if f is not None else f_default,
                    supply_source=supply_source,
                    system=system,
                    rating_a=rating,
                    cable_length_m=length,
                    cable_key=cable_key,
                    rooms=rooms,
                    note=note,
                    row=row[0],
                    shared_neutral=shared_neutral,
                    protected_by=protected_by,
                    phase=phase,
                    purpose=purpose,
                    neutral_earth_bond=bond,
                )
            )
        if table.failed(row) and cid is not None:  # a problem the row raised
            unusable.circuits.add(cid.lower())
    for label, ids in defaulted.items():
        shown = ", ".join(ids[:8]) + (f" and {len(ids) - 8} more" if len(ids) > 8 else "")
        defaults_used.append(f"supply {label} for {shown}")
    return circuits


def _circuit_device(table: RawTable, row: Row) -> Device | None:
    """The row's device, or None (the problem recorded) when the cell is blank or not a device key."""
    dkey = table.text(row, "Device")
    if dkey is None:
        if not table.failed(row, "Device"):
            table.refuse(
                row, "Device", "the device is blank", hint=f"type a device key ({', '.join(DEVICES)}) or 'none'"
            )
        return None
    try:
        return device(dkey)
    except KeyError:
        table.refuse(
            row,
            "Device",
            f"'{dkey}' is not a known device key",
            hint=f"use one of {', '.join(DEVICES)} (see `leakbudget devices`)",
        )
        return None


def read_protection(table: RawTable | None, unusable: Unusable | None = None) -> dict[str, SharedDevice]:
    """The Protection sheet: shared devices by lower-case Id; every problem names its cell (an unknown Upstream, a
    cycle of Upstream ids, a device that protects nothing)."""
    if table is None:
        return {}
    unusable = unusable if unusable is not None else Unusable()
    shared: dict[str, SharedDevice] = {}
    seen: dict[str, int] = {}
    for row in table.rows:
        did = None
        with table.reading(row):
            did = table.text(row, "Id")
            if did is None:
                table.refuse(row, "Id", "the id is blank", hint="give every shared device an id, e.g. RCD1")
            elif did.lower() in seen:
                table.refuse(
                    row, "Id", f"the id '{did}' is used twice (also row {seen[did.lower()]})", hint="keep ids unique"
                )
            else:
                seen[did.lower()] = row[0]
            dkey = table.text(row, "Device")
            try:
                dev = device(dkey or "")
            except KeyError:
                dev = None
            if (dev is None or not dev.protected) and not table.failed(row, "Device"):
                table.refuse(
                    row,
                    "Device",
                    f"'{dkey or ''}' is not a protective device key",
                    hint=f"use one of {', '.join(k for k in DEVICES if k != 'none')} (see `leakbudget devices`)",
                )
            found = SharedDevice(
                device_id=did or "",
                device=dev,  # type: ignore[arg-type]  # used only when the row has no problem
                rcd_type=table.choice(row, "RCD type", RCD_TYPES),
                upstream_id=table.text(row, "Upstream"),
                rating_a=table.number(row, "Rating", "A", positive=True),
                board=table.text(row, "Board"),
                system=table.choice(row, "System", SYSTEMS, "single") or "single",
                circuit_id=table.text(row, "Circuit"),
                note=table.text(row, "Note"),
                row=row[0],
            )
            if not table.failed(row) and did is not None:
                shared[did.lower()] = found
        if table.failed(row) and did is not None:
            unusable.devices.add(did.lower())
    rows = {r[0]: r for r in table.rows}
    for d in shared.values():
        if d.upstream_id is None:
            continue
        with table.reading(rows[d.row]):
            _check_upstream(table, rows[d.row], d, shared, unusable)
    return shared


def _check_upstream(
    table: RawTable, row: Row, d: SharedDevice, shared: dict[str, SharedDevice], unusable: Unusable
) -> None:
    assert d.upstream_id is not None
    up = shared.get(d.upstream_id.lower())
    if up is None:
        if not unusable.has("device", d.upstream_id):
            raise table.error(
                row,
                "Upstream",
                f"'{d.upstream_id}' is not an Id of the Protection sheet",
                hint="use the Id of the device above it, or leave it blank for a device at the origin",
            )
        return
    if d.circuit_id is not None:
        raise table.error(
            row,
            "Upstream",
            "a device inside a circuit takes its place under that circuit's devices",
            hint="leave Upstream blank for a row with a Circuit",
        )
    if up.circuit_id is not None:
        raise table.error(
            row,
            "Upstream",
            f"'{up.device_id}' sits inside circuit {up.circuit_id}, not on a board",
            hint="name a board device as Upstream",
        )
    seen = [d.device_id]
    node: SharedDevice | None = up
    while node is not None:
        if node.device_id.lower() == d.device_id.lower():
            raise table.error(
                row,
                "Upstream",
                f"the Upstream ids go round in a circle ({' → '.join([*seen, node.device_id])})",
                hint="every chain of Upstream ids must end at a device at the origin",
            )
        seen.append(node.device_id)
        node = shared.get(node.upstream_id.lower()) if node.upstream_id else None


def _protected_by(
    table: RawTable, row: Row, shared: dict[str, SharedDevice], board_level: bool, unusable: Unusable | None = None
) -> str | None:
    did = table.text(row, "Protected by")
    if did is None:
        return None
    d = shared.get(did.lower())
    if d is None:
        if unusable is None or not unusable.has("device", did):
            table.refuse(
                row,
                "Protected by",
                f"'{did}' is not an Id of the Protection sheet",
                hint="add the device to the Protection sheet, or leave the cell blank",
            )
        return None
    if board_level and d.circuit_id is not None:
        table.refuse(
            row,
            "Protected by",
            f"'{d.device_id}' is a device inside circuit {d.circuit_id}, not on the board",
            hint="name the board device the circuit hangs under (a Protection row without a Circuit)",
        )
        return None
    return d.device_id


def _check_phase(
    table: RawTable, row: Row, system: str, phase: str, protected_by: str | None, shared: dict[str, SharedDevice]
) -> None:
    """A single-pole circuit's Phase must be a line its device carries."""
    if protected_by is None or system != "single":
        return
    d = shared[protected_by.lower()]
    if phase not in LEG_ANGLES_DEG[d.system]:
        table.refuse(
            row,
            "Phase",
            f"{d.device_id} is a {d.system} device and carries no {phase}",
            hint=f"use {', '.join(LEG_ANGLES_DEG[d.system])}, or give {d.device_id} the System it has on the "
            "Protection sheet",
        )


def _link_load_devices(
    table: RawTable | None,
    shared: dict[str, SharedDevice],
    circuits: list[Circuit],
    loads_table: RawTable,
    loads: list[Load],
    unusable: Unusable | None = None,
) -> None:
    """A device inside a circuit names an existing circuit, and every load under one sits on that circuit."""
    unusable = unusable if unusable is not None else Unusable()
    by_id = {c.circuit_id.lower(): c for c in circuits}
    rows = {r[0]: r for r in table.rows} if table is not None else {}
    for d in shared.values():
        if d.circuit_id is not None:
            if d.circuit_id.lower() not in by_id:
                if not unusable.has("circuit", d.circuit_id):
                    table.refuse(  # type: ignore[union-attr]
                        rows[d.row],
                        "Circuit",
                        f"'{d.circuit_id}' is not a circuit in the Circuits sheet",
                        hint="use the id of the circuit the device sits on, or leave it blank for a board device",
                    )
                continue
            d.circuit_id = by_id[d.circuit_id.lower()].circuit_id
    load_rows = {r[0]: r for r in loads_table.rows}
    for load in loads:
        if load.protected_by is None:
            continue
        d = shared[load.protected_by.lower()]
        if d.circuit_id is None or load.circuit_id is None or d.circuit_id.lower() != load.circuit_id.lower():
            if d.circuit_id is not None and unusable.has("circuit", d.circuit_id):
                continue
            where = f"sits inside circuit {d.circuit_id}" if d.circuit_id else "is a board device"
            loads_table.refuse(
                load_rows[load.row],
                "Protected by",
                f"'{d.device_id}' {where}, not on this load's circuit",
                hint="name a device inside the load's own circuit (a Protection row whose Circuit is that circuit)",
            )


def _default_leg(appliance: cat.Appliance | None, system: str) -> str:
    """A blank Leg: both lines (L1-L2) for a line-line appliance on a circuit with two or more lines, else L1."""
    return "L1-L2" if appliance is not None and appliance.line_to_line and system != "single" else "L1"


LEAKAGE_FIGURES = ("Leakage", "Y capacitance", "Insulation resistance", "Appliance")  # a load needs one of them


def read_loads(
    table: RawTable,
    circuits: list[Circuit],
    catalogue: cat.Catalogue,
    shared: dict[str, SharedDevice] | None = None,
    unusable: Unusable | None = None,
) -> list[Load]:
    """The Loads sheet; every problem names its cell. A collecting table records every bad cell of every row;
    references to the ids and keys in ``unusable`` are not reported again.

    The sheet is read a column at a time (a building has a hundred thousand loads); a cell the column finds
    :data:`~leakbudget.input.table.BAD` is read again through its row accessor, which records its problem."""
    shared = shared or {}
    unusable = unusable if unusable is not None else Unusable()
    by_id = {c.circuit_id.lower(): c for c in circuits}
    appliances = catalogue.appliances
    names, cids, keys = table.texts("Load"), table.texts("Circuit"), table.texts("Appliance")
    quantities = table.numbers("Quantity", "dimensionless", positive=True)
    leakages = table.numbers("Leakage", "mA", plausible=STANDING_LEAKAGE_MA)
    y_caps = table.numbers("Y capacitance", "nF")
    resistances = table.numbers("Insulation resistance", "Mohm", positive=True)
    leg_texts, powers, currents = table.texts("Leg"), table.numbers("Power", "W"), table.numbers("Current", "A")
    rooms, stays, notes = table.texts("Room"), table.flags("Stays"), table.texts("Note")
    waveforms, models = table.choices("Waveform", cat.WAVEFORMS), table.texts("Model")
    bonds, groups = table.flags("Neutral-earth bond"), table.texts("Group")
    connections = table.texts("Connection")
    devices_named = bool(shared or unusable.devices or "device" in unusable.whole)
    legs_read: dict[tuple[str, str], tuple[str, ...] | str] = {}  # (Leg text, system) -> lines, or the problem
    loads: list[Load] = []
    for k, row in enumerate(table.rows):
        try:
            name = names[k]
            if name is BAD:
                name = table.text(row, "Load")
            if name is None and not table.failed(row, "Load"):
                table.refuse(row, "Load", "the load name is blank", hint="name every load")
            cid = cids[k]
            if cid is BAD:
                cid = table.text(row, "Circuit")
            circuit = None
            if cid is not None:
                circuit = by_id.get(cid.lower())
                if circuit is None and not unusable.has("circuit", cid):
                    table.refuse(
                        row,
                        "Circuit",
                        f"'{cid}' is not a circuit in the Circuits sheet",
                        hint="use a circuit id from the Circuits sheet, or leave it blank to have "
                        "`leakbudget split` place the load",
                    )
            key = keys[k]
            if key is BAD:
                key = table.text(row, "Appliance")
            if key is not None:
                key = key.lower()
                if key not in appliances and not unusable.has("appliance", key):
                    table.refuse(
                        row,
                        "Appliance",
                        f"'{key}' is not in the appliance catalogue",
                        hint="see `leakbudget appliances WORD`, or add your own row on an Appliances sheet",
                    )
            qty_value = quantities[k]
            if qty_value is BAD:
                qty_value = table.number(row, "Quantity", "dimensionless", positive=True)
            if qty_value is not None and not float(qty_value).is_integer():
                table.refuse(
                    row,
                    "Quantity",
                    f"'{table.text(row, 'Quantity')}' is not a whole number",
                    hint="type a whole number of identical units",
                )
            leakage = leakages[k]
            if leakage is BAD:
                leakage = table.number(row, "Leakage", "mA", plausible=STANDING_LEAKAGE_MA)
            y_cap = y_caps[k]
            if y_cap is BAD:
                y_cap = table.number(row, "Y capacitance", "nF")
            ins_r = resistances[k]
            if ins_r is BAD:
                ins_r = table.number(row, "Insulation resistance", "Mohm", positive=True)
            if y_cap is not None or ins_r is not None:
                _refuse_implausible_components(table, row, circuit, y_cap, ins_r)
            if (
                leakage is None
                and y_cap is None
                and ins_r is None
                and key is None
                and not table.failed(row, *LEAKAGE_FIGURES)
            ):
                table.refuse(
                    row,
                    "Appliance",
                    "the load has no leakage figure",
                    hint="give a Leakage, a Y capacitance or Insulation resistance, or an Appliance key",
                )
            system = circuit.system if circuit is not None else "three"
            leg_text = leg_texts[k]
            if leg_text is BAD:
                leg_text = table.text(row, "Leg")
            if leg_text is None:
                leg_text = _default_leg(appliances.get(key) if key else None, system)
            legs = legs_read.get((leg_text, system))
            if legs is None:
                try:
                    legs = parse_leg(leg_text, system)
                except ValueError as exc:
                    legs = str(exc)
                legs_read[(leg_text, system)] = legs
            if isinstance(legs, str):
                table.refuse(row, "Leg", legs)
                legs = ()
            power, current = powers[k], currents[k]
            if power is BAD:
                power = table.number(row, "Power", "W")
            if current is BAD:
                current = table.number(row, "Current", "A")
            room, stay, note = rooms[k], stays[k], notes[k]
            if room is BAD:
                room = table.text(row, "Room")
            if stay is BAD:
                stay = table.flag(row, "Stays")
            if note is BAD:
                note = table.text(row, "Note")
            waveform, model, bond, group = waveforms[k], models[k], bonds[k], groups[k]
            if waveform is BAD:
                waveform = table.choice(row, "Waveform", cat.WAVEFORMS)
            if model is BAD:
                model = table.text(row, "Model")
            device_id = (
                _protected_by(table, row, shared, board_level=False, unusable=unusable) if devices_named else None
            )
            if bond is BAD:
                bond = table.flag(row, "Neutral-earth bond")
            connection = connections[k]
            connection = _connection(table, row) if connection is not None else None
            if group is BAD:
                group = table.text(row, "Group")
            load = Load(
                name=name or "",
                circuit_id=circuit.circuit_id if circuit else None,
                appliance_key=key,
                quantity=int(qty_value) if qty_value is not None else 1,
                leakage_ma=leakage,
                y_capacitance_nf=y_cap,
                insulation_resistance_mohm=ins_r,
                power_w=power,
                current_a=current,
                leg=legs,
                leg_text="-".join(legs),
                room=room,
                stays=bool(stay),
                note=note,
                row=row[0],
                waveform=waveform,
                model=model,
                protected_by=device_id,
                neutral_earth_bond=bond,
                connection=connection,
                group=group,
            )
            if not table.failed(row):
                loads.append(load)
        except WorkbookError as exc:  # a problem the row's own checks raised
            table.record(exc)
    return loads


def _connection(table: RawTable, row: Row) -> str | None:
    """The Connection cell as "plug" or "fixed" (hard-wired), or None when blank."""
    text = table.text(row, "Connection")
    if text is None:
        return None
    word = CONNECTION_WORDS.get(text.strip().lower().replace("_", "-").replace(" ", "-"))
    if word is None:
        table.refuse(row, "Connection", f"'{text}' is not plug or hard-wired", hint="type plug or hard-wired")
    return word


def _refuse_implausible_components(
    table: RawTable, row: Row, circuit: Circuit | None, y_cap_nf: float | None, resistance_mohm: float | None
) -> None:
    """Refuse a Y capacitance or insulation resistance whose leakage at the circuit's supply (IEC 60038 230 V
    50 Hz for a load not yet placed) is beyond a believable standing leakage per unit."""
    v, f = (circuit.voltage_v, circuit.frequency_hz) if circuit is not None else IEC_SUPPLY
    checks = (
        (
            "Y capacitance",
            y_cap_nf,
            lambda: capacitive_current_ma(y_cap_nf, v, f),
            "check the unit: bare numbers are taken in nF (type '4700 pF' or '4.7 nF')",
        ),
        (
            "Insulation resistance",
            resistance_mohm,
            lambda: resistive_current_ma(resistance_mohm, v),
            "check the unit: bare numbers are taken in megohms (type '500 kohm' or '2 Mohm'); if it was measured, "
            "the insulation has failed: have the appliance repaired",
        ),
    )
    for column, value, current, hint in checks:
        if value is None:
            continue
        implied_ma = float(current())
        problem = STANDING_LEAKAGE_MA.problem(implied_ma)
        if problem is not None:
            table.refuse(
                row,
                column,
                f"'{table.text(row, column)}' per unit would leak {implied_ma:.3g} mA at {v:g} V {f:g} Hz, {problem}",
                hint=hint,
            )


def _user_catalogue(
    grids: SheetGrids, path: Path, problems: Problems, unusable: Unusable
) -> tuple[cat.Catalogue, list[str]]:
    """The built-in catalogue with the workbook's Appliances and Cables rows; every bad row is recorded."""
    catalogue = cat.built_in()
    warnings: list[str] = []
    appliances: list[cat.Appliance] = []
    cables: list[cat.Cable] = []
    for spec, kind in ((APPLIANCES, "appliance"), (CABLES, "cable")):
        table = _table(grids, spec, path, problems)
        if table is None:
            if _find_quietly(grids, spec) is not None:
                unusable.whole.add(kind)
            continue
        origin = f"your sheet '{table.sheet}'"
        if kind == "appliance":
            appliances, unusable.appliances = _rows_apart(
                table, APPLIANCES, partial(cat.appliances_from_table, origin_prefix=origin), "Key"
            )
        else:
            cables, unusable.cables = _rows_apart(
                table, CABLES, partial(cat.cables_from_table, origin_prefix=origin), "Key"
            )
    if appliances or cables:
        catalogue = catalogue.with_user_rows(appliances, cables)
        for key in catalogue.overridden:
            warnings.append(f"your catalogue row '{key}' replaces the built-in row of the same key")
    return catalogue, warnings


def _find_quietly(grids: Mapping[str, SheetGrid], spec: Sheet) -> str | None:
    """The name of the sheet for ``spec``, if the workbook has one (without reading it)."""
    return next((name for name in grids if normalise(name) == normalise(spec.name)), None)


def read_project(path: str | Path, progress: Progress | None = None) -> Project:
    """Read and validate a workbook; raise :class:`~leakbudget.errors.WorkbookProblems` listing every problem
    found in every sheet (each bad cell once, the first :data:`~leakbudget.errors.PROBLEM_LIMIT` listed), or a
    :class:`WorkbookError` when the file itself cannot be read.

    ``progress`` (see :mod:`leakbudget.progress`) hears of the stage "Reading <file name>" in three steps: cells
    read, circuits validated, loads validated.
    """
    path = Path(path)
    stage = f"Reading {path.name}"
    report = (lambda done: progress(stage, done, 3)) if progress is not None else (lambda done: None)
    report(0)
    grids = open_grids(path)
    report(1)
    problems = Problems(path)
    unusable = Unusable()
    settings, warnings = read_settings(_table(grids, SETTINGS, path, problems))
    catalogue, catalogue_warnings = _user_catalogue(grids, path, problems, unusable)
    warnings += catalogue_warnings
    circuits_table = _table(grids, CIRCUITS, path, problems)
    loads_table = _table(grids, LOADS, path, problems)
    defaults_used: list[str] = []
    protection_table = _table(grids, PROTECTION, path, problems)
    if protection_table is None and _find_quietly(grids, PROTECTION) is not None:
        unusable.whole.add("device")
    shared = read_protection(protection_table, unusable)
    circuits: list[Circuit] = []
    if circuits_table is not None:
        circuits = read_circuits(circuits_table, settings, catalogue, defaults_used, shared, unusable)
    else:
        unusable.whole.add("circuit")
    report(2)
    loads: list[Load] = []
    if loads_table is not None:
        loads = read_loads(loads_table, circuits, catalogue, shared, unusable)
        _link_load_devices(protection_table, shared, circuits, loads_table, loads, unusable)
    for table in (t for t in (circuits_table, loads_table, protection_table) if t is not None):
        for former, current in table.renamed.items():
            warnings.append(
                f"{path.name}, sheet '{table.sheet}': the column '{former}' is now called '{current}' and was read "
                f"as such; rename its header to '{current}'"
            )
    report(3)
    readings_table = _table(grids, READINGS, path, problems)
    readings = read_readings(readings_table, circuits, defaults_used, unusable.has) if readings_table else []
    for key in sorted(settings.extra):
        if key not in KNOWN_EXTRA_SETTINGS:
            warnings.append(f"the setting '{key}' is not one leakbudget knows; it was ignored")
    locations_table = _table(grids, LOCATIONS, path, problems)
    location_rows: list[LocationRow] = []
    if locations_table is not None:
        origin = f"your sheet '{locations_table.sheet}'"
        location_rows, _ = _rows_apart(
            locations_table, LOCATIONS, partial(rows_from_table, origin_prefix=origin), "Room name"
        )
    problems.raise_if_any(grids.names)
    return Project(
        path,
        circuits,
        loads,
        settings,
        catalogue,
        warnings,
        defaults_used,
        location_rows,
        readings,
        list(shared.values()),
    )


# Settings read by later stages (planner, risk, review); listed so they are not reported as unknown.
KNOWN_EXTRA_SETTINGS: set[str] = set()
