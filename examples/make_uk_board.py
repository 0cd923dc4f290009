"""Build the shipped UK board example: an invented flat at 4 Tanner's Row, Easterby, on a dual-RCD consumer unit.

Every street, room and person here is invented. Run `python examples/make_uk_board.py` to rebuild
`examples/tanners-row-flat.xlsx` after changing the scenario.
"""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from make_demo import write_example  # noqa: E402  (the one writer of example workbooks)

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
    sheets = [("Circuits", CIRCUITS), ("Loads", LOADS), ("Protection", PROTECTION), ("Settings", SETTINGS)]
    return write_example(path, ABOUT, sheets)


if __name__ == "__main__":
    print(build(HERE / "tanners-row-flat.xlsx"))
