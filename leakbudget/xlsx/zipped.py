"""Zip entries written from compressed bytes: a part copied as it is, or a new part deflated by zlib-ng.

zipfile compresses through the standard library's zlib. New result parts are deflated here instead, by zlib-ng
(the ``zlib-ng`` package, a maintained zlib replacement with the same raw deflate format, RFC 1951) at
:data:`DEFLATE_LEVEL`, and appended with their CRC-32 and sizes in the local header. Any zip reader inflates them
as it does zlib's output; DEVELOPERS.md gives the measurement behind the choice.
"""

from __future__ import annotations

import zipfile
from collections.abc import Iterable

from zlib_ng import zlib_ng

# Measured on the 119 MB of result-sheet XML of a 100,000-load check (benchmarks/workbooks.py) on the 2-core
# machine: zlib-ng at level 5 takes 0.61 s of CPU and gives 10.24 MB; the standard library's zlib at its default
# level 6 takes 1.60 s for 10.02 MB; zlib-ng's level 6 gives the same size as its 5 in 0.90 s, its level 4
# 10.65 MB in 0.52 s (modelling choice: level 5).
DEFLATE_LEVEL = 5


def deflated(chunks: Iterable[bytes], entry: zipfile.ZipInfo) -> list[bytes]:
    """``chunks`` deflated (raw deflate, as a zip entry holds it); ``entry`` gets their CRC-32 and both sizes."""
    compressor = zlib_ng.compressobj(DEFLATE_LEVEL, zlib_ng.DEFLATED, -15)
    crc = size = 0
    out: list[bytes] = []
    for chunk in chunks:
        crc = zlib_ng.crc32(chunk, crc)
        size += len(chunk)
        out.append(compressor.compress(chunk))
    out.append(compressor.flush())
    entry.compress_type, entry.CRC = zipfile.ZIP_DEFLATED, crc
    entry.file_size, entry.compress_size = size, sum(map(len, out))
    return out


def can_append(out: zipfile.ZipFile) -> bool:
    """True when ``out`` is written to a seekable file, as :func:`append_compressed` needs."""
    target = getattr(out, "fp", None)
    return target is not None and target.seekable()


def write_deflated(
    out: zipfile.ZipFile, entry: zipfile.ZipInfo, chunks: Iterable[bytes], force_zip64: bool = False
) -> None:
    """Add ``entry`` to ``out`` with ``chunks`` as its content, deflated by zlib-ng; through zipfile when ``out``
    cannot be appended to (streamed, so ``force_zip64`` says beforehand whether the part may pass 4 GiB)."""
    if not can_append(out):
        entry.compress_type = zipfile.ZIP_DEFLATED
        with out.open(entry, "w", force_zip64=force_zip64) as sink:
            for chunk in chunks:
                sink.write(chunk)
        return
    append_compressed(out, entry, deflated(chunks, entry))


def append_compressed(out: zipfile.ZipFile, entry: zipfile.ZipInfo, compressed: Iterable[bytes]) -> None:
    """Append ``entry`` (its method, CRC-32 and sizes set) to ``out`` with its ``compressed`` bytes.

    zipfile has no public way to do this; it uses four of ``ZipFile``'s attributes as ``ZipFile.open(…, "w")``
    does (``fp``, ``start_dir``, ``filelist``, ``NameToInfo``) and ``ZipInfo.FileHeader``; the sizes and CRC-32
    go into the local header (no data descriptor), with a ZIP64 extra field when they need one (APPNOTE.TXT
    4.5.3), as ``ZipFile.close`` writes them into the central directory.
    """
    if not entry.external_attr:
        entry.external_attr = 0o600 << 16  # what ZipFile.open(…, "w") gives an entry without permissions
    zip64 = entry.file_size > zipfile.ZIP64_LIMIT or entry.compress_size > zipfile.ZIP64_LIMIT
    target = out.fp
    assert target is not None
    target.seek(out.start_dir)
    entry.header_offset = target.tell()
    target.write(entry.FileHeader(zip64))
    for chunk in compressed:
        target.write(chunk)
    out.start_dir = target.tell()
    out.filelist.append(entry)
    out.NameToInfo[entry.filename] = entry
