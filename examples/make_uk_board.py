"""Build the shipped UK board example: an invented flat at 4 Tanner's Row, Easterby, on a dual-RCD consumer unit.

Every street, room and person here is invented. Run `python examples/make_uk_board.py` to rebuild
`examples/tanners-row-flat.xlsx` after changing the scenario.
"""

from __future__ import annotations

from pathlib import Path

import xlsxwriter

HERE = Path(__file__).resolve().parent

PROTECTION = [
    ["Id", "Device", "RCD type", "Upstream", "Rating", "Board", "System", "Circuit", "Note"],
    ["RCD1", "rcd-30", "A", None, 63, "Consumer unit", "single", None, "Left side of the dual-RCD board"],
    ["RCD2", "rcd-30", "A", None, 63, "Consumer unit", "single", None, "Right side"],
]

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
        "Protected by",
        "Purpose",
        "Note",
    ],
    ["C1", "none", None, 230, 50, "single", 32, 28, "twin-and-earth-2.5", "Kitchen", "RCD1", "sockets", None],
    ["C2", "none", None, 230, 50, "single", 32, 9, "twin-and-earth-6", "Kitchen", "RCD1", "dedicated", None],
    [
        "C3",
        "none",
        None,
        230,
        50,
        "single",
        32,
        42,
        "twin-and-earth-2.5",
        "Study, Bedroom",
        "RCD1",
        "sockets",
        None,
    ],
    [
        "C4",
        "none",
        None,
        230,
        50,
        "single",
        6,
        30,
        "twin-and-earth-2.5",
        "Kitchen, Lounge",
        "RCD1",
        "lighting",
        None,
    ],
    [
        "C5",
        "none",
        None,
        230,
        50,
        "single",
        6,
        30,
        "twin-and-earth-2.5",
        "Study, Bedroom",
        "RCD1",
        "lighting",
        None,
    ],
    ["C6", "none", None, 230, 50, "single", 32, 35, "twin-and-earth-2.5", "Lounge", "RCD2", "sockets", None],
    [
        "C7",
        "none",
        None,
        230,
        50,
        "single",
        16,
        12,
        "twin-and-earth-2.5",
        "Airing cupboard",
        "RCD2",
        "dedicated",
        None,
    ],
    [
        "C8",
        "rcd-30",
        "A",
        230,
        50,
        "single",
        50,
        14,
        "twin-and-earth-6",
        "Bathroom",
        None,
        "dedicated",
        "RCBO beside the RCDs",
    ],
]

# What each way of the board feeds (UK boards number their ways; the note says what each is).
NOTES = {
    "C1": "Kitchen ring",
    "C2": "Cooker: oven and hob",
    "C3": "Upstairs ring: study and bedroom",
    "C4": "Lights downstairs",
    "C5": "Lights upstairs",
    "C6": "Lounge ring",
    "C7": "Immersion heater",
}

LOADS = [
    ["Load", "Circuit", "Appliance", "Quantity", "Leakage", "Room", "Stays", "Power"],
    ["Washer", "C1", "washer-inverter", 1, None, "Kitchen", None],
    ["Dishwasher", "C1", "commercial-dishwasher", 1, "1.1 mA", "Kitchen", None],
    ["Fridge freezer", "C1", "refrigerator", 1, None, "Kitchen", None],
    ["Kettle", "C1", "kettle", 1, None, "Kitchen", None],
    ["Toaster", "C1", "toaster", 1, None, "Kitchen", None],
    ["Oven", "C2", "wall-oven", 1, None, "Kitchen", "yes"],
    ["Hob", "C2", "induction-hob", 1, None, "Kitchen", "yes"],
    ["Desk computer", "C3", "desktop-pc", 1, None, "Study", None],
    ["Monitor", "C3", "monitor", 1, None, "Study", None],
    ["Printer", "C3", "printer", 1, None, "Study", None],
    ["Router", "C3", "network-gear", 1, None, "Study", None],
    ["Downlights", "C4", "hf-ballast-luminaire", 4, None, "Lounge", "yes"],
    ["Bedroom lights", "C5", "hf-ballast-luminaire", 3, None, "Bedroom", "yes"],
    ["Television and box", "C6", "network-gear", 2, None, "Lounge", None],
    ["Lamps", "C6", None, 3, "0.05 mA", "Lounge", None],
    ["Immersion heater", "C7", "storage-water-heater", 1, None, "Airing cupboard", "yes"],
    ["Shower", "C8", "electric-shower", 1, None, "Bathroom", "yes", 8500],
]

SETTINGS = [
    ["Setting", "Value"],
    ["Code", "bs-7671"],
    ["Job", "Consumer unit check before a kitchen refit"],
    ["Site", "Flat 2, 4 Tanner's Row, Easterby"],
    ["Client", "Odile Varga"],
    ["Prepared by", "Bram Tessaro"],
]

ABOUT = [
    "Flat 2, 4 Tanner's Row, Easterby: dual-RCD consumer unit (invented example)",
    "Two 30 mA Type A RCDs share eight circuits; the shower has an RCBO of its own. 230 V 50 Hz, TN-C-S.",
    "Every name, street and reading in this workbook is invented for the leakbudget demo.",
]


def build(path: Path) -> Path:
    for row in CIRCUITS[1:]:
        row[-1] = row[-1] or NOTES.get(str(row[0]))
    book = xlsxwriter.Workbook(str(path))
    bold = book.add_format({"bold": True})
    about = book.add_worksheet("About")
    about.set_column(0, 0, 100)
    for i, line in enumerate(ABOUT):
        about.write_string(i, 0, line, bold if i == 0 else None)
    for name, rows in (("Circuits", CIRCUITS), ("Loads", LOADS), ("Protection", PROTECTION), ("Settings", SETTINGS)):
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


if __name__ == "__main__":
    print(build(HERE / "tanners-row-flat.xlsx"))
