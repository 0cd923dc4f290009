"""Reading charts back as pixels: find the budget and no-trip lines and the bars by their colours.

The pixels are a rendering of the PDF by poppler's pdftoppm (a PDF reader independent of the library that wrote
the file), as a binary PPM (Netpbm P6) decoded here with numpy.
"""

from __future__ import annotations

import io
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
