"""Build the shipped example workbook: an invented remodel at 12 Alder Quay, Wrenfield.

Every street, room and person here is invented. Run `python examples/make_demo.py` to rebuild
`examples/alder-quay-remodel.xlsx` after changing the scenario.
"""

from __future__ import annotations

from pathlib import Path

import xlsxwriter

HERE = Path(__file__).resolve().parent

CIRCUITS = [
    [
        "Circuit",
        "Device",
        "RCD type",
        "Voltage",
        "Frequency",
        "System",
        "Rating",
        "Cable length",
        "Cable",
        "Rooms",
        "Note",
    ],
    ["K-CTR1", "gfci-a", None, None, None, "single", 20, 45, "nm-b-12-2", "Kitchen", "Counter left of sink"],
    ["K-CTR2", "gfci-a", None, None, None, "single", 20, 55, "nm-b-12-2", "Kitchen", "Counter right of sink"],
    ["K-ISL", "gfci-a", None, None, None, "single", 20, 40, "nm-b-12-2", "Kitchen", "Island"],
    ["K-DW", "gfci-a", None, None, None, "single", 20, 30, "nm-b-12-2", "Kitchen", "Dishwasher and disposal"],
    ["K-RANGE", "gfci-a", None, None, None, "split", 50, 35, "nm-b-10-3", "Kitchen", "Range, 120/240 V"],
    ["L-WASH", "gfci-a", None, None, None, "single", 20, 40, "nm-b-12-2", "Laundry", None],
    ["L-DRY", "gfci-a", None, None, None, "split", 30, 40, "nm-b-10-3", "Laundry", "Dryer, 120/240 V"],
    ["B-MAIN", "gfci-a", None, None, None, "single", 20, 50, "nm-b-12-2", "Main bath, Guest bath", None],
    ["B-TUB", "gfci-a", None, None, None, "single", 20, 35, "nm-b-12-2", "Main bath", "Whirlpool tub"],
    ["G-BENCH", "gfci-a", None, None, None, "single", 20, 60, "nm-b-12-2", "Garage", "Workbench wall"],
    ["G-DOOR", "gfci-a", None, None, None, "single", 20, 70, "nm-b-12-2", "Garage", "Door opener and compressor"],
    ["P-OUT", "gfci-a", None, None, None, "single", 20, 120, "uf-b-12-2", "Patio", "Patio and pond"],
    ["P-GATE", "gfci-a", None, None, None, "single", 20, 80, "uf-b-12-2", "Patio", "Gate posts"],
    ["O-DESK", "none", None, None, None, "single", 15, 40, "nm-b-14-2", "Office", "Home office (no GFCI required)"],
]

LOADS = [
    [
        "Load",
        "Circuit",
        "Appliance",
        "Quantity",
        "Leakage",
        "Y capacitance",
        "Insulation resistance",
        "Power",
        "Current",
        "Leg",
        "Room",
        "Stays",
        "Note",
    ],
    [
        "Refrigerator",
        "K-CTR1",
        "refrigerator",
        1,
        "0.52 mA",
        None,
        None,
        None,
        3,
        None,
        "Kitchen",
        "yes",
        "Clamp reading by R. Okonjo, 2026-10-14",
    ],
    [
        "Microwave",
        "K-CTR1",
        "microwave",
        1,
        "0.62 mA",
        None,
        None,
        1100,
        None,
        None,
        "Kitchen",
        None,
        "Clamp reading by R. Okonjo, 2026-10-14",
    ],
    ["Ice maker", "K-CTR1", "ice-machine", 1, None, None, None, 200, None, None, "Kitchen", None, None],
    ["Wine cooler", "K-CTR1", "display-fridge", 1, None, None, None, 150, None, None, "Kitchen", None, None],
    ["Coffee machine", "K-CTR2", "coffee-machine", 1, None, None, None, 1200, None, None, "Kitchen", None, None],
    ["Stand mixer", "K-CTR2", "stand-mixer", 1, None, None, None, 500, None, None, "Kitchen", None, None],
    ["Kettle", "K-ISL", "kettle", 1, None, None, None, 1500, None, None, "Kitchen", None, None],
    ["Dishwasher", "K-DW", "dishwasher", 1, None, None, None, 1200, None, None, "Kitchen", "yes", None],
    ["Disposal", "K-DW", "garbage-disposal", 1, None, None, None, 600, None, None, "Kitchen", "yes", None],
    ["Range elements", "K-RANGE", "range-electric", 1, None, None, None, 8000, None, "L1-L2", "Kitchen", "yes", None],
    ["Range hood", "K-RANGE", "range-hood", 1, None, None, None, 200, None, "L2", "Kitchen", "yes", None],
    ["Washer", "L-WASH", "washer-inverter", 1, None, None, None, 1000, None, None, "Laundry", None, None],
    ["Laundry tub pump", "L-WASH", "laundry-tub-pump", 1, None, None, None, 300, None, None, "Laundry", None, None],
    ["Dryer", "L-DRY", "dryer", 1, None, None, None, 5600, None, "L1-L2", "Laundry", "yes", None],
    ["Hair dryer", "B-MAIN", "hair-dryer", 1, None, None, None, 1500, None, None, "Main bath", None, None],
    ["Towel warmer", "B-MAIN", "towel-warmer", 1, None, None, None, 100, None, None, "Main bath", "yes", None],
    ["Mirror demister", "B-MAIN", "mirror-demister", 2, None, None, None, 40, None, None, "Guest bath", None, None],
    ["Whirlpool pump", "B-TUB", "whirlpool-tub-pump", 1, None, None, None, 750, None, None, "Main bath", "yes", None],
    ["Chest freezer", "G-BENCH", "freezer", 1, None, None, None, 200, None, None, "Garage", None, None],
    ["Garage refrigerator", "G-BENCH", "refrigerator", 1, None, None, None, 150, None, None, "Garage", None, None],
    ["Beer fridge", "G-BENCH", "refrigerator", 1, None, None, None, 150, None, None, "Garage", None, None],
    ["Bench grinder", "G-BENCH", "bench-grinder", 1, None, None, None, 400, None, None, "Garage", None, None],
    ["Dehumidifier", "G-BENCH", "dehumidifier", 1, None, None, None, 300, None, None, "Garage", None, None],
    ["Garage door opener", "G-DOOR", "garage-door-opener", 1, None, None, None, 500, None, None, "Garage", "yes", None],
    ["Air compressor", "G-DOOR", "air-compressor", 1, None, None, None, 1200, None, None, "Garage", None, None],
    ["Floodlights", "P-OUT", "outdoor-led-floodlight", 5, None, None, None, 50, None, None, "Patio", "yes", None],
    ["Pond pump", "P-OUT", "pond-pump", 1, None, None, None, 250, None, None, "Patio", None, None],
    ["Fountain pump", "P-OUT", "pond-pump", 1, None, None, None, 100, None, None, "Patio", None, None],
    ["Post lamps", "P-GATE", "outdoor-led-driver", 1, None, None, None, 150, None, None, "Patio", "yes", None],
    ["Desktop computer", "O-DESK", "desktop-pc", 1, None, None, None, 300, None, None, "Office", None, None],
    ["Printer", "O-DESK", "printer", 1, None, None, None, 400, None, None, "Office", None, None],
    ["Second freezer", None, "freezer", 1, None, None, None, 200, None, None, "Garage", None, "New: not yet placed"],
]

