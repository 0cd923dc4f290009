"""The report's typeface: DejaVu Sans (regular and bold), shipped in ``fonts/`` and embedded in every PDF.

The same font's advance widths lay out the charts' text and wrap the PDF's lines, so both formats measure text
alike. DejaVu covers Latin, Greek (IΔn, π) and the arrows and operators the report prints (→, ≤, ×), which
the PDF standard fonts do not. The files are DejaVu 2.37 subset to those ranges (``fonts/LICENSE.txt``);
reportlab reads them (imported inside the functions, so importing this module costs nothing).
"""

from __future__ import annotations

import functools
from pathlib import Path
from typing import Any

FONT_DIR = Path(__file__).with_name("fonts")
FONT_FILES = {False: "DejaVuSans.ttf", True: "DejaVuSans-Bold.ttf"}
FONT_NAMES = {False: "DejaVuSans", True: "DejaVuSans-Bold"}  # as registered with reportlab and named in the PDF
ASCENT = 0.76  # cap height and ascenders above the baseline, as a share of the font size (DejaVu Sans, rounded)
DESCENT = 0.24  # below the baseline, as a share of the font size


@functools.cache
def font(bold: bool = False) -> Any:
    """The reportlab TrueType font, registered under :data:`FONT_NAMES` on first use."""
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    loaded = TTFont(FONT_NAMES[bold], str(FONT_DIR / FONT_FILES[bold]))
    pdfmetrics.registerFont(loaded)
    return loaded


def font_name(bold: bool = False) -> str:
    """The registered name of the regular or bold face (registering it first)."""
    font(bold)
    return FONT_NAMES[bold]


@functools.lru_cache(maxsize=65536)
def text_width_pt(text: str, size_pt: float, bold: bool = False) -> float:
    """Width [pt] of ``text`` set at ``size_pt`` in the report's typeface (sum of the glyphs' advance widths)."""
    return float(font(bold).stringWidth(text, size_pt))


def fit(text: str, width_pt: float, size_pt: float, bold: bool = False) -> str:
    """``text`` as it is when it fits ``width_pt``, else cut and ended with an ellipsis so that it does."""
    if text_width_pt(text, size_pt, bold) <= width_pt:
        return text
    cut = len(text)
    while cut > 1 and text_width_pt(text[:cut] + "…", size_pt, bold) > width_pt:
        cut -= 1
    return text[:cut].rstrip() + "…"
