"""Reading a chart's SVG back the way a reader reads the picture: shapes by their colour and class, and values
from where they sit against the printed tick labels of the x axis.

The SVG is parsed with defusedxml (the standard library's ElementTree underneath), independent of how the chart
was written; the scale comes from the axis labels the reader sees, not from the chart code's constants.
"""

from __future__ import annotations

from dataclasses import dataclass
from xml.etree.ElementTree import Element

import numpy as np
from defusedxml import ElementTree


@dataclass
class ChartReading:
    root: Element

    def all(self, tag: str, cls: str | None = None) -> list[Element]:
        return [e for e in self.root.iter(tag) if cls is None or e.get("class") == cls]

    @property
    def size_pt(self) -> tuple[float, float]:
        _, _, width, height = (float(v) for v in self.root.get("viewBox", "").split())
        return width, height

    def scale(self) -> tuple[float, float]:
        """(value at x = 0, value per point) fitted through the tick labels' positions and numbers."""
        ticks = [(float(t.get("x", "nan")), float(t.text or "nan")) for t in self.all("text", "tick")]
        assert len(ticks) >= 3, "an axis needs at least three labelled ticks"
        xs, values = np.array(ticks).T
        slope, intercept = np.polyfit(xs, values, 1)
        residual = np.abs(intercept + slope * xs - values).max()
        assert residual <= 1e-4 * values.max(), "tick labels are not evenly spaced"  # coordinates have 2 decimals
        return float(intercept), float(slope)

    def value_at(self, x: float) -> float:
        """The axis value at chart x [pt], read against the tick labels."""
        intercept, slope = self.scale()
        return intercept + slope * x

    def line_value(self, cls: str) -> float:
        """The axis value of a vertical line of class ``cls`` (budget, no-trip)."""
        xs = {float(e.get("x1", "nan")) for e in self.all("line", cls)}
        assert len(xs) == 1, (cls, xs)
        return self.value_at(xs.pop())

    def rects(self, cls: str) -> list[tuple[float, float, float, float, str]]:
        """(x, y, width, height, fill) of every rectangle of class ``cls``, in document order."""
        return [
            (
                float(e.get("x", "0")),
                float(e.get("y", "0")),
                float(e.get("width", "0")),
                float(e.get("height", "0")),
                e.get("fill", ""),
            )
            for e in self.all("rect", cls)
        ]

    def texts(self, cls: str | None = None) -> list[str]:
        return [e.text or "" for e in self.all("text", cls)]


def read_chart(svg: str) -> ChartReading:
    """Parse one ``<svg>`` element (inline SVG carries no namespace)."""
    root = ElementTree.fromstring(svg)
    assert root.tag == "svg"
    return ChartReading(root)
