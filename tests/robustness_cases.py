"""Bad inputs for the reader and how to judge the tool's answer; shared by tests/test_robustness.py (which
asserts on them) and benchmarks/robustness.py (which counts them).

- :data:`BAD_INPUTS`: named bad files, each with a fragment of the one-sentence error it must get.
- :func:`contract_sheets` and the damage operators: random workbooks made from the contract
  (leakbudget.input.schema), damaged at the cell level (before XlsxWriter writes them) or at the package level (the
  written bytes).
- :func:`judge`: run ``leakbudget check`` on a file the way a user would and list what went wrong: an exit code
  other than 0, 1 or 2, a traceback, the input changed, a lost cell of the user's, an error that is not one line
  naming the file.

All names, rooms and streets are invented.
"""

from __future__ import annotations

import copy
import io
import os
import random
import re
import shutil
import struct
import subprocess
import sys
import zipfile
from collections.abc import Callable
from dataclasses import dataclass
from datetime import date, datetime
from pathlib import Path
from typing import Any

from leakbudget.input.schema import CIRCUITS, LOADS
from leakbudget.xlsx.guard import MAX_SHEET_CELLS
from tests.conftest import basic_sheets, write_workbook

DATA = Path(__file__).parent / "data"
Sheets = dict[str, list[list[Any]]]

DEVICE_KEYS = ["gfci-a", "spgfci", "egfpd-30", "rcd-10", "rcd-30", "rcd-100", "rcd-300", "none"]
CABLE_KEYS = ["generic", "nm-b-14-2", "twin-and-earth-2.5", "flex-cord"]
APPLIANCE_KEYS = ["refrigerator", "dishwasher", "microwave", "kettle", "hair-dryer", "towel-warmer"]
ROOMS = ["Kitchen", "Küche", "Salle d'eau", "Garage, 3 Wren Lane", "Bathroom 2", "Laundry"]
LEGS = {"single": ["L1"], "split": ["L1", "L2", "L1-L2"], "three": ["L1", "L2", "L3", "L1-L3"]}

# Values a careless or hostile cell may hold.
ODD_VALUES: list[Any] = [
    None,
    "",
    "   ",
    True,
    False,
    datetime(2024, 3, 1, 12, 30),
    date(1999, 12, 31),
    -1,
    0,
    1e308,
    -0.0,
    4700,
    "5 kg",
    "0,75",
    "1.000,5",
    "nan",
    "inf",
    "-inf",
    "1e400",
    "3 A",
    "0.75 MA",
    "0.75 ma",
    "12000",
    "=1+2",
    "+A1",
    "-2+3",
    "@SUM(A1:A2)",
    '=HYPERLINK("http://example.invalid")',
    "<r>x</r>",
    "_x0000_",
    " K1 ",
    "k1",
    "GFCI-A ",
    " rcd-30",
    "L2",
    "L1-L2-L3",
    "Küche 1",
    "Ku\u0308che 1",
    "\u200bK1",
    "🔌",
    "x" * 300,
    "/etc/passwd",
    "../../secret.xlsx",
    "file:///tmp/leakbudget-never-opened",
    "\\\\server\\share\\x.xlsx",
]


@dataclass(frozen=True)
class BadInput:
    """One named bad file: how to make it in a folder, and a fragment of the error it must get."""

    id: str
    build: Callable[[Path], Path]
    message: str


# --------------------------------------------------------------------------------------------- building blocks


def workbook(folder: Path, sheets: Sheets | None = None, name: str = "plan.xlsx") -> Path:
    return write_workbook(folder / name, sheets if sheets is not None else basic_sheets())


def edited(sheets_edit: Callable[[Sheets], None], name: str = "plan.xlsx") -> Callable[[Path], Path]:
    """A builder: the basic workbook with ``sheets_edit`` applied to its rows before writing."""

    def build(folder: Path) -> Path:
        sheets = copy.deepcopy(basic_sheets())
        sheets_edit(sheets)
        return workbook(folder, sheets, name)

    return build


def file_with(data: bytes | Callable[[], bytes], name: str = "plan.xlsx") -> Callable[[Path], Path]:
    def build(folder: Path) -> Path:
        path = folder / name
        path.write_bytes(data() if callable(data) else data)
        return path

    return build


def copied(fixture: str, name: str) -> Callable[[Path], Path]:
    def build(folder: Path) -> Path:
        return Path(shutil.copyfile(DATA / fixture, folder / name))

    return build


