"""The Readings sheet: one clamp reading of a circuit's residual current per row (reconciled by
:mod:`leakbudget.readings`)."""

from __future__ import annotations

from collections.abc import Callable
from datetime import date, datetime

from leakbudget.input.table import RawTable
from leakbudget.model import ALL_ON, CONDITION_WORDS, Circuit, Reading


def read_readings(
    table: RawTable,
    circuits: list[Circuit],
    defaults_used: list[str],
    unusable: Callable[[str, str], bool] | None = None,
) -> list[Reading]:
    """Parse the Readings sheet; every problem is a WorkbookError naming the cell (recorded, when the table
    collects problems). ``unusable("circuit", id)`` says a circuit id exists on a row that has a problem of its
    own, so a reading of it is not reported as naming an unknown circuit."""
    by_id = {c.circuit_id.lower(): c for c in circuits}
    readings: list[Reading] = []
    calibrating: dict[str, int] = {}
    defaulted: list[str] = []
    for row in table.rows:
        with table.reading(row):
            cid = table.text(row, "Circuit")
            circuit = by_id.get(cid.lower()) if cid else None
            if (
                circuit is None
                and not table.failed(row, "Circuit")
                and not (cid and unusable and unusable("circuit", cid))
            ):
                table.refuse(
                    row,
                    "Circuit",
                    f"'{cid or ''}' is not a circuit in the Circuits sheet",
                    hint="use a circuit id from the Circuits sheet",
                )
            value = table.number(row, "Reading", "mA")
            if value is None and not table.failed(row, "Reading"):
                table.refuse(row, "Reading", "the reading is blank", hint="type the clamp reading, e.g. '1.2 mA'")
            words = table.text(row, "Conditions")
            conditions = ALL_ON
            if words is None:
                if not table.failed(row, "Conditions"):
                    defaulted.append(str(row[0]))
            elif words.strip().lower() in CONDITION_WORDS:
                conditions = CONDITION_WORDS[words.strip().lower()]
            else:
                table.refuse(
                    row,
                    "Conditions",
                    f"'{words}' is not 'all on' or 'idle'",
                    hint="type 'all on' (every load running) or 'idle' (connected, not running)",
                )
            calibrate = bool(table.flag(row, "Calibrate"))
            if calibrate and conditions != ALL_ON:
                table.refuse(
                    row,
                    "Calibrate",
                    "only an 'all on' reading can calibrate a circuit",
                    hint="set Calibrate to no, or measure with every load running",
                )
            elif calibrate and circuit is not None and circuit.circuit_id in calibrating:
                table.refuse(
                    row,
                    "Calibrate",
                    f"circuit '{circuit.circuit_id}' is already calibrated by row {calibrating[circuit.circuit_id]}",
                    hint="mark one reading per circuit",
                )
            elif calibrate and circuit is not None:
                calibrating[circuit.circuit_id] = row[0]
            raw_date = table.raw(row, "Date")
            note = table.text(row, "Note")
            if table.failed(row) or circuit is None or value is None:
                continue
            readings.append(
                Reading(
                    circuit_id=circuit.circuit_id,
                    reading_ma=value,
                    conditions=conditions,
                    date=raw_date.date().isoformat()
                    if isinstance(raw_date, datetime)
                    else raw_date.isoformat()
                    if isinstance(raw_date, date)
                    else table.text(row, "Date"),
                    calibrate=calibrate,
                    note=note,
                    row=row[0],
                )
            )
    if defaulted:
        defaults_used.append(f"Readings conditions '{ALL_ON}' for row(s) {', '.join(defaulted)} (blank Conditions)")
    return readings
