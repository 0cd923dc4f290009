"""Reading charts back as pixels: find the budget and no-trip lines and the bars by their colours.

The pixels are a rendering of the PDF by poppler's pdftoppm (a PDF reader independent of the library that wrote
the file), as a binary PPM (Netpbm P6) decoded here with numpy; or a browser's screenshot, a PNG decoded here
with the standard library's zlib and numpy.
"""

from __future__ import annotations

import io
import struct
import zlib
from dataclasses import dataclass

import numpy as np

from leakbudget.reporting import charts


def decode(ppm: bytes) -> np.ndarray:
    """RGB pixels of a binary PPM (P6, maxval 255) as an (height, width, 3) integer array, 0-255."""
    stream = io.BytesIO(ppm)
    fields: list[bytes] = []
    while len(fields) < 4:  # magic, width, height, maxval, separated by white space (and # comments)
        line = stream.readline()
        fields += line.split(b"#")[0].split()
    magic, width, height, maxval = fields[0], int(fields[1]), int(fields[2]), int(fields[3])
    assert magic == b"P6" and maxval == 255
    pixels = np.frombuffer(stream.read(width * height * 3), dtype=np.uint8)
    return pixels.reshape(height, width, 3).astype(int)


PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
PNG_CHANNELS = {2: 3, 6: 4}  # colour type → samples a pixel: truecolour (RGB), truecolour with alpha (RGBA)


def decode_png(png: bytes) -> np.ndarray:
    """RGB pixels of an 8-bit, non-interlaced truecolour PNG as an (height, width, 3) integer array, 0-255.

    After the PNG specification (W3C, Portable Network Graphics, 2nd edition, clauses 5 and 9): the chunks'
    IDAT data concatenated is one zlib stream of scanlines, each a filter-type byte and the filtered bytes; the
    filters add to each byte the byte one pixel to the left (a), the one above (b) or the one above-left (c):
    0 none, 1 a, 2 b, 3 floor((a + b) / 2), 4 the Paeth predictor of a, b, c.
    """
    assert png.startswith(PNG_SIGNATURE), "not a PNG"
    position, data, header = len(PNG_SIGNATURE), bytearray(), None
    while position < len(png):
        length, kind = struct.unpack(">I4s", png[position : position + 8])
        body = png[position + 8 : position + 8 + length]
        position += 12 + length  # length, type, body, CRC
        if kind == b"IHDR":
            header = struct.unpack(">IIBBBBB", body)
        elif kind == b"IDAT":
            data += body
        elif kind == b"IEND":
            break
    assert header is not None, "PNG without IHDR"
    width, height, depth, colour_type, _, _, interlace = header
    assert depth == 8 and colour_type in PNG_CHANNELS and interlace == 0, header
    bpp = PNG_CHANNELS[colour_type]
    raw = np.frombuffer(zlib.decompress(bytes(data)), dtype=np.uint8).reshape(height, 1 + width * bpp)
    rows = np.zeros((height, width * bpp), dtype=np.uint8)
    previous = np.zeros(width * bpp, dtype=np.uint8)
    for y in range(height):
        kind, line = raw[y, 0], raw[y, 1:]
        if kind == 0:
            row = line.copy()
        elif kind == 1:  # a running sum along the row, per channel
            row = (np.cumsum(line.reshape(width, bpp), axis=0, dtype=np.uint64) % 256).astype(np.uint8).ravel()
        elif kind == 2:
            row = line + previous  # uint8 wraps modulo 256, as the specification's sums do
        elif kind in (3, 4):  # each pixel depends on the one just decoded to its left: pixel by pixel
            row = np.zeros_like(line)
            up = previous.astype(int)
            for x in range(0, width * bpp, bpp):
                a = row[x - bpp : x].astype(int) if x else np.zeros(bpp, dtype=int)
                b = up[x : x + bpp]
                if kind == 3:
                    predictor = (a + b) // 2
                else:
                    c = up[x - bpp : x] if x else np.zeros(bpp, dtype=int)
                    p = a + b - c
                    pa, pb, pc = np.abs(p - a), np.abs(p - b), np.abs(p - c)
                    predictor = np.where((pa <= pb) & (pa <= pc), a, np.where(pb <= pc, b, c))
                row[x : x + bpp] = (line[x : x + bpp].astype(int) + predictor) % 256
        else:
            raise AssertionError(f"PNG filter type {kind} on row {y}")
        rows[y], previous = row, row
    return rows.reshape(height, width, bpp)[:, :, :3].astype(int)


def mask(image: np.ndarray, colour: str, tolerance: int = 14) -> np.ndarray:
    """Pixels within ``tolerance`` (per channel, 0-255) of a ``#rrggbb`` colour."""
    rgb = np.array([int(colour[i : i + 2], 16) for i in (1, 3, 5)])
    return np.all(np.abs(image - rgb) <= tolerance, axis=-1)


def line_column(image: np.ndarray, colour: str) -> tuple[int, int]:
    """The pixel column holding most pixels of ``colour`` (a vertical line), and how many it holds."""
    counts = mask(image, colour).sum(axis=0)
    return int(counts.argmax()), int(counts.max())


@dataclass
class Bar:
    row: int  # the pixel row through the bar's middle
    left: int  # first and last column of bar colour on that row
    right: int


def axis_row(image: np.ndarray) -> int:
    """The pixel row of the x axis (the longest run of axis ink across the chart)."""
    return int(mask(image, charts.INK, tolerance=6).sum(axis=1).argmax())


def stacked_bar(image: np.ndarray) -> Bar:
    """The horizontal stacked bar of a circuit chart: above the x axis (the legend swatches are below it), the
    row with most load-segment pixels, and its extent."""
    segment = np.zeros(image.shape[:2], dtype=bool)
    for colour in charts.SEGMENT_COLOURS:
        segment |= mask(image, colour, tolerance=3)
    segment[axis_row(image) :] = False
    row = int(segment.sum(axis=1).argmax())
    columns = np.flatnonzero(segment[row])
    return Bar(row, int(columns.min()), int(columns.max()))


def background_share(image: np.ndarray) -> float:
    """Share of pixels that are not the chart background (white)."""
    return float(1.0 - mask(image, charts.BACKGROUND, tolerance=2).mean())
