"""Make the real-program .xlsx fixtures used by tests/test_xlsx_package.py.

Run from the worktree root:  python tests/data/make_fixtures.py
Needs LibreOffice (``soffice``) and Gnumeric (``ssconvert``) on PATH.

1. A source workbook is written with XlsxWriter (only as an input format): an invented two-sheet panel schedule
   with formulas and their cached values, comments, cell styles (bold, fill, border, number formats), data
   validation, conditional formatting, a global and a sheet-local defined name, merged cells, a PNG image and a
   column chart.
2. LibreOffice re-saves it (``soffice --headless --convert-to xlsx``) -> ``libreoffice.xlsx``; Gnumeric re-saves it
   (``ssconvert``) -> ``gnumeric.xlsx``. Every byte of these two files is the program's own output.
3. ``libreoffice_extension.xlsx`` is ``libreoffice.xlsx`` plus, by a zip-level edit, parts no library knows: a
   ``customXml/item1.xml`` part with its properties part, and an ``extLst`` element with a private extension at
   the end of the first worksheet.
The committed fixtures are the outputs; the source workbook is made in a temporary folder and not kept.

``python tests/data/make_fixtures.py ods`` makes only the OpenDocument fixtures used by tests/test_ods.py, each
LibreOffice's own conversion (``soffice --headless --convert-to ods``, LibreOffice 7.4 when they were made):
``libreoffice.ods`` from ``libreoffice.xlsx`` (the panel above: formulas, comments, merged cells, a chart and an
image), and ``alder-quay.ods`` from ``alder-quay.xlsx``, a copy of the shipped demo workbook
(``examples/alder-quay-remodel.xlsx``) kept here so that the pair stays consistent when the demo changes.
"""

from __future__ import annotations

import io
import shutil
import subprocess
import tempfile
import zipfile
from pathlib import Path

HERE = Path(__file__).resolve().parent

# Invented panel: (circuit, room, rating_a, cable_length_m, leakage_ma)
CIRCUITS = [
    ("K1", "Kitchen, 14 Alder Row", 20, 12.5, 0.85),
    ("K2", "Kitchen island", 20, 18.0, 1.40),
    ("B1", "Bathroom, upstairs", 16, 22.0, 0.30),
    ("L1", "Laundry", 20, 9.5, 1.10),
    ("G1", "Garage workbench", 16, 31.0, 0.65),
]
LOADS = [
    ("Dishwasher", "K1", 1, 0.75),
    ("Fridge", "K2", 1, 0.40),
    ("Towel rail", "B1", 2, 0.15),
    ("Washer", "L1", 1, 1.10),
]


def _png_bytes() -> bytes:
    """A 16 x 16 RGB gradient as PNG (matplotlib writes the file)."""
    import numpy as np
    from matplotlib import image

    ramp = np.linspace(0.0, 1.0, 16)
    rgb = np.stack([*np.meshgrid(ramp, ramp[::-1]), np.full((16, 16), 0.5)], axis=-1)
    buf = io.BytesIO()
    image.imsave(buf, rgb, format="png")
    return buf.getvalue()


def write_source(path: Path) -> None:
    """Write the source workbook (XlsxWriter) that the spreadsheet programs re-save."""
    import xlsxwriter

    wb = xlsxwriter.Workbook(str(path))
    bold = wb.add_format({"bold": True, "bg_color": "#DDEEFF", "border": 1})
    title = wb.add_format({"bold": True, "font_size": 14, "align": "center"})
    amps = wb.add_format({"num_format": '0 "A"'})
    metres = wb.add_format({"num_format": "0.0"})
    milli = wb.add_format({"num_format": "0.000", "italic": True})
    red = wb.add_format({"font_color": "#9C0006", "bg_color": "#FFC7CE"})

    ws = wb.add_worksheet("Circuits")
    ws.merge_range("A1:E1", "Panel P1, 14 Alder Row", title)
    header = ["Circuit", "Room", "Rating", "Cable length", "Leakage"]
    ws.write_row(1, 0, header, bold)
    for i, (cid, room, rating, length, leak) in enumerate(CIRCUITS, start=2):
        ws.write_string(i, 0, cid)
        ws.write_string(i, 1, room)
        ws.write_number(i, 2, rating, amps)
        ws.write_number(i, 3, length, metres)
        ws.write_number(i, 4, leak, milli)
    last = 2 + len(CIRCUITS)  # 0-based row of the totals
    ws.write_string(last, 0, "Total")
    total_length = sum(c[3] for c in CIRCUITS)
    total_leak = sum(c[4] for c in CIRCUITS)
    ws.write_formula(last, 3, f"=SUM(D3:D{last})", metres, total_length)
    ws.write_formula(last, 4, f"=SUM(E3:E{last})", milli, total_leak)
    ws.write_formula(last, 2, f'=COUNTIF(C3:C{last},">16")', None, sum(c[2] > 16 for c in CIRCUITS))
    ws.write_comment("E2", "Standing leakage per circuit, invented figures.")
    ws.data_validation(2, 2, last - 1, 2, {"validate": "list", "source": [10, 16, 20, 32]})
    ws.conditional_format(2, 4, last - 1, 4, {"type": "cell", "criteria": ">", "value": 1, "format": red})
    ws.set_column(1, 1, 24)
    ws.insert_image("G12", "badge.png", {"image_data": io.BytesIO(_png_bytes())})
    chart = wb.add_chart({"type": "column"})
    chart.add_series(
        {"name": "Leakage", "categories": ["Circuits", 2, 0, last - 1, 0], "values": ["Circuits", 2, 4, last - 1, 4]}
    )
    chart.set_title({"name": "Leakage per circuit"})
    ws.insert_chart("G2", chart)

    ls = wb.add_worksheet("Loads")
    ls.write_row(0, 0, ["Load", "Circuit", "Quantity", "Leakage", "Total leakage"], bold)
    for i, (name, cid, qty, leak) in enumerate(LOADS, start=1):
        ls.write_row(i, 0, [name, cid])
        ls.write_number(i, 2, qty)
        ls.write_number(i, 3, leak, milli)
        ls.write_formula(i, 4, f"=C{i + 1}*D{i + 1}", milli, qty * leak)
    ls.write_comment("A1", "One row per load.")

    wb.define_name("PanelLeakage", f"=Circuits!$E${last + 1}")
    wb.define_name("Loads!LoadRows", f"=Loads!$A$2:$E${len(LOADS) + 1}")
    wb.close()


