"""A blank workbook to fill in: the contract's sheets and headers, instructions, and drop-down lists."""

from __future__ import annotations

from pathlib import Path

from leakbudget.about import CAUTION
from leakbudget.catalogue import WAVEFORMS, built_in
from leakbudget.devices import DEVICES
from leakbudget.errors import WorkbookError
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
)
from leakbudget.leakage import SYSTEMS
from leakbudget.locations import LOCATION_KINDS
from leakbudget.model import PHASES, PURPOSES
from leakbudget.settings import SETTING_SPECS
from leakbudget.workbook.read import RCD_TYPES

TEMPLATE_ROWS = 500  # rows that carry drop-down validation
LEGS = ("L1", "L2", "L3", "L1-L2", "L2-L3", "L3-L1")
INSTRUCTIONS = (
    "How to fill this workbook",
    "",
    "1. Circuits: one row per circuit. Device is a key from the drop-down (gfci-a = UL 943 Class A, rcd-30 = "
    "RCD 30 mA, none = unprotected). Voltage is line-to-neutral.",
    "2. Loads: one row per load or group of identical loads. Give a measured Leakage if you have one, else a Y "
    "capacitance or Insulation resistance, else an Appliance key from the catalogue.",
    "3. Values may be bare numbers in the column's unit (shown in the header comment) or text with a unit: "
    "'0.75 mA', '750 uA', '4.7 nF', '30 ft', '2.2 kW'.",
    "4. Settings (optional): supply defaults, budget fraction (default 0.30, BS 7671:2018 reg. 531.3.2), basis "
    "(typical or upper catalogue values), sum (arithmetic or phasor), length unit, default cable, load factor.",
    "5. Appliances and Cables (optional): your own catalogue rows; they add to the built-in ones and replace rows "
    "with the same key.",
    "6. Readings (optional): clamp readings of whole circuits (all loads on, or idle); check compares them with "
    "the estimate and, with Calibrate = yes, scales the circuit's catalogue values to match.",
    "6b. Protection (optional): one row per shared device: an RCD protecting several circuits of a board (give "
    "each of them its Id in the Circuits sheet's Protected by, and a single-pole circuit its Phase), a "
    "time-delayed RCD above others (name it as their Upstream), or a device inside one circuit, such as a GFCI "
    "receptacle (give its Circuit, and its Id in Protected by of the loads it protects). System: single for a "
    "two-pole device, three for a four-pole one on a three-phase board.",
    "6c. System of a circuit: single (line-neutral), split (US 120/240 V: two lines 180° apart), network "
    "(120/208 V: two lines of a three-phase wye, 120° apart, as in many apartment buildings fed from a "
    "three-phase service), three (all three lines).",
    "7. Run: leakbudget check THIS.xlsx   (results go to the sheets 'Circuit results' and 'Load results').",
    "8. Review against a wiring code: leakbudget review THIS.xlsx --code nec-2023 (or nec-2020, iec-60364, "
    "bs-7671). Locations (optional): room names the built-in table does not know, with the kind of location "
    "they are.",
    "",
    "Caution: " + CAUTION,
)


def _header(ws, book, sheet: Sheet, bold) -> None:  # noqa: ANN001
    for j, col in enumerate(sheet.columns):
        ws.write_string(0, j, col.name, bold)
        unit = f" Bare numbers are in {col.unit}." if col.unit else ""
        ws.write_comment(0, j, f"{col.help}{unit}{' Required.' if col.required else ''}")
        ws.set_column(j, j, max(12, len(col.name) + 4))
    ws.freeze_panes(1, 0)


def write_template(path: str | Path) -> Path:
    """Write a blank workbook at ``path``; refuse to overwrite an existing file."""
    import xlsxwriter

    path = Path(path)
    if path.suffix.lower() != ".xlsx":
        raise WorkbookError("the template must be an .xlsx file", path=path, hint="give a name ending in .xlsx")
    if path.exists():
        raise WorkbookError(
            "the file already exists; the template will not overwrite it", path=path, hint="choose a new file name"
        )
    catalogue = built_in()
    book = xlsxwriter.Workbook(str(path))
    bold = book.add_format({"bold": True})
    wrap = book.add_format({"text_wrap": True, "valign": "top"})
    info = book.add_worksheet("Instructions")
    info.set_column(0, 0, 110)
    for i, line in enumerate(INSTRUCTIONS):
        info.write_string(i, 0, line, bold if i == 0 else wrap)
    lists = {
        "Device": list(DEVICES),
        "Appliance": sorted(catalogue.appliances),
        "RCD type": list(RCD_TYPES),
        "Leg": list(LEGS),
        "System": list(SYSTEMS),
        "Fixed": ["yes", "no"],
        "Shared neutral": ["yes", "no"],
        "Neutral-earth bond": ["yes", "no"],
        "Connection": ["plug", "hard-wired"],
        "Waveform": list(WAVEFORMS),
        "Location kind": list(LOCATION_KINDS),
        "Cable": list(catalogue.cables),
        "Phase": list(PHASES),
        "Purpose": list(PURPOSES),
    }
    sheets = {}
    for spec in (CIRCUITS, LOADS, PROTECTION, SETTINGS, APPLIANCES, CABLES, LOCATIONS, READINGS):
        ws = book.add_worksheet(spec.name)
        _header(ws, book, spec, bold)
        sheets[spec.name] = ws
    settings = sheets[SETTINGS.name]
    settings.write_string(0, 2, "What it does", bold)
    settings.set_column(2, 2, 90)
    for i, s in enumerate(SETTING_SPECS, start=1):
        settings.write_string(i, 0, s.name)
        settings.write_string(i, 2, s.help)
    hidden = book.add_worksheet("Lists")
    for j, (name, values) in enumerate(lists.items()):
        hidden.write_string(0, j, name, bold)
        for i, v in enumerate(values, start=1):
            hidden.write_string(i, j, v)
        letter = chr(65 + j)
        book.define_name(
            f"lb_{name.replace(' ', '_').replace('-', '_').lower()}", f"=Lists!${letter}$2:${letter}${len(values) + 1}"
        )
    hidden.hide()
    ids = f"='{PROTECTION.name}'!$A$2:$A${TEMPLATE_ROWS + 1}"  # the Protection sheet's Id column
    for spec in (CIRCUITS, LOADS, PROTECTION, LOCATIONS):
        ws = sheets[spec.name]
        for j, col in enumerate(spec.columns):
            if col.name in ("Protected by", "Upstream"):
                ws.data_validation(
                    1,
                    j,
                    TEMPLATE_ROWS,
                    j,
                    {
                        "validate": "list",
                        "source": ids,
                        "error_type": "stop",
                        "error_message": f"Pick an Id from the Protection sheet ({col.help})",
                    },
                )
            elif col.name in lists:
                ws.data_validation(
                    1,
                    j,
                    TEMPLATE_ROWS,
                    j,
                    {
                        "validate": "list",
                        "source": f"=lb_{col.name.replace(' ', '_').replace('-', '_').lower()}",
                        "error_type": "warning" if col.name == "Appliance" else "stop",
                        "error_message": f"Pick a value from the list ({col.help})",
                    },
                )
    book.close()
    return path
