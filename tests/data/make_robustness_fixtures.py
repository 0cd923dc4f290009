"""Make the files tests/test_robustness.py feeds to the reader that no library here can write.

Run from the worktree root with a Python that has LibreOffice's UNO bridge (Debian: python3-uno):
    /usr/bin/python3 tests/data/make_robustness_fixtures.py
Needs LibreOffice (``soffice``) on PATH.

1. ``legacy.xls``: an invented two-sheet panel schedule (the contract's Circuits and Loads) saved by LibreOffice
   itself: soffice opens a flat OpenDocument file made here and saves it as "MS Excel 97" (Excel 97-2003, an
   OLE compound file with a "Workbook" stream).
2. ``password.xls``: the same, saved by LibreOffice with the password "panel" (BIFF8 encrypted with RC4;
   python-calamine reports it as password protected).
3. ``encrypted.xlsx``: an OLE compound file laid out as Excel and LibreOffice store a password-protected .xlsx
   ([MS-OFFCRYPTO] 2.3.4: an "EncryptionInfo" stream holding an agile encryption descriptor and an
   "EncryptedPackage" stream holding the package's size and its encrypted bytes). LibreOffice 7.4 here does not
   save encrypted OOXML from a script, so the container is written below by hand following [MS-CFB] (version 3,
   512-byte sectors, one FAT sector, one directory sector, streams of 4096 bytes so no mini stream is needed);
   the encrypted bytes are a SHA-256 stream, not a real cipher text (nothing can or should decrypt them).
"""

from __future__ import annotations

import hashlib
import os
import struct
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent

CIRCUITS = [["Circuit", "Device", "Voltage", "Frequency"], ["K1", "gfci-a", 120, 60], ["E1", "rcd-30", 230, 50]]
LOADS = [["Load", "Circuit", "Leakage"], ["Fridge, 3 Wren Lane", "K1", "0.4 mA"], ["Meter", "E1", "0.75 mA"]]

# [MS-CFB] 2.1 and 2.2 constants.
SECTOR = 512
FREESECT, ENDOFCHAIN, FATSECT, NOSTREAM = 0xFFFFFFFF, 0xFFFFFFFE, 0xFFFFFFFD, 0xFFFFFFFF
STREAM_BYTES = 4096  # the mini stream cutoff: streams this long live in regular sectors


def _fods(sheets: dict[str, list[list[object]]]) -> str:
    """A flat OpenDocument spreadsheet (ODF 1.2, office:document) holding ``sheets``."""

    def cell(value: object) -> str:
        if isinstance(value, (int, float)):
            return f'<table:table-cell office:value-type="float" office:value="{value}"/>'
        return f'<table:table-cell office:value-type="string"><text:p>{value}</text:p></table:table-cell>'

    tables = "".join(
        f'<table:table table:name="{name}">'
        + "".join("<table:table-row>" + "".join(cell(v) for v in row) + "</table:table-row>" for row in rows)
        + "</table:table>"
        for name, rows in sheets.items()
    )
    return (
        '<?xml version="1.0" encoding="UTF-8"?><office:document '
        'xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" '
        'xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" '
        'xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0" office:version="1.2" '
        'office:mimetype="application/vnd.oasis.opendocument.spreadsheet"><office:body><office:spreadsheet>'
        f"{tables}</office:spreadsheet></office:body></office:document>"
    )


def save_with_libreoffice(source: Path, targets: list[tuple[Path, str | None]]) -> None:
    """Open ``source`` in a headless LibreOffice and save it as Excel 97-2003 to each (path, password)."""
    import uno  # LibreOffice's Python bridge
    from com.sun.star.beans import PropertyValue

    def prop(name: str, value: object) -> PropertyValue:
        p = PropertyValue()
        p.Name, p.Value = name, value
        return p

    with tempfile.TemporaryDirectory() as profile:
        pipe = f"leakbudget-fixtures-{os.getpid()}"
        office = subprocess.Popen(
            [
                "soffice",
                "--headless",
                "--invisible",
                "--norestore",
                f"-env:UserInstallation=file://{profile}",
                f"--accept=pipe,name={pipe};urp;",
            ],
            stderr=subprocess.DEVNULL,
        )
        try:
            local = uno.getComponentContext()
            resolver = local.ServiceManager.createInstanceWithContext("com.sun.star.bridge.UnoUrlResolver", local)
            for _ in range(150):
                try:
                    context = resolver.resolve(f"uno:pipe,name={pipe};urp;StarOffice.ComponentContext")
                    break
                except Exception:  # office still starting
                    time.sleep(0.2)
            desktop = context.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", context)
            for target, password in targets:
                doc = desktop.loadComponentFromURL(
                    uno.systemPathToFileUrl(str(source)), "_blank", 0, (prop("Hidden", True),)
                )
                args = [prop("FilterName", "MS Excel 97")] + ([prop("Password", password)] if password else [])
                doc.storeToURL(uno.systemPathToFileUrl(str(target)), tuple(args))
                doc.close(True)
            try:
                desktop.terminate()
            except Exception:  # the bridge drops as the office exits
                pass
            office.wait(timeout=60)
        finally:
            if office.poll() is None:
                office.kill()