# The garage refrigerator is the same model as the kitchen one: the kitchen unit's reading stands for it.
MODELS = {"Refrigerator": "FR-240", "Garage refrigerator": "FR-240"}
# The range and the dryer are connected four-wire, their bonding straps out (checked on site).
BONDS = {"Range elements": "no", "Dryer": "no"}

READINGS = [
    ["Circuit", "Reading", "Conditions", "Date", "Calibrate", "Note"],
    ["K-DW", "3.1 mA", "all on", "2026-10-14", None, "Dishwasher mid-cycle"],
    ["P-OUT", "2.4 mA", "all on", "2026-10-14", None, "Pond pump and lights running"],
    ["G-BENCH", "1.0 mA", "all on", "2026-10-15", "yes", "Everything plugged in and running"],
    ["L-WASH", "0.3 mA", "idle", "2026-10-15", None, "Washer door open, not running"],
]


def with_models(rows: list[list[object]]) -> list[list[object]]:
    """The Loads rows with the Model and Neutral-earth bond columns added."""
    return [rows[0] + ["Model", "Neutral-earth bond"]] + [
        row + [MODELS.get(str(row[0])), BONDS.get(str(row[0]))] for row in rows[1:]
    ]


SETTINGS = [
    ["Setting", "Value"],
    ["Voltage", 120],
    ["Frequency", 60],
    ["Budget fraction", 0.30],
    ["Basis", "typical"],
    ["Sum", "arithmetic"],
    ["Length unit", "ft"],
    ["Job", "Kitchen, laundry and bath remodel"],
    ["Site", "12 Alder Quay, Wrenfield"],
    ["Client", "The Ostrander family"],
    ["Prepared by", "Mara Quennell"],
]

ABOUT = [
    "12 Alder Quay, Wrenfield: kitchen, laundry and bath remodel (invented example)",
    "Designer: Mara Quennell. Client: the Ostrander family. Panel: 200 A, 120/240 V split phase.",
    "Every name, street and reading in this workbook is invented for the leakbudget demo.",
]


def write_example(path: Path, about: list[str], sheets: list[tuple[str, list[list[object]]]]) -> Path:
    """Write an example workbook: an About sheet of ``about`` lines, then each (name, rows) sheet, header bold."""
    book = xlsxwriter.Workbook(str(path))
    bold = book.add_format({"bold": True})
    cover = book.add_worksheet("About")
    cover.set_column(0, 0, 100)
    for i, line in enumerate(about):
        cover.write_string(i, 0, line, bold if i == 0 else None)
    for name, rows in sheets:
        ws = book.add_worksheet(name)
        for i, row in enumerate(rows):
            for j, value in enumerate(row):
                if value is None:
                    continue
                fmt = bold if i == 0 else None
                if isinstance(value, str):
                    ws.write_string(i, j, value, fmt)
                else:
                    ws.write_number(i, j, value, fmt)
        ws.freeze_panes(1, 0)
        ws.set_column(0, len(rows[0]) - 1, 16)
    book.close()
    return path


def build(path: Path) -> Path:
    return write_example(
        path,
        ABOUT,
        [("Circuits", CIRCUITS), ("Loads", with_models(LOADS)), ("Settings", SETTINGS), ("Readings", READINGS)],
    )


if __name__ == "__main__":
    print(build(HERE / "alder-quay-remodel.xlsx"))