def parts(path: Path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as archive:
        return {info.filename: archive.read(info) for info in archive.infolist()}


def write_parts(path: Path, entries: dict[str, bytes]) -> Path:
    path.write_bytes(zip_bytes(entries))
    return path


def with_part(
    edit: Callable[[bytes], bytes],
    part: str = "xl/worksheets/sheet2.xml",
    sheets: Callable[[Sheets], None] | None = None,
) -> Callable[[Path], Path]:
    """A builder: the basic workbook (Loads is sheet2.xml) with one part's bytes passed through ``edit``."""

    def build(folder: Path) -> Path:
        path = edited(sheets or (lambda s: None))(folder)
        entries = parts(path)
        entries[part] = edit(entries[part])
        return write_parts(path, entries)

    return build


def put(sheet: str, row: int, column: int, value: Any) -> Callable[[Sheets], None]:
    """A rows edit: set one cell (0-based row and column of the sheet's rows, header included)."""

    def edit(sheets: Sheets) -> None:
        rows = sheets[sheet]
        while len(rows) <= row:
            rows.append([])
        while len(rows[row]) <= column:
            rows[row].append(None)
        rows[row][column] = value

    return edit


def in_loads_row_2(cell_xml: bytes) -> Callable[[bytes], bytes]:
    """A part edit: replace Quantity (D2) of the Loads sheet by ``cell_xml``."""
    return lambda data: data.replace(b'<c r="D2"><v>1</v></c>', cell_xml)


def far_cell(ref: bytes = b"XFD1048576") -> Callable[[bytes], bytes]:
    return lambda data: data.replace(
        b"</sheetData>", b'<row r="1048576"><c r="' + ref + b'"><v>1</v></c></row></sheetData>'
    )


def entity_bomb(root: bytes) -> Callable[[bytes], bytes]:
    """A part edit: a billion-laughs DTD in front of the part, its entity used in a text node."""
    lol = b'<!ENTITY lol0 "lol">' + b"".join(
        b'<!ENTITY lol%d "%s">' % (i, (b"&lol%d;" % (i - 1)) * 10) for i in range(1, 10)
    )

    def edit(data: bytes) -> bytes:
        body = data.split(b"?>", 1)[1] if data.startswith(b"<?xml") else data
        body = body.replace(b"<t>Meter</t>", b"<t>&lol9;</t>", 1).replace(  # a shared string, or a cell's text
            b"</sheetData>", b'<row r="99"><c r="A99" t="inlineStr"><is><t>&lol9;</t></is></c></row></sheetData>', 1
        )
        return b'<?xml version="1.0"?><!DOCTYPE ' + root + b" [" + lol + b"]>" + body

    return edit


def zip_bytes(entries: dict[str, bytes | str]) -> bytes:
    """A zip package holding ``entries`` (name -> content), in order."""
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, content in entries.items():
            # a fixed time stamp: the same entries make the same bytes whenever they are made (replayable seeds)
            archive.writestr(zipfile.ZipInfo(name, (2026, 1, 5, 9, 30, 0)), content, zipfile.ZIP_DEFLATED)
    return buffer.getvalue()


def ods_file() -> bytes:
    """A zip whose first entry is an OpenDocument spreadsheet's mimetype (ODF 1.2 Part 3, 3.3)."""
    return zip_bytes(
        {"mimetype": "application/vnd.oasis.opendocument.spreadsheet", "content.xml": "<office:document-content/>"}
    )


def word_file() -> bytes:
    return zip_bytes({"[Content_Types].xml": "<Types/>", "word/document.xml": "<w:document/>"})


def half_of_a_workbook() -> bytes:
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        data = workbook(Path(tmp)).read_bytes()
    return data[: len(data) // 2]


def declared_size(part: str, size: int) -> Callable[[Path], Path]:
    """A builder: the basic workbook whose central directory declares ``size`` bytes for ``part``."""

    def build(folder: Path) -> Path:
        path = workbook(folder)
        data = bytearray(path.read_bytes())
        header = data.rindex(b"PK\x01\x02", 0, data.rindex(part.encode()))  # PKWARE APPNOTE 4.3.12
        struct.pack_into("<I", data, header + 24, size)  # "uncompressed size"
        path.write_bytes(bytes(data))
        return path

    return build


def padded(folder: Path) -> Path:
    path = workbook(folder)
    with zipfile.ZipFile(path, "a", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("xl/media/padding.bin", bytes(20 << 20))  # deflates about 1000:1
    return path


def _dup_row(sheet: str, row: int) -> Callable[[Sheets], None]:
    return lambda s: s[sheet].append(list(s[sheet][row]))


def _rename(old: str, new: str) -> Callable[[Sheets], None]:
    return lambda s: s.__setitem__(new, s.pop(old))


def _header_at_row_25(sheets: Sheets) -> None:
    sheets["Circuits"][0:0] = [["Panel schedule"]] + [[] for _ in range(23)]


def _both(*edits: Callable[[Sheets], None]) -> Callable[[Sheets], None]:
    def edit(sheets: Sheets) -> None:
        for e in edits:
            e(sheets)

    return edit


# basic_sheets(): Circuits rows 1-3 (header, K1 gfci-a 120 V 60 Hz, E1 rcd-30 230 V 50 Hz); Loads rows 1-3
# (header, Filter on K1 with 4.7 nF, Meter on E1: 2 x 0.75 mA). Columns: see tests/conftest.py.
BAD_INPUTS: list[BadInput] = [
    # not a workbook
    BadInput(
        "text-file",
        file_with(b"Circuit schedule for 3 Wren Lane\nK1 kitchen\n", "notes.xlsx"),
        "notes.xlsx: this is a text file (plain text), not an .xlsx workbook",
    ),
    BadInput(
        "csv-renamed",
        file_with(b"Circuit,Device,Voltage\nK1,gfci-a,120\n"),
        "plan.xlsx: this is a text file (comma-separated values, CSV), not an .xlsx workbook",
    ),
    BadInput("empty-file", file_with(b""), "plan.xlsx: the file is empty (0 bytes)"),
    BadInput("truncated-zip", file_with(half_of_a_workbook), "plan.xlsx: the file is cut short or damaged"),
    BadInput(
        "binary-noise",
        file_with(bytes(range(256)) * 4),
        "plan.xlsx: this is not an .xlsx workbook (it does not start like a zip package)",
    ),
    BadInput(
        "xls-renamed",
        copied("legacy.xls", "plan.xlsx"),
        "plan.xlsx: this is an Excel 97-2003 workbook (.xls), not an .xlsx workbook",
    ),
    BadInput(
        "xls-suffix",
        copied("legacy.xls", "plan.xls"),
        "plan.xls: leakbudget reads .xlsx and .ods workbooks, not '.xls'",
    ),
    BadInput("ods-renamed", file_with(ods_file), "plan.xlsx: this is an OpenDocument spreadsheet (.ods)"),
    BadInput(
        "word-renamed",
        file_with(word_file),
        "plan.xlsx: this zip file is not an .xlsx workbook (it has no xl/workbook.xml)",
    ),
    # password-protected or encrypted
    BadInput(
        "encrypted-xlsx",
        copied("encrypted.xlsx", "plan.xlsx"),
        "plan.xlsx: the workbook is password-protected (encrypted)",
    ),
    BadInput(
        "password-xls-renamed",
        copied("password.xls", "plan.xlsx"),
        "plan.xlsx: this is an Excel 97-2003 workbook (.xls), not an .xlsx workbook",
    ),
    # hostile packages
    BadInput(
        "entity-bomb-sheet",
        with_part(entity_bomb(b"worksheet")),
        "plan.xlsx: its part xl/worksheets/sheet2.xml declares a DTD or entities",
    ),
    BadInput(
        "entity-bomb-strings",
        with_part(entity_bomb(b"sst"), "xl/sharedStrings.xml"),
        "plan.xlsx: its part xl/sharedStrings.xml declares a DTD or entities",
    ),
    BadInput(
        "entity-bomb-workbook",
        with_part(entity_bomb(b"workbook"), "xl/workbook.xml"),
        "plan.xlsx: its part xl/workbook.xml declares a DTD or entities",
    ),
    BadInput("zip-ratio-bomb", padded, "padding.bin is compressed more than 200:1"),
    BadInput(
        "zip-declared-size-bomb",
        declared_size("xl/styles.xml", (1 << 30) + 1),
        "plan.xlsx: refused to open the workbook because it unpacks to more than 1024 MiB",
    ),
    BadInput(
        "far-cell",
        with_part(far_cell()),
        "plan.xlsx, sheet 'Loads': its cells reach row 1,048,576 and "
        f"column XFD, more than the {MAX_SHEET_CELLS:,} cells leakbudget reads",
    ),
    BadInput(
        "far-cell-char-reference",
        with_part(far_cell(b"X&#70;D1048576")),
        "sheet 'Loads': its cells reach row 1,048,576 and column XFD",
    ),
    BadInput(
        "damaged-sheet-xml",
        with_part(lambda d: d.replace(b"</sheetData>", b"</sheetDat>")),
        "plan.xlsx: sheet 'Loads' is damaged and cannot be read",
    ),
    # missing sheets and headers
    BadInput("missing-sheet", edited(lambda s: s.pop("Loads")), "plan.xlsx: the required sheet 'Loads' is missing"),
    BadInput(
        "two-sheets-one-name",
        edited(lambda s: s.__setitem__("loads ", s["Loads"])),
        "plan.xlsx: the sheets 'Loads' and 'loads ' both read as 'Loads'",
    ),
    BadInput(
        "header-too-low",
        edited(_header_at_row_25),
        "plan.xlsx, sheet 'Circuits': no header row with a 'Circuit' column in the first 20 rows",
    ),
    BadInput(
        "required-column-missing",
        edited(put("Circuits", 0, 1, "Breaker")),
        "plan.xlsx, sheet 'Circuits', row 1: the required column 'Device' is missing",
    ),
    # formulas, merged cells
    BadInput(
        "formula-without-result",
        with_part(in_loads_row_2(b'<c r="D2"><f>B7*2</f><v /></c>')),
        "plan.xlsx, sheet 'Loads', row 2, column 'Quantity', cell D2: the formula =B7*2 has no saved result",
    ),
    BadInput(
        "formula-error-value",
        with_part(in_loads_row_2(b'<c r="D2" t="e"><f>1/0</f><v>#DIV/0!</v></c>')),
        "plan.xlsx, sheet 'Loads', row 2, column 'Quantity', cell D2: the cell shows the error #DIV/0!",
    ),
    BadInput(
        "merged-number",
        with_part(
            lambda d: d.replace(
                b"</sheetData>", b'</sheetData><mergeCells count="1"><mergeCell ref="D2:D3"/></mergeCells>'
            ).replace(b'<c r="D3"><v>2</v></c>', b"")
        ),
        "plan.xlsx, sheet 'Loads', row 2, column 'Quantity', cell D2: the cells D2:D3 are merged",
    ),
    # wrong kinds of value
    BadInput("boolean-as-number", edited(put("Loads", 2, 4, True)), "cell E3: TRUE is a yes/no value, not a number"),
    BadInput(
        "date-as-number",
        edited(put("Circuits", 1, 2, datetime(2024, 1, 20))),
        "cell C2: '2024-01-20' is a date or time, not a quantity",
    ),
    BadInput(
        "decimal-comma",
        edited(put("Loads", 2, 4, "0,75")),
        "cell E3: '0,75' has a decimal comma or a misplaced thousands separator",
    ),
    BadInput(
        "nan-cell",
        with_part(in_loads_row_2(b'<c r="D2"><v>NaN</v></c>')),
        "cell D2: the cell holds NaN, which is not a number",
    ),
    BadInput("infinite-text", edited(put("Loads", 1, 5, "1e400 nF")), "cell F2: '1e400 nF' is not a finite number"),
    BadInput("zero-quantity", edited(put("Loads", 2, 3, 0)), "cell D3: '0' must be greater than zero"),
    BadInput("negative-capacitance", edited(put("Loads", 1, 5, -4.7)), "cell F2: '-4.7' must not be negative"),
    BadInput(
        "wrong-dimension-voltage",
        edited(put("Circuits", 1, 2, "120 A")),
        "cell C2: '120 A' is in A, which is not a voltage",
    ),
    BadInput(
        "lower-case-unit",
        edited(put("Loads", 2, 4, "0.75 ma")),
        "cell E3: '0.75 ma' is in ma, which is not a current; units are case-sensitive: write mA",
    ),
    # absurd magnitudes
    BadInput(
        "leakage-in-amps",
        edited(put("Loads", 2, 4, "3 A")),
        "cell E3: '3 A' is 3000 mA, not plausible for a standing leakage per unit",
    ),
    BadInput(
        "voltage-in-kV-typed-as-V",
        edited(put("Circuits", 1, 2, 0.23)),
        "cell C2: '0.23' is 0.23 V, not plausible for a low-voltage supply (50 to 1000 V",
    ),
    BadInput(
        "frequency-typo",
        edited(put("Circuits", 2, 3, 500)),
        "cell D3: '500' is 500 Hz, not plausible for a power supply",
    ),
    BadInput(
        "cable-length-in-mm",
        edited(put("Circuits", 1, 6, 12000)),
        "cell G2: '12000' is 12000 m, not plausible for a final circuit's cable run",
    ),
    BadInput(
        "y-capacitance-in-pF-typed-as-nF",
        edited(put("Loads", 1, 5, 4700)),
        "cell F2: '4700' per unit would leak 213 mA at 120 V 60 Hz, not plausible",
    ),
    BadInput(
        "insulation-fault",
        edited(put("Loads", 2, 6, "1 kohm")),
        "cell G3: '1 kohm' per unit would leak 230 mA at 230 V 50 Hz",
    ),
    BadInput(
        "setting-voltage-absurd",
        edited(lambda s: s.__setitem__("Settings", [["Setting", "Value"], ["Voltage", "2.3 kV"]])),
        "sheet 'Settings', row 2, column 'Value', cell B2: setting 'Voltage': '2.3 kV' is 2300 V",
    ),
    BadInput(
        "catalogue-row-in-amps",
        edited(lambda s: s.__setitem__("Appliances", [["Key", "Typical leakage"], ["site-heater", "2 A"]])),
        "sheet 'Appliances', row 2, column 'Typical leakage', cell B2: '2 A' is 2000 mA",
    ),
    BadInput(
        "cable-row-in-nF",
        edited(lambda s: s.__setitem__("Cables", [["Key", "Capacitance"], ["site-cable", "100 nF/m"]])),
        "sheet 'Cables', row 2, column 'Capacitance', cell B2: '100 nF/m' is 100000 pF/m",
    ),
    # cells the unit library's expression parser would evaluate: refused by the number reader, each named
    *[
        BadInput(f"number-{name}", edited(put(sheet, row, column, text)), f"cell {cell}: '{text}' {says}")
        for name, sheet, row, column, cell, text, says in (
            ("fraction", "Loads", 2, 4, "E3", "5/2 mA", "is a calculation or a range"),
            ("two-numbers", "Loads", 2, 4, "E3", "2 3 mA", "holds more than one number"),
            ("semicolon", "Loads", 2, 4, "E3", "2;3 mA", "holds more than one number"),
            ("trailing-number", "Loads", 2, 4, "E3", "2 mA 3", "holds more than one number"),
            ("pi", "Loads", 2, 4, "E3", "pi mA", "is not a number with a unit: it has no digits"),
            ("power", "Loads", 2, 4, "E3", "2**3 mA", "is a calculation or a range"),
            ("power-tower", "Loads", 2, 4, "E3", "9**9**9 mA", "is a calculation or a range"),
            ("subtraction", "Circuits", 1, 2, "C2", "240-10 V", "is a calculation or a range"),
            ("underflow", "Loads", 1, 5, "F2", "1e-400", "is too small to tell from zero"),
            ("percent-as-current", "Loads", 2, 4, "E3", "50 %", "is a percentage or share, which is never a current"),
            ("bound", "Loads", 2, 4, "E3", "<0.1 mA", "is a bound, not a value"),
            ("approximation", "Loads", 2, 4, "E3", "~0.4 mA", "is an approximation, not a value"),
            ("ambiguous-comma", "Circuits", 1, 6, "G2", "1,500 ft", "could be 1500 or 1.500"),
        )
    ],
    BadInput(
        "number-too-long",
        edited(put("Loads", 2, 4, "1" * 5000)),
        "cell E3: the text (5000 characters) is too long to be a number with a unit",
    ),
    BadInput(
        "many-problems-in-one-run",
        edited(
            _both(
                put("Circuits", 1, 2, "240-10 V"),
                put("Circuits", 2, 1, "gfci-5ma"),
                put("Loads", 1, 5, "5/2 nF"),
                put("Loads", 2, 4, "<0.1 mA"),
                lambda s: s.__setitem__("Settings", [["Setting", "Value"], ["Budget fraction", "30"]]),
            )
        ),
        "plan.xlsx: 5 problems; fix them all, then run again:",
    ),
    # duplicate ids and keys
    BadInput(
        "duplicate-circuit-odd-case-and-space",
        edited(put("Circuits", 2, 0, " k1 ")),
        "cell A3: the circuit id 'k1' is used twice (also row 2)",
    ),
    BadInput(
        "duplicate-cable-key",
        edited(lambda s: s.__setitem__("Cables", [["Key", "Capacitance"], ["site-cable", 120], ["Site-Cable ", 130]])),
        "sheet 'Cables', row 3, column 'Key', cell A3: the key 'site-cable' is used twice (also row 2)",
    ),
    BadInput(
        "duplicate-appliance-key",
        edited(
            lambda s: s.__setitem__(
                "Appliances", [["Key", "Typical leakage"], ["site-heater", 0.5], ["SITE-HEATER", 0.6]]
            )
        ),
        "sheet 'Appliances', row 3, column 'Key', cell A3: the key 'site-heater' is used twice",
    ),
    BadInput(
        "duplicate-column",
        edited(put("Loads", 0, 9, "leakage")),
        "sheet 'Loads', row 1, cell J1: the column 'leakage' appears twice (also column E)",
    ),
    # nothing of the user's is ever lost (the write-back refuses; the input is left as it was)
    BadInput(
        "own-sheet-named-like-a-result",
        edited(lambda s: s.__setitem__("Circuit results", [["My notes on the panel"], ["K1 feeds the island"]])),
        "sheet 'Circuit results' is a sheet of yours, not one leakbudget wrote",
    ),
    BadInput("zip-entry-with-dotdot", lambda folder: _with_entry(workbook(folder), "../outside.xml"), "'..' segment"),
    BadInput("zip-entry-absolute", lambda folder: _with_entry(workbook(folder), "/etc/owned.xml"), "absolute name"),
    BadInput("read-only-workbook", lambda folder: _chmod(workbook(folder), 0o444), "the file is read-only"),
    BadInput("hard-linked-workbook", lambda folder: _linked(workbook(folder)), "2 names (hard links)"),
]


def _with_entry(path: Path, name: str) -> Path:
    with zipfile.ZipFile(path, "a") as archive:
        archive.writestr(name, b"<x/>")
    return path


def _chmod(path: Path, mode: int) -> Path:
    path.chmod(mode)
    return path


def _linked(path: Path) -> Path:
    os.link(path, path.with_name("another-name.xlsx"))
    return path


# Cells an attacker or a careless user types, for the reader's worst parse time (benchmarks/robustness.py): each
# (text, the column's unit). Every one is refused or read in microseconds; pint's expression parser would compute
# the power tower 9**9**9 (a number of 369 million digits) and not answer.
ADVERSARIAL_CELLS: list[tuple[str, str]] = [
    ("9**9**9 mA", "mA"),
    ("9**9**9**9**9", "mA"),
    ("5/2 mA", "mA"),
    ("2 3 mA", "mA"),
    ("2;3 mA", "mA"),
    ("2 mA 3", "mA"),
    ("pi mA", "mA"),
    ("2**3 mA", "mA"),
    ("240-10 V", "V"),
    ("1e-400", "mA"),
    ("1e400 nF", "nF"),
    ("1e" + "9" * 90, "mA"),
    ("50 %", "mA"),
    ("<0.1 mA", "mA"),
    ("~0.4 mA", "mA"),
    ("30'", "m"),
    ("1,500 ft", "m"),
    ("1," * 49 + "0", "W"),
    ("(" * 99, "mA"),
    ("2 " * 50, "mA"),
    ("9" * 99, "mA"),
    ("1" * 100_000, "mA"),
    ("0.75 " + "m" * 94, "mA"),
    ("1e-3 megohms", "Mohm"),
]


def lock_file_cases() -> list[str]:
    """Lock-file names spreadsheet programs leave beside an open ``plan.xlsx`` (LibreOffice; Excel)."""
    return [".~lock.plan.xlsx#", "~$plan.xlsx"]


# --------------------------------------------------------------------------------------------- random workbooks


def contract_sheets(rng: random.Random) -> Sheets:
    """A random valid workbook made from the contract: Circuits and Loads with a random choice of optional
    columns (in random order, some blank columns between), an optional Settings sheet and a user sheet."""
    n_circuits = rng.randint(1, 6)
    systems = [rng.choice(list(LEGS)) for _ in range(n_circuits)]
    ids = [f"{rng.choice(['K', 'B', 'G', 'Küche-'])}{i + 1}" for i in range(n_circuits)]
    circuit_values = {
        "Circuit": lambda i: ids[i],
        "Device": lambda i: rng.choice(DEVICE_KEYS),
        "RCD type": lambda i: rng.choice(["A", "F", "b", None]),
        "Voltage": lambda i: rng.choice([120, 230, "240 V", None]),
        "Frequency": lambda i: rng.choice([50, 60, "60 Hz", None]),
        "System": lambda i: systems[i],
        "Rating": lambda i: rng.choice([15, 16, 20, "32 A", None]),
        "Cable length": lambda i: rng.choice([None, 12, 35.5, "40 ft", "18 m"]),
        "Cable": lambda i: rng.choice(CABLE_KEYS + [None]),
        "Rooms": lambda i: rng.choice(ROOMS),
        "Note": lambda i: rng.choice([None, "=not a formula", "spare way", "ñandú 🔌"]),
    }
    load_values = {
        "Load": lambda c: rng.choice(["Fridge", "Dishwasher", "Desk PC", "Heat pump", "Lámpara", "=1+1"]),
        "Circuit": lambda c: rng.choice([ids[c], ids[c].lower(), f" {ids[c]} "]),
        "Appliance": lambda c: rng.choice(APPLIANCE_KEYS + [None]),
        "Quantity": lambda c: rng.choice([1, 2, 3, "4", None]),
        "Leakage": lambda c: rng.choice(["0.4 mA", 0.75, "750 uA", 1.2, None]),
        "Y capacitance": lambda c: rng.choice(["4.7 nF", 2.2, "2200 pF", None]),
        "Insulation resistance": lambda c: rng.choice([None, 20, "50 Mohm"]),
        "Power": lambda c: rng.choice([None, 60, "1.2 kW"]),
        "Leg": lambda c: rng.choice(LEGS[systems[c]]),
        "Room": lambda c: rng.choice(ROOMS),
        "Stays": lambda c: rng.choice(["yes", "no", None]),
        "Note": lambda c: rng.choice([None, "+44 20 7946 0000", "@home"]),
    }
    sheets: Sheets = {
        "Circuits": _table(rng, CIRCUITS.columns, circuit_values, list(range(n_circuits))),
        "Loads": _table(
            rng,
            LOADS.columns,
            load_values,
            [rng.randrange(n_circuits) for _ in range(rng.randint(1, 12))],
            keep=("Leakage",),
        ),
    }
    if rng.random() < 0.4:
        sheets["Settings"] = [
            ["Setting", "Value"],
            ["Budget fraction", rng.choice(["30 %", 0.25])],
            ["Length unit", rng.choice(["m", "ft"])],
        ]
    if rng.random() < 0.4:
        sheets[rng.choice(["Notes", "Übersicht", "Sheet 3"])] = [["Anything", 1, "=SUM(B1)"], ["more", 2.5, None]]
    return sheets


def _table(
    rng: random.Random,
    columns: tuple,
    values: dict[str, Callable[[int], Any]],
    keys: list[int],
    keep: tuple[str, ...] = (),
) -> list[list[Any]]:
    chosen = [c.name for c in columns if c.required or c.name in keep or rng.random() < 0.6]
    rng.shuffle(chosen)
    header: list[Any] = []
    for name in chosen:
        if rng.random() < 0.15:
            header.append(None)  # a blank column between headers
        header.append(rng.choice([name, name.upper(), f" {name.lower()} ", name.replace(" ", "_")]))
    rows = [header]
    for key in keys:
        row: list[Any] = []
        for cell in header:
            name = next((c.name for c in columns if cell is not None and _same(c.name, cell)), None)
            row.append(values[name](key) if name in values else None)
        rows.append(row)
    return rows


def _same(a: str, b: str) -> bool:
    from leakbudget.input.schema import normalise

    return normalise(a) == normalise(b)


def damage_cell(sheets: Sheets, rng: random.Random) -> None:
    """Put an odd value in a random cell of a random sheet (header row included)."""
    name = rng.choice(list(sheets))
    rows = sheets[name]
    i = rng.randrange(len(rows))
    width = max(len(rows[i]), 1)
    j = rng.randrange(width + 1)
    put(name, i, j, rng.choice(ODD_VALUES))(sheets)


def damage_rows(sheets: Sheets, rng: random.Random) -> None:
    """Delete, duplicate or blank a row, or push the table down under a title block."""
    name = rng.choice(list(sheets))
    rows = sheets[name]
    i = rng.randrange(len(rows))
    choice = rng.randrange(4)
    if choice == 0 and len(rows) > 1:
        del rows[i]
    elif choice == 1:
        rows.insert(i, list(rows[i]))
    elif choice == 2:
        rows[i] = [None] * len(rows[i])
    else:
        rows[0:0] = [["Invented panel schedule, 3 Wren Lane"]] + [[] for _ in range(rng.randint(0, 22))]


def damage_sheets(sheets: Sheets, rng: random.Random) -> None:
    """Drop, rename (odd case, spaces, look-alike) or add a sheet."""
    name = rng.choice(list(sheets))
    choice = rng.randrange(3)
    if choice == 0 and len(sheets) > 1:
        sheets.pop(name)
    elif choice == 1:
        new = rng.choice([name.upper(), f" {name.lower()}", name + "s", name.replace("s", "ß")])[:31].strip() or "X"
        if new not in sheets:
            sheets[new] = sheets.pop(name)
    else:
        sheets.setdefault("Extra " + str(rng.randrange(99)), [[rng.choice(ODD_VALUES)]])


CELL_DAMAGE: dict[str, Callable[[Sheets, random.Random], None]] = {
    "cell": damage_cell,
    "rows": damage_rows,
    "sheets": damage_sheets,
}


def _sheet_parts(entries: dict[str, bytes]) -> list[str]:
    return sorted(n for n in entries if n.startswith("xl/worksheets/") and n.endswith(".xml"))


def _edit_a_sheet(entries: dict[str, bytes], rng: random.Random, edit: Callable[[bytes], bytes]) -> None:
    names = _sheet_parts(entries)
    if names:
        name = rng.choice(names)
        entries[name] = edit(entries[name])


def damage_package(data: bytes, rng: random.Random) -> bytes:
    """One random package-level damage: truncation, flipped bytes, a dropped or garbled part, a DTD, a far
    cell, a formula without result, an error value, NaN, a merge, junk appended."""
    choice = rng.randrange(11)
    if choice == 0:
        return data[: rng.randrange(len(data))]
    if choice == 1:
        out = bytearray(data)
        for _ in range(rng.randint(1, 8)):
            out[rng.randrange(len(out))] = rng.randrange(256)
        return bytes(out)
    if choice == 2:
        return data + bytes(rng.randrange(256) for _ in range(rng.randint(1, 64)))
    with zipfile.ZipFile(io.BytesIO(data)) as archive:
        entries = {info.filename: archive.read(info) for info in archive.infolist()}
    name = rng.choice(sorted(entries))
    if choice == 3:
        entries.pop(name)
    elif choice == 4:
        entries[name] = entries[name][: rng.randrange(len(entries[name]) + 1)]
    elif choice == 5:
        entries[name] = entity_bomb(b"x")(entries[name]) if entries[name].lstrip().startswith(b"<") else b"<!DOCTYPE x>"
    elif choice == 6:
        ref = rng.choice([b"XFD1048576", b"A1048576", b"XFD1", b"Z5000", b"AAA100"])
        _edit_a_sheet(entries, rng, far_cell(ref))
    elif choice == 7:
        cell = rng.choice([b"<f>A1*2</f><v />", b"<f>A1*2</f>", b'<f t="shared" si="0"/>'])
        _edit_a_sheet(entries, rng, lambda d: re.sub(rb"<v>[^<]*</v>", cell, d, count=1))
    elif choice == 8:
        value = rng.choice([b"#DIV/0!", b"#N/A", b"#REF!"])
        _edit_a_sheet(
            entries,
            rng,
            lambda d: re.sub(
                rb'(<c r="[A-Z]+[0-9]+")( s="[0-9]+")?( t="[a-zA-Z]+")?>'
                rb"<v>[^<]*</v>",
                rb'\1\2 t="e"><v>' + value + b"</v>",
                d,
                count=1,
            ),
        )
    elif choice == 9:
        value = rng.choice([b"NaN", b"INF", b"-inf", b"1e999", b"0x10", b""])
        _edit_a_sheet(entries, rng, lambda d: d.replace(b"<v>1</v>", b"<v>" + value + b"</v>", 1))
    else:
        ref = rng.choice([b"A2:A3", b"B2:B4", b"D2:D3", b"E2:F3", b"A1:B1", b"C1:C9"])
        _edit_a_sheet(
            entries,
            rng,
            lambda d: d.replace(
                b"</sheetData>", b'</sheetData><mergeCells count="1"><mergeCell ref="' + ref + b'"/></mergeCells>', 1
            ),
        )
    return zip_bytes(entries)


def damaged_workbook(folder: Path, seed: int, cell_damage: int, package_damage: int, name: str = "plan.xlsx") -> Path:
    """A contract workbook made from ``seed`` with that many cell-level and package-level damages."""
    rng = random.Random(seed)
    sheets = contract_sheets(rng)
    for _ in range(cell_damage):
        CELL_DAMAGE[rng.choice(sorted(CELL_DAMAGE))](sheets, rng)
    path = write_workbook(folder / name, sheets)
    data = path.read_bytes()
    for _ in range(package_damage):
        try:
            data = damage_package(data, rng)
        except Exception:  # an earlier damage broke the zip (any of zipfile's errors): truncate instead
            data = data[: rng.randrange(len(data) + 1)]
    path.write_bytes(data)
    return path


# --------------------------------------------------------------------------------------------- judging

ROOT = Path(__file__).resolve().parents[1]

# Runs leakbudget in a child process and reports the child's own peak resident memory: VmHWM of
# /proc/self/status (Linux, proc(5)); getrusage's maxrss would include the parent's memory at fork time.
CHILD = """
import re, sys
from leakbudget.cli.app import main
sys.argv = ["leakbudget", *sys.argv[1:]]
try:
    main()
finally:
    peak = re.search(r"VmHWM:\\s+(\\d+) kB", open("/proc/self/status").read()).group(1)
    sys.stderr.write(f"\\nmaxrss_kb={peak}\\n")
"""


def run_child(*args: str, timeout: float = 120) -> tuple[int, str, str, int]:
    """(exit code, stdout, stderr without the memory line, peak memory [kB]) of ``leakbudget ARGS``."""
    done = subprocess.run(
        [sys.executable, "-c", CHILD, *args],
        capture_output=True,
        text=True,
        timeout=timeout,
        cwd=ROOT,
        env={**os.environ, "PYTHONPATH": str(ROOT)},
    )
    memory = int(re.search(r"maxrss_kb=(\d+)", done.stderr).group(1))
    return done.returncode, done.stdout, re.sub(r"\nmaxrss_kb=\d+\n", "", done.stderr), memory


def million_formatted_rows(folder: Path) -> Path:
    """The basic workbook with 1 000 000 rows of formatted empty cells below the loads, in the form XlsxWriter
    writes for ``write_blank`` with a format (``<c r="A4" s="1"/>``); spliced here, XlsxWriter itself takes 14 s."""
    path = workbook(folder, name="formatted.xlsx")
    entries = parts(path)
    rows = b"".join(
        b'<row r="%d"><c r="A%d" s="1"/><c r="B%d" s="1"/><c r="C%d" s="1"/></row>' % (i, i, i, i)
        for i in range(4, 1_000_004)
    )
    entries["xl/worksheets/sheet2.xml"] = entries["xl/worksheets/sheet2.xml"].replace(
        b"</sheetData>", rows + b"</sheetData>"
    )
    return write_parts(path, entries)


@dataclass
class Verdict:
    exit_code: int | None
    output: str
    problems: list[str]

    @property
    def handled(self) -> bool:
        return not self.problems


def judge(path: Path, out: Path | None = None, expected: str | None = None) -> Verdict:
    """Run ``leakbudget check PATH [--out OUT]`` in-process and list what a user would call a failure.

    ``expected``: a fragment of the error the input must get (exit code 2). Without ``out`` a successful run
    writes into ``path``; its cells are then compared with the backup the run kept.
    """
    import os

    from typer.testing import CliRunner

    from leakbudget.cli.app import app
    from leakbudget.xlsx.files import backup_path

    folder_before = sorted(p.name for p in path.parent.iterdir())
    before = path.read_bytes()
    mtime = os.stat(path).st_mtime_ns
    args = ["check", str(path)] + (["--out", str(out)] if out is not None else [])
    result = CliRunner().invoke(app, args)
    problems: list[str] = []
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        problems.append(f"unhandled {type(result.exception).__name__}: {result.exception}")
    if "Traceback" in result.output:
        problems.append("a traceback was printed")
    if result.exit_code not in (0, 1, 2):
        problems.append(f"exit code {result.exit_code}")
    if (out is not None or result.exit_code == 2) and (
        path.read_bytes() != before or os.stat(path).st_mtime_ns != mtime
    ):
        problems.append("the input file changed")
    if result.exit_code == 2:
        problems += _error_problems(result.output, path.name)
        if expected is not None and expected not in result.output:
            problems.append(f"expected {expected!r} in {result.output.strip()[:300]!r}")
        now = sorted(p.name for p in path.parent.iterdir())
        if now != folder_before:
            problems.append(f"files appeared beside the input: {sorted(set(now) - set(folder_before))}")
    elif result.exit_code in (0, 1) and not problems:
        if expected is not None:
            problems.append(f"accepted a bad input (exit {result.exit_code}), expected {expected!r}")
        problems += lost_cells(path if out is not None else backup_path(path), out if out is not None else path)
    return Verdict(result.exit_code, result.output, problems)


def _error_problems(output: str, name: str) -> list[str]:
    """What is wrong with the error text of an exit 2: it must be one sentence naming the file (``Error: NAME…``),
    or a heading ``Error: NAME: N problems; …:`` followed by one sentence a line, each naming the file, the last
    possibly ``- and K more (…).``"""
    lines = output.strip().splitlines()
    errors = [line for line in lines if line.startswith("Error: ")]
    shown = repr(output.strip()[:300])
    if len(errors) != 1 or not errors[0].startswith(f"Error: {name}"):
        return [f"not one error naming the file: {shown}"]
    at = lines.index(errors[0])
    if errors[0].endswith("."):
        return [] if at == len(lines) - 1 else [f"text after the error sentence: {shown}"]
    heading = re.fullmatch(rf"Error: {re.escape(name)}: (\d+) problems; fix them all, then run again:", errors[0])
    items = lines[at + 1 :]
    more = re.fullmatch(r"- and (\d+) more \(the first (\d+) are listed\)\.", items[-1]) if items else None
    sentences = items[:-1] if more else items
    if heading is None or len(sentences) < 2 and not more:
        return [f"not one error sentence nor a list of them: {shown}"]
    if int(heading.group(1)) != len(sentences) + (int(more.group(1)) if more else 0):
        return [f"the heading's count is not the list's: {shown}"]
    bad = [s for s in sentences if not (s.startswith(f"- {name}") and s.endswith("."))]
    return [f"a listed problem is not one sentence naming the file: {bad[0][:200]!r}"] if bad else []


def lost_cells(source: Path, written: Path) -> list[str]:
    """Every sheet of ``source`` must read the same in ``written``: the cells, for a sheet the reader's guard
    lets calamine read; the part's bytes, for one it would refuse (it is never read, only copied)."""
    from python_calamine import CalamineWorkbook

    from leakbudget.errors import LeakbudgetError
    from leakbudget.xlsx.guard import GuardedPackage

    problems = []
    guard = GuardedPackage(source)
    try:
        readable = []
        for name in guard.sheet_parts:
            try:
                guard.scan_sheet(name)
                readable.append(name)
            except LeakbudgetError:
                if parts(source)[guard.sheet_parts[name]] not in parts(written).values():
                    problems.append(f"sheet '{name}' (not readable) was not copied byte for byte")
    finally:
        guard.close()
    old = CalamineWorkbook.from_path(str(source))
    new = CalamineWorkbook.from_path(str(written))
    for name in readable:
        try:
            before = _grid(old, name)
        except Exception:  # a damaged sheet the check never reads: it must be copied byte for byte
            if parts(source)[guard.sheet_parts[name]] not in parts(written).values():
                problems.append(f"sheet '{name}' (damaged) was not copied byte for byte")
            continue
        if name not in new.sheet_names:
            problems.append(f"sheet '{name}' is missing from the output")
        elif before != _grid(new, name):
            problems.append(f"sheet '{name}' reads differently in the output")
    return problems


def _grid(book: Any, name: str) -> list[list[Any]]:
    import math

    grid = book.get_sheet_by_name(name).to_python(skip_empty_area=False)
    return [["nan" if isinstance(v, float) and math.isnan(v) else v for v in row] for row in grid]