def add_extension_parts(source: Path, target: Path) -> None:
    """Copy ``source`` adding a customXml part and a private ``extLst`` in the first worksheet (zip-level edit)."""
    ext = (
        b'<extLst><ext uri="{6F1D3C2A-0B5E-4C49-9E0B-4A1B2C3D4E5F}" '
        b'xmlns:lbx="urn:example:leakbudget-fixture"><lbx:note lbx:by="fixture">kept as is</lbx:note>'
        b"</ext></extLst>"
    )
    item = b'<?xml version="1.0" encoding="UTF-8"?>\n<panel xmlns="urn:example:panel"><ref>P1</ref></panel>\n'
    props = (
        b'<?xml version="1.0" encoding="UTF-8" standalone="no"?>\n<ds:datastoreItem '
        b'ds:itemID="{2A7B9C1D-3E4F-4A5B-8C6D-7E8F9A0B1C2D}" '
        b'xmlns:ds="http://schemas.openxmlformats.org/officeDocument/2006/customXml"/>\n'
    )
    item_rels = (
        b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships '
        b'xmlns="http://schemas.openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" '
        b'Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/customXmlProps" '
        b'Target="itemProps1.xml"/></Relationships>'
    )
    props_type = b"application/vnd.openxmlformats-officedocument.customXmlProperties+xml"
    with zipfile.ZipFile(source) as zin, zipfile.ZipFile(target, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == "xl/worksheets/sheet1.xml":
                data = data.replace(b"</worksheet>", ext + b"</worksheet>")
            elif info.filename == "[Content_Types].xml":
                data = data.replace(
                    b"</Types>",
                    b'<Override PartName="/customXml/itemProps1.xml" ContentType="' + props_type + b'"/></Types>',
                )
            zout.writestr(info, data)
        zout.writestr("customXml/item1.xml", item)
        zout.writestr("customXml/itemProps1.xml", props)
        zout.writestr("customXml/_rels/item1.xml.rels", item_rels)


def soffice_convert(source: Path, kind: str, outdir: Path, profile: Path) -> Path:
    """Convert ``source`` with LibreOffice (its own private profile, so no running instance interferes)."""
    subprocess.run(
        [
            "soffice",
            "--headless",
            f"-env:UserInstallation={profile.as_uri()}",
            "--convert-to",
            kind,
            "--outdir",
            str(outdir),
            str(source),
        ],
        check=True,
        capture_output=True,
        timeout=180,
    )
    return outdir / (source.stem + "." + kind.split(":")[0])


def make_ods() -> None:
    shutil.copyfile(HERE.parent.parent / "examples" / "alder-quay-remodel.xlsx", HERE / "alder-quay.xlsx")
    with tempfile.TemporaryDirectory() as tmp_name:
        tmp = Path(tmp_name)
        for name in ("libreoffice", "alder-quay"):
            shutil.copyfile(soffice_convert(HERE / f"{name}.xlsx", "ods", tmp, tmp / "profile"), HERE / f"{name}.ods")


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp_name:
        tmp = Path(tmp_name)
        src = tmp / "panel.xlsx"
        write_source(src)
        lo_dir = tmp / "lo"
        subprocess.run(
            [
                "soffice",
                "--headless",
                f"-env:UserInstallation=file://{tmp}/profile",
                "--convert-to",
                "xlsx",
                "--outdir",
                str(lo_dir),
                str(src),
            ],
            check=True,
        )
        shutil.copyfile(lo_dir / "panel.xlsx", HERE / "libreoffice.xlsx")
        subprocess.run(["ssconvert", str(src), str(HERE / "gnumeric.xlsx")], check=True)
        add_extension_parts(HERE / "libreoffice.xlsx", HERE / "libreoffice_extension.xlsx")


if __name__ == "__main__":
    import sys

    if sys.argv[1:] == ["ods"]:
        make_ods()
    else:
        main()
