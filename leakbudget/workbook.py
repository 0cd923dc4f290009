"""Read and validate the user's workbook (sheets Circuits, Loads, Settings, Appliances, Cables).

Reading uses python-calamine (fast, read-only; formulas give their cached values). Nothing here writes; the
result sheets are written by :mod:`leakbudget.xlsx_package`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from leakbudget import catalogue as cat
from leakbudget.devices import DEVICES, device
from leakbudget.errors import WorkbookError
from leakbudget.leakage import SYSTEMS, parse_leg
from leakbudget.model import Circuit, Load, Project
from leakbudget.progress import Progress
from leakbudget.provenance import Source
from leakbudget.locations import rows_from_table
from leakbudget.readings import read_readings
from leakbudget.schema import APPLIANCES, CABLES, CIRCUITS, LOADS, LOCATIONS, READINGS, SETTINGS, Sheet, normalise
from leakbudget.settings import (
    IEC_SUPPLY, MAX_PLAUSIBLE_LEAKAGE_MA, SPECS_BY_NAME, SUPPLY_SOURCES, US_SUPPLY, Settings,
)
from leakbudget.tables import RawTable
from leakbudget.units import UnitProblem

WORKBOOK_SUFFIXES = (".xlsx", ".xlsm")
RCD_TYPES = ("AC", "A", "F", "B")


def open_grids(path: Path) -> dict[str, list[list[Any]]]:
    """Read every sheet of the workbook as a grid of cell values, keyed by the sheet name as typed."""
    import python_calamine

    if not path.exists():
        raise WorkbookError("the file does not exist", path=path, hint="check the path")
    if path.is_dir():
        raise WorkbookError("this is a folder, not a workbook", path=path, hint="give the path of an .xlsx file")
    if path.suffix.lower() not in WORKBOOK_SUFFIXES:
        raise WorkbookError(
            f"leakbudget reads .xlsx workbooks, not '{path.suffix or 'no extension'}' files", path=path,
            hint="save it as an Excel 2007+ workbook (.xlsx) from your spreadsheet program",
        )
    try:
        book = python_calamine.CalamineWorkbook.from_path(str(path))
        return {name: book.get_sheet_by_name(name).to_python(skip_empty_area=False) for name in book.sheet_names}
    except python_calamine.PasswordError:
        raise WorkbookError("the workbook is password-protected or encrypted", path=path,
                            hint="save an unprotected copy and check that") from None
    except Exception as exc:  # calamine reports zip and XML damage with many exception types
        raise WorkbookError(f"this is not a readable .xlsx workbook ({type(exc).__name__})", path=path,
                            hint="open it in your spreadsheet program and save it again as .xlsx") from None


def _find_sheet(grids: dict[str, list[list[Any]]], spec: Sheet, path: Path) -> tuple[str, list[list[Any]]] | None:
    for name, grid in grids.items():
        if normalise(name) == normalise(spec.name):
            return name, grid
    if spec.required:
        raise WorkbookError(
            f"the required sheet '{spec.name}' is missing (sheets found: {', '.join(grids) or 'none'})", path=path,
            hint=f"add a sheet named '{spec.name}' ({spec.help}) or start from `leakbudget template`",
        )
    return None


def _table(grids: dict[str, list[list[Any]]], spec: Sheet, path: Path) -> RawTable | None:
    found = _find_sheet(grids, spec, path)
    if found is None:
        return None
    return RawTable.from_grid(path, found[0], found[1], spec)


def read_settings(table: RawTable | None) -> tuple[Settings, list[str]]:
    settings = Settings()
    warnings: list[str] = []
    if table is None:
        return settings, warnings
    seen: dict[str, int] = {}
    for row in table.rows:
        name = table.text(row, "Setting")
        if name is None:
            continue
        key = normalise(name)
        if key in seen:
            raise table.error(row, "Setting", f"the setting '{name}' is given twice (also row {seen[key]})",
                              hint="keep one row per setting")
        seen[key] = row[0]
        raw = table.raw(row, "Value")
        if key not in SPECS_BY_NAME:
            settings.extra[key] = raw
            continue
        if raw is None:
            continue
        try:
            settings.set(name, raw, f"row {row[0]}")
        except UnitProblem as exc:
            raise table.error(row, "Value", f"setting '{name}': {exc}",
                              hint=SPECS_BY_NAME[key].help) from None
    return settings, warnings


def _market_supply(market: str, settings: Settings) -> tuple[float, float, Source, bool]:
    """Voltage, frequency, their source, and whether a built-in default was used."""
    default_v, default_f = US_SUPPLY if market == "us" else IEC_SUPPLY
    v = settings["Voltage"]
    f = settings["Frequency"]
    if v is not None and f is not None:
        return v, f, settings.sources["Voltage"], False
    return (v or default_v, f or default_f, SUPPLY_SOURCES[market], True)


def read_circuits(table: RawTable, settings: Settings, catalogue: cat.Catalogue, defaults_used: list[str]
                  ) -> list[Circuit]:
    circuits: list[Circuit] = []
    seen: dict[str, int] = {}
    markets = [device(table.text(r, "Device") or "none").market
               for r in table.rows if (table.text(r, "Device") or "none").lower() in DEVICES]
    fallback_market = "iec" if markets.count("iec") > markets.count("us") else "us"
    defaulted: dict[str, list[str]] = {}
    default_cable = str(settings["Default cable"])
    if default_cable not in catalogue.cables:
        raise WorkbookError(f"setting 'Default cable': unknown cable key '{default_cable}'", path=table.path, sheet="Settings",
                            hint=f"use one of {', '.join(sorted(catalogue.cables))}")
    for row in table.rows:
        cid = table.text(row, "Circuit")
        if cid is None:
            raise table.error(row, "Circuit", "the circuit id is blank", hint="give every circuit a unique id")
        if cid.lower() in seen:
            raise table.error(row, "Circuit", f"the circuit id '{cid}' is used twice (also row {seen[cid.lower()]})",
                              hint="give every circuit a unique id")
        seen[cid.lower()] = row[0]
        dkey = table.text(row, "Device")
        if dkey is None:
            raise table.error(row, "Device", "the device is blank",
                              hint=f"type a device key ({', '.join(DEVICES)}) or 'none'")
        try:
            dev = device(dkey)
        except KeyError:
            raise table.error(row, "Device", f"'{dkey}' is not a known device key",
                              hint=f"use one of {', '.join(DEVICES)} (see `leakbudget devices`)") from None
        rcd_type = table.choice(row, "RCD type", RCD_TYPES)
        system = table.choice(row, "System", SYSTEMS, "single") or "single"
        market = dev.market if dev.protected else fallback_market
        v_default, f_default, supply_source, used_default = _market_supply(market, settings)
        v = table.number(row, "Voltage", "V", positive=True)
        f = table.number(row, "Frequency", "Hz", positive=True)
        if v is not None and f is not None:
            supply_source = Source.measured("Circuits sheet (your value)")
        elif v is None or f is None:
            parts = []
            if v is None:
                parts.append(f"{v_default:g} V")
            if f is None:
                parts.append(f"{f_default:g} Hz")
            label = f"{' '.join(parts)} ({'Settings sheet' if not used_default else supply_source})"
            defaulted.setdefault(label, []).append(cid)
        cable_key = (table.text(row, "Cable") or default_cable).lower()
        if cable_key not in catalogue.cables:
            raise table.error(row, "Cable", f"'{cable_key}' is not a known cable key",
                              hint=f"use one of {', '.join(sorted(catalogue.cables))} (see `leakbudget cables`)")
        try:
            length = table.number(row, "Cable length", settings.length_unit, "m")
        except WorkbookError:
            raise
        rooms_text = table.text(row, "Rooms")
        rooms = tuple(r.strip() for r in rooms_text.split(",") if r.strip()) if rooms_text else ()
        circuits.append(Circuit(
            circuit_id=cid, device=dev, rcd_type=rcd_type,
            voltage_v=v if v is not None else v_default,
            frequency_hz=f if f is not None else f_default,
            supply_source=supply_source, system=system,
            rating_a=table.number(row, "Rating", "A", positive=True),
            cable_length_m=length, cable_key=cable_key, rooms=rooms,
            note=table.text(row, "Note"), row=row[0], shared_neutral=bool(table.flag(row, "Shared neutral")),
        ))
    for label, ids in defaulted.items():
        shown = ", ".join(ids[:8]) + (f" and {len(ids) - 8} more" if len(ids) > 8 else "")
        defaults_used.append(f"supply {label} for {shown}")
    return circuits


def read_loads(table: RawTable, circuits: list[Circuit], catalogue: cat.Catalogue) -> list[Load]:
    by_id = {c.circuit_id.lower(): c for c in circuits}
    loads: list[Load] = []
    for row in table.rows:
        name = table.text(row, "Load")
        if name is None:
            raise table.error(row, "Load", "the load name is blank", hint="name every load")
        cid = table.text(row, "Circuit")
        circuit = None
        if cid is not None:
            circuit = by_id.get(cid.lower())
            if circuit is None:
                raise table.error(row, "Circuit", f"'{cid}' is not a circuit in the Circuits sheet",
                                  hint="use a circuit id from the Circuits sheet, or leave it blank to have "
                                       "`leakbudget split` place the load")
        key = table.text(row, "Appliance")
        if key is not None:
            key = key.lower()
            if key not in catalogue.appliances:
                raise table.error(row, "Appliance", f"'{key}' is not in the appliance catalogue",
                                  hint="see `leakbudget appliances WORD`, or add your own row on an Appliances sheet")
        qty_value = table.number(row, "Quantity", "dimensionless", positive=True)
        if qty_value is not None and not float(qty_value).is_integer():
            raise table.error(row, "Quantity", f"'{table.text(row, 'Quantity')}' is not a whole number",
                              hint="type a whole number of identical units")
        leakage = table.number(row, "Leakage", "mA")
        if leakage is not None and leakage > MAX_PLAUSIBLE_LEAKAGE_MA:
            raise table.error(row, "Leakage", f"{leakage:g} mA per unit is not a plausible standing leakage",
                              hint="check the unit (type '0.75 mA' or '750 uA'); if it was measured, the appliance "
                                   "is faulty: have it repaired before planning around it")
        y_cap = table.number(row, "Y capacitance", "nF")
        ins_r = table.number(row, "Insulation resistance", "Mohm", positive=True)
        if leakage is None and y_cap is None and ins_r is None and key is None:
            raise table.error(row, "Appliance", "the load has no leakage figure",
                              hint="give a Leakage, a Y capacitance or Insulation resistance, or an Appliance key")
        leg_text = table.text(row, "Leg") or "L1"
        system = circuit.system if circuit is not None else "three"
        try:
            legs = parse_leg(leg_text, system)
        except ValueError as exc:
            raise table.error(row, "Leg", str(exc)) from None
        loads.append(Load(
            name=name, circuit_id=circuit.circuit_id if circuit else None, appliance_key=key,
            quantity=int(qty_value) if qty_value is not None else 1,
            leakage_ma=leakage, y_capacitance_nf=y_cap, insulation_resistance_mohm=ins_r,
            power_w=table.number(row, "Power", "W"), current_a=table.number(row, "Current", "A"),
            leg=legs, leg_text="-".join(legs), room=table.text(row, "Room"),
            fixed=bool(table.flag(row, "Fixed")), note=table.text(row, "Note"), row=row[0],
            waveform=table.choice(row, "Waveform", cat.WAVEFORMS),
            model=table.text(row, "Model"),
        ))
    return loads


def read_project(path: str | Path, progress: Progress | None = None) -> Project:
    """Read and validate a workbook; raise :class:`WorkbookError` naming the first problem found.

    ``progress`` (see :mod:`leakbudget.progress`) hears of the stage "Reading <file name>" in three steps: cells
    read, circuits validated, loads validated.
    """
    path = Path(path)
    stage = f"Reading {path.name}"
    report = (lambda done: progress(stage, done, 3)) if progress is not None else (lambda done: None)
    report(0)
    grids = open_grids(path)
    report(1)
    settings, warnings = read_settings(_table(grids, SETTINGS, path))
    catalogue = cat.built_in()
    user_appliances = _table(grids, APPLIANCES, path)
    user_cables = _table(grids, CABLES, path)
    if user_appliances is not None or user_cables is not None:
        catalogue = catalogue.with_user_rows(
            cat.appliances_from_table(user_appliances, f"your sheet '{user_appliances.sheet}'")
            if user_appliances else [],
            cat.cables_from_table(user_cables, f"your sheet '{user_cables.sheet}'") if user_cables else [],
        )
        for key in catalogue.overridden:
            warnings.append(f"your catalogue row '{key}' replaces the built-in row of the same key")
    circuits_table = _table(grids, CIRCUITS, path)
    loads_table = _table(grids, LOADS, path)
    assert circuits_table is not None and loads_table is not None  # required sheets
    defaults_used: list[str] = []
    circuits = read_circuits(circuits_table, settings, catalogue, defaults_used)
    report(2)
    loads = read_loads(loads_table, circuits, catalogue)
    report(3)
    readings_table = _table(grids, READINGS, path)
    readings = read_readings(readings_table, circuits, defaults_used) if readings_table is not None else []
    for key in sorted(settings.extra):
        if key not in KNOWN_EXTRA_SETTINGS:
            warnings.append(f"the setting '{key}' is not one leakbudget knows; it was ignored")
    locations_table = _table(grids, LOCATIONS, path)
    location_rows = (rows_from_table(locations_table, f"your sheet '{locations_table.sheet}'")
                     if locations_table is not None else [])
    return Project(path, circuits, loads, settings, catalogue, warnings, defaults_used, location_rows,
                   readings)


# Settings read by later stages (planner, risk, review); listed so they are not reported as unknown.
KNOWN_EXTRA_SETTINGS: set[str] = set()
