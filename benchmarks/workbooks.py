"""Invented workbooks of any size for the benchmarks: about one circuit per five loads, mixed input kinds.

Every name is invented. Values mix bare numbers and unit-bearing text the way real workbooks do.
"""

from __future__ import annotations

import random
from pathlib import Path

APPLIANCES = [
    "refrigerator",
    "kettle",
    "microwave",
    "dishwasher",
    "desktop-pc",
    "printer",
    "monitor",
    "washer-inverter",
    "hair-dryer",
    "towel-warmer",
    "outdoor-led-floodlight",
    "freezer",
    "coffee-machine",
    "network-gear",
    "display-fridge",
    "hf-ballast-luminaire",
]
ROOMS = ["Ward", "Kitchen", "Sluice", "Office", "Plant", "Corridor", "Lab", "Store"]


def make_workbook(path: Path, n_loads: int, seed: int = 7) -> Path:
    """Write a workbook with ``n_loads`` loads on about ``n_loads / 5`` circuits (230 V 50 Hz, 30 mA RCDs)."""
    import xlsxwriter

    rng = random.Random(seed)
    n_circuits = max(1, n_loads // 5)
    book = xlsxwriter.Workbook(str(path), {"constant_memory": True})
    circuits = book.add_worksheet("Circuits")
    header = ["Circuit", "Device", "Voltage", "Frequency", "System", "Rating", "Cable length", "Rooms", "Note"]
    circuits.write_row(0, 0, header)
    for i in range(n_circuits):
        room = f"{ROOMS[i % len(ROOMS)]} {i // len(ROOMS) + 1}"
        circuits.write_row(
            i + 1,
            0,
            [f"C{i + 1:06d}", "rcd-30", 230, 50, "single", 16, rng.randint(5, 60), room, "invented benchmark circuit"],
        )
    loads = book.add_worksheet("Loads")
    header = [
        "Load",
        "Circuit",
        "Appliance",
        "Quantity",
        "Leakage",
        "Y capacitance",
        "Power",
        "Leg",
        "Room",
        "Stays",
        "Note",
    ]
    loads.write_row(0, 0, header)
    for j in range(n_loads):
        c = j % n_circuits
        room = f"{ROOMS[c % len(ROOMS)]} {c // len(ROOMS) + 1}"
        kind = rng.random()
        leakage = f"{rng.choice([250, 400, 620, 750])} uA" if kind < 0.15 else None
        ycap = rng.choice(["2.2 nF", "4.7 nF", 3.3]) if 0.15 <= kind < 0.3 else None
        row = [
            f"Load {j + 1}",
            f"C{c + 1:06d}",
            rng.choice(APPLIANCES),
            rng.choice([1, 1, 1, 2]),
            leakage,
            ycap,
            rng.choice([60, 150, "1.2 kW", 2000]),
            "L1",
            room,
            "no",
            None,
        ]
        for k, v in enumerate(row):
            if v is None:
                continue
            if isinstance(v, str):
                loads.write_string(j + 1, k, v)
            else:
                loads.write_number(j + 1, k, v)
    settings = book.add_worksheet("Settings")
    settings.write_row(0, 0, ["Setting", "Value"])
    settings.write_row(1, 0, ["Basis", "typical"])
    book.close()
    return path