def _directory_entry(
    name: str, kind: int, child: int = NOSTREAM, right: int = NOSTREAM, start: int = ENDOFCHAIN, size: int = 0
) -> bytes:
    """One 128-byte directory entry ([MS-CFB] 2.6.1); ``kind`` 1 storage, 2 stream, 5 root, 0 unused."""
    encoded = (name + "\0").encode("utf-16-le") if name else b""
    return struct.pack(
        "<64sHBBIII16sIQQIQ",
        encoded,
        len(encoded),
        kind,
        1,
        NOSTREAM,
        right,
        child,
        bytes(16),
        0,
        0,
        0,
        start,
        size,
    )


def compound_file(streams: list[tuple[str, bytes]]) -> bytes:
    """An OLE compound file (version 3) whose root storage holds ``streams``, each exactly STREAM_BYTES long.

    Sector 0 is the FAT, sector 1 the directory, then each stream's sectors in order. Siblings form the red-black
    tree of [MS-CFB] 2.6.4 as a right-leaning chain ordered by name length (all entries black is allowed for
    readers; the names here differ in length).
    """
    per_stream = STREAM_BYTES // SECTOR
    fat = [FATSECT, ENDOFCHAIN]
    for i in range(len(streams)):
        first = 2 + i * per_stream
        fat += list(range(first + 1, first + per_stream)) + [ENDOFCHAIN]
    fat += [FREESECT] * (SECTOR // 4 - len(fat))
    ordered = sorted(range(len(streams)), key=lambda i: (len(streams[i][0]), streams[i][0].upper()))
    entries = [_directory_entry("Root Entry", 5, child=1 + ordered[0])]
    for i, (name, data) in enumerate(streams):
        assert len(data) == STREAM_BYTES
        position = ordered.index(i)
        right = 1 + ordered[position + 1] if position + 1 < len(ordered) else NOSTREAM
        entries.append(_directory_entry(name, 2, right=right, start=2 + i * per_stream, size=len(data)))
    entries += [_directory_entry("", 0)] * (SECTOR // 128 - len(entries))
    header = (
        struct.pack(
            "<8s16sHHHHH6sIIIIIIIII",
            bytes.fromhex("D0CF11E0A1B11AE1"),
            bytes(16),
            0x003E,
            0x0003,
            0xFFFE,
            9,
            6,
            bytes(6),
            0,
            1,
            1,
            0,
            STREAM_BYTES,
            ENDOFCHAIN,
            0,
            ENDOFCHAIN,
            0,
        )
        + struct.pack("<I", 0)
        + struct.pack("<I", FREESECT) * 108
    )
    assert len(header) == SECTOR
    return header + struct.pack(f"<{SECTOR // 4}I", *fat) + b"".join(entries) + b"".join(d for _, d in streams)


def encrypted_package() -> bytes:
    """A password-protected .xlsx as stored by Office: EncryptionInfo (agile) and EncryptedPackage streams."""
    descriptor = (
        b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\r\n<encryption '
        b'xmlns="http://schemas.microsoft.com/office/2006/encryption" '
        b'xmlns:p="http://schemas.microsoft.com/office/2006/keyEncryptor/password"><keyData saltSize="16" '
        b'blockSize="16" keyBits="256" hashSize="64" cipherAlgorithm="AES" cipherChaining="ChainingModeCBC" '
        b'hashAlgorithm="SHA512" saltValue="AAAAAAAAAAAAAAAAAAAAAA=="/></encryption>'
    )
    info = struct.pack("<HHI", 4, 4, 0x40) + descriptor  # version 4.4, flags fAgile ([MS-OFFCRYPTO] 2.3.4.10)
    info += b" " * (STREAM_BYTES - len(info))
    noise = b"".join(hashlib.sha256(b"leakbudget fixture %d" % i).digest() for i in range(STREAM_BYTES // 32))
    package = struct.pack("<Q", 6124) + noise[8:]  # StreamSize, then the "encrypted" package bytes
    return compound_file([("EncryptionInfo", info), ("EncryptedPackage", package)])


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp_name:
        source = Path(tmp_name) / "panel.fods"
        source.write_text(_fods({"Circuits": CIRCUITS, "Loads": LOADS}), encoding="utf-8")
        save_with_libreoffice(source, [(HERE / "legacy.xls", None), (HERE / "password.xls", "panel")])
    (HERE / "encrypted.xlsx").write_bytes(encrypted_package())


if __name__ == "__main__":
    sys.exit(main())
