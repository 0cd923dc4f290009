"""Pictures for the report: one gauge chart per circuit (or shared device) and an overview of budget used.

A chart is drawn once, as a list of vector shapes (rectangles, lines, polygons, text) in points from its top-left
corner; :meth:`Chart.svg` writes them as SVG text for the HTML report and :mod:`leakbudget.reporting.pdf` draws
the same shapes on its page. Text is placed with the report's typeface metrics
(:mod:`leakbudget.reporting.typeface`). Colours are defined once in :mod:`leakbudget.output.palette`, so the
report's legend, the workbook's chart, the tests and these charts agree.
"""

from __future__ import annotations

import html
import math
from collections.abc import Sequence
from dataclasses import dataclass

from leakbudget.output.palette import (
    BACKGROUND,
    BUDGET_COLOUR,
    GRID,
    INK,
    NO_TRIP_COLOUR,
    SEGMENT_COLOURS,
    STATUS_COLOURS,
)
from leakbudget.reporting.typeface import ASCENT, fit, text_width_pt

PT_PER_IN = 72.0
WIDTH_IN = 7.6  # chart width [in]: the width of the report's column
SCREEN_PX_PER_IN = 100  # the HTML shows a chart 760 px wide (WIDTH_IN at 100 px an inch), shrinking to fit
TITLE_IN, BAR_IN, AXIS_LABEL_IN = 0.55, 0.8, 0.42  # bands of a circuit chart, top to bottom [in]
LEGEND_ROW_IN, BOTTOM_IN = 0.19, 0.1  # one row of the legend, and the margin under it [in]
LEGEND_COLUMNS = 3
LEFT, RIGHT = 0.03, 0.97  # the circuit chart's plot area, as shares of the width
Y_LOW, Y_HIGH, BAR_HALF = -0.55, 0.75, 0.31  # the bar band's vertical range; the bar spans ±BAR_HALF round 0
LEVEL_LINE_PT = 2.2  # width of the budget and no-trip lines [pt]
BUDGET_DASH = (4 * LEVEL_LINE_PT, 2 * LEVEL_LINE_PT)  # dash and gap of the budget line [pt]
HEADROOM = 1.12  # the axis runs to this many times the largest of the sums and the levels
TICK_STEPS = (1.0, 2.0, 2.5, 5.0)  # axis steps: these times a power of ten
MAX_TICKS = 7
OVERVIEW_ROW_IN, OVERVIEW_FRAME_IN = 0.3, 0.9  # the overview: one row per circuit, plus title and axis [in]
OVERVIEW_LEFT, OVERVIEW_WIDTH = 0.16, 0.8  # its plot area, as shares of the width
OVERVIEW_TOP_IN, OVERVIEW_BOTTOM_IN = 0.3, 0.55


# ---- the chart model -------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Rect:
    x: float
    y: float
    w: float
    h: float
    fill: str
    role: str = ""  # what it shows ("segment", "used"); SVG class, so a reader's tools and the tests find it
    stroke: str | None = None
    stroke_width: float = 0.0


@dataclass(frozen=True, slots=True)
class Line:
    x1: float
    y1: float
    x2: float
    y2: float
    colour: str
    width: float
    role: str = ""
    dash: tuple[float, ...] = ()


@dataclass(frozen=True, slots=True)
class Polygon:
    points: tuple[tuple[float, float], ...]
    fill: str
    role: str = ""


@dataclass(frozen=True, slots=True)
class Text:
    """A line of text; ``y`` is its baseline, ``anchor`` start, middle or end (as SVG's ``text-anchor``)."""

    x: float
    y: float
    text: str
    size: float
    colour: str = INK
    bold: bool = False
    anchor: str = "start"
    role: str = ""


Shape = Rect | Line | Polygon | Text


@dataclass(frozen=True, slots=True)
class Chart:
    """A drawn chart: its size [pt] and its shapes, back to front, in points from the top-left corner."""

    width_pt: float
    height_pt: float
    shapes: tuple[Shape, ...]

    @property
    def height_in(self) -> float:
        return self.height_pt / PT_PER_IN

    def svg(self, label: str = "") -> str:
        """The chart as an ``<svg>`` element for inline use in HTML (no namespace declaration, no external
        reference): shown :data:`SCREEN_PX_PER_IN` pixels an inch, scaled down to fit a narrower column."""
        px = SCREEN_PX_PER_IN / PT_PER_IN
        aria = f' role="img" aria-label="{_a(label)}"' if label else ""
        parts = [
            f'<svg class="chart" viewBox="0 0 {_n(self.width_pt)} {_n(self.height_pt)}" '
            f'width="{round(self.width_pt * px)}" height="{round(self.height_pt * px)}"{aria}>',
            f'<rect width="100%" height="100%" fill="{BACKGROUND}"/>',
        ]
        parts.extend(_svg(shape) for shape in self.shapes)
        parts.append("</svg>")
        return "".join(parts)


def _n(value: float) -> str:
    """A coordinate for SVG: two decimals, trailing zeros dropped."""
    text = f"{value:.2f}".rstrip("0").rstrip(".")
    return "0" if text == "-0" else text


def _a(text: str) -> str:
    return html.escape(text, quote=True)


def _cls(role: str) -> str:
    return f' class="{role}"' if role else ""


def _svg(shape: Shape) -> str:
    if isinstance(shape, Rect):
        stroke = (
            f' stroke="{shape.stroke}" stroke-width="{_n(shape.stroke_width)}"'
            if shape.stroke and shape.stroke_width
            else ""
        )
        return (
            f'<rect{_cls(shape.role)} x="{_n(shape.x)}" y="{_n(shape.y)}" width="{_n(shape.w)}" '
            f'height="{_n(shape.h)}" fill="{shape.fill}"{stroke}/>'
        )
    if isinstance(shape, Line):
        dash = f' stroke-dasharray="{" ".join(_n(d) for d in shape.dash)}"' if shape.dash else ""
        return (
            f'<line{_cls(shape.role)} x1="{_n(shape.x1)}" y1="{_n(shape.y1)}" x2="{_n(shape.x2)}" '
            f'y2="{_n(shape.y2)}" stroke="{shape.colour}" stroke-width="{_n(shape.width)}"{dash}/>'
        )
    if isinstance(shape, Polygon):
        points = " ".join(f"{_n(x)},{_n(y)}" for x, y in shape.points)
        return f'<polygon{_cls(shape.role)} points="{points}" fill="{shape.fill}"/>'
    anchor = f' text-anchor="{shape.anchor}"' if shape.anchor != "start" else ""
    weight = ' font-weight="bold"' if shape.bold else ""
    return (
        f'<text{_cls(shape.role)} x="{_n(shape.x)}" y="{_n(shape.y)}" font-size="{_n(shape.size)}" '
        f'fill="{shape.colour}"{weight}{anchor}>{html.escape(shape.text, quote=False)}</text>'
    )


# ---- shared pieces ---------------------------------------------------------------------------------------------


def nice_ticks(top: float) -> list[float]:
    """Axis tick values from 0 up to ``top``: a step of 1, 2, 2.5 or 5 × 10^k giving at most MAX_TICKS ticks."""
    if top <= 0:
        return [0.0]
    for exponent in range(math.floor(math.log10(top / MAX_TICKS)) - 1, 400):
        for base in TICK_STEPS:
            step = base * 10.0**exponent
            if top / step <= MAX_TICKS - 1:
                count = int(math.floor(top / step + 1e-9))
                return [round(i * step, 12) for i in range(count + 1)]
    return [0.0, top]


def tick_label(value: float, ticks: Sequence[float]) -> str:
    """A tick's text with as many decimals as the step needs (0.25 → 2, 0.5 → 1, 2 → 0)."""
    step = ticks[1] - ticks[0] if len(ticks) > 1 else 1.0
    decimals = 0
    while decimals < 6 and abs(round(step, decimals) - step) > 1e-9:
        decimals += 1
    return f"{value:.{decimals}f}"


def _axis(
    shapes: list[Shape], x0: float, x1: float, top_y: float, bottom_y: float, scale_max: float, label: str
) -> None:
    """Grid lines, the x axis with its ticks and tick labels under the plot, and the axis label beneath."""
    ticks = nice_ticks(scale_max)
    for value in ticks:
        x = x0 + (x1 - x0) * value / scale_max
        shapes.append(Line(x, top_y, x, bottom_y, GRID, 0.8, "grid"))
    shapes.append(Line(x0, bottom_y, x1, bottom_y, INK, 0.8, "axis"))
    for value in ticks:
        x = x0 + (x1 - x0) * value / scale_max
        shapes.append(Line(x, bottom_y, x, bottom_y + 3.5, INK, 0.8, "tick"))
        shapes.append(Text(x, bottom_y + 5 + 8 * ASCENT, tick_label(value, ticks), 8, anchor="middle", role="tick"))
    shapes.append(Text((x0 + x1) / 2, bottom_y + 27, label, 8, anchor="middle", role="axis-label"))


# ---- one circuit (or one shared device) ------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Segment:
    """One load's (or a cable run's, or a circuit's below a shared device) share of the arithmetic sum."""

    label: str
    leakage_ma: float


@dataclass(frozen=True, slots=True)
class CircuitBar:
    """What one circuit's chart shows; plain floats in mA, ``budget_ma``/``no_trip_ma`` None when unprotected."""

    circuit: str
    device_label: str
    status: str
    segments: tuple[Segment, ...]
    leakage_ma: float  # arithmetic sum (the stacked bar's length)
    phasor_ma: float
    gate_ma: float  # the sum compared with the budget
    gate_is_phasor: bool
    budget_ma: float | None
    no_trip_ma: float | None

    @property
    def protected(self) -> bool:
        return self.budget_ma is not None and self.no_trip_ma is not None


def circuit_chart(bar: CircuitBar) -> Chart:
    """A horizontal stacked bar of the circuit's leakage by load (largest first), with its budget (amber, dashed)
    and no-trip level (crimson) as lines and a diamond at the phasor sum; a legend names each segment.

    The bar's length is the arithmetic sum [mA]. The x axis runs from 0 to HEADROOM times the largest of the
    no-trip level, the budget and the sums, so both lines are always in view.
    """
    width = WIDTH_IN * PT_PER_IN
    segments = sorted(bar.segments, key=lambda s: -s.leakage_ma)
    legend_rows = max(1, math.ceil((len(segments) + 1) / LEGEND_COLUMNS))
    height = (TITLE_IN + BAR_IN + AXIS_LABEL_IN + LEGEND_ROW_IN * legend_rows + BOTTOM_IN) * PT_PER_IN
    x0, x1 = LEFT * width, RIGHT * width
    band_top = TITLE_IN * PT_PER_IN
    band_bottom = band_top + BAR_IN * PT_PER_IN
    top = max(bar.leakage_ma, bar.phasor_ma, bar.no_trip_ma or 0.0, bar.budget_ma or 0.0)
    scale_max = top * HEADROOM if top > 0 else 1.0

    def x_of(ma: float) -> float:
        return x0 + (x1 - x0) * ma / scale_max

    def y_of(v: float) -> float:
        return band_top + (Y_HIGH - v) / (Y_HIGH - Y_LOW) * (band_bottom - band_top)

    shapes: list[Shape] = []
    _axis(shapes, x0, x1, band_top, band_bottom, scale_max, "standing leakage (mA)")
    left = 0.0
    for i, seg in enumerate(segments):
        shapes.append(
            Rect(
                x_of(left),
                y_of(BAR_HALF),
                x_of(left + seg.leakage_ma) - x_of(left),
                y_of(-BAR_HALF) - y_of(BAR_HALF),
                SEGMENT_COLOURS[i % len(SEGMENT_COLOURS)],
                "segment",
                BACKGROUND,
                0.8,
            )
        )
        left += seg.leakage_ma
    if bar.protected:
        assert bar.budget_ma is not None and bar.no_trip_ma is not None
        for level, colour, dash, word in (
            (bar.budget_ma, BUDGET_COLOUR, BUDGET_DASH, "budget"),
            (bar.no_trip_ma, NO_TRIP_COLOUR, (), "no-trip"),
        ):
            x = x_of(level)
            shapes.append(Line(x, band_top, x, band_bottom, colour, LEVEL_LINE_PT, word, dash))
            near_right = level > 0.75 * scale_max
            shapes.append(
                Text(
                    x - 3 if near_right else x + 3,
                    y_of(0.42) - 1,
                    f"{word} {level:.2f} mA",
                    8,
                    colour,
                    True,
                    "end" if near_right else "start",
                    f"{word}-label",
                )
            )
        used = f"{100 * bar.gate_ma / bar.budget_ma:.0f} % of budget" if bar.budget_ma else ""
        headline = f"{bar.circuit}: {bar.gate_ma:.3f} mA, {used}, {bar.status}"
    else:
        headline = f"{bar.circuit}: {bar.leakage_ma:.3f} mA, unprotected (no budget applies)"
    xp, yp, r = x_of(bar.phasor_ma), y_of(0.0), 4.2
    shapes.append(Polygon(((xp, yp - r), (xp + r, yp), (xp, yp + r), (xp - r, yp)), INK, "phasor"))
    tone = STATUS_COLOURS.get(bar.status, INK)
    title_y = 0.08 * PT_PER_IN + 10.5 * ASCENT
    shapes.append(Text(x0, title_y, fit(headline, x1 - x0, 10.5, True), 10.5, tone, True, role="headline"))
    shapes.append(Text(x0, 0.32 * PT_PER_IN + 8.5 * ASCENT, fit(bar.device_label, x1 - x0, 8.5), 8.5, role="device"))
    gate_word = "gates the budget" if bar.gate_is_phasor else "for information"
    entries: list[tuple[str, str | None]] = [
        (f"{seg.label}  {seg.leakage_ma:.3f} mA", SEGMENT_COLOURS[i % len(SEGMENT_COLOURS)])
        for i, seg in enumerate(segments)
    ]
    entries.append((f"phasor sum {bar.phasor_ma:.3f} mA ({gate_word})", None))
    column_w = (x1 - x0) / LEGEND_COLUMNS
    legend_top = band_bottom + AXIS_LABEL_IN * PT_PER_IN
    row_h = LEGEND_ROW_IN * PT_PER_IN
    for i, (label, swatch) in enumerate(entries):
        row, column = divmod(i, LEGEND_COLUMNS)
        lx, ly = x0 + column * column_w, legend_top + row * row_h
        cx, cy = lx + 5, ly + row_h / 2
        if swatch is None:
            shapes.append(Polygon(((cx, cy - 3.5), (cx + 3.5, cy), (cx, cy + 3.5), (cx - 3.5, cy)), INK, "swatch"))
        else:
            shapes.append(Rect(lx, cy - 3.5, 10, 7, swatch, "swatch"))
        shapes.append(
            Text(lx + 14, ly + row_h / 2 + 7.5 * ASCENT / 2, fit(label, column_w - 18, 7.5), 7.5, role="legend")
        )
    return Chart(width, height, tuple(shapes))


# ---- the overview: budget used per protected circuit ------------------------------------------------------------


def overview_chart(bars: Sequence[CircuitBar]) -> Chart | None:
    """Budget used by every protected circuit (gate sum ÷ budget, in %), with 100 % and each no-trip level.

    Circuits on different devices have budgets of different size; a share of budget puts them on one scale.
    None when no circuit is protected.
    """
    rows = [b for b in bars if b.protected and b.budget_ma]
    if not rows:
        return None
    width = WIDTH_IN * PT_PER_IN
    height = (OVERVIEW_FRAME_IN + OVERVIEW_ROW_IN * len(rows)) * PT_PER_IN
    x0 = OVERVIEW_LEFT * width
    x1 = x0 + OVERVIEW_WIDTH * width
    plot_top = OVERVIEW_TOP_IN * PT_PER_IN
    plot_bottom = height - OVERVIEW_BOTTOM_IN * PT_PER_IN
    used = [_percent_of_budget(b.gate_ma, b.budget_ma) for b in rows]
    no_trip = [_percent_of_budget(b.no_trip_ma, b.budget_ma) for b in rows]
    scale_max = max(max(used), max(no_trip), 100.0) * HEADROOM
    row_h = (plot_bottom - plot_top) / len(rows)

    def x_of(percent: float) -> float:
        return x0 + (x1 - x0) * percent / scale_max

    shapes: list[Shape] = []
    _axis(shapes, x0, x1, plot_top, plot_bottom, scale_max, "standing leakage as a share of the circuit's budget (%)")
    for i, b in enumerate(rows):
        centre = plot_top + (i + 0.5) * row_h
        shapes.append(Rect(x0, centre - 0.3 * row_h, x_of(used[i]) - x0, 0.6 * row_h, STATUS_COLOURS[b.status], "used"))
        shapes.append(Text(x_of(used[i]) + 3, centre + 8 * ASCENT / 2, f"{used[i]:.0f} %", 8, role="value"))
        xt = x_of(no_trip[i])
        shapes.append(Line(xt, centre - 7, xt, centre + 7, NO_TRIP_COLOUR, 2.4, "no-trip"))
        shapes.append(
            Text(x0 - 4, centre + 8.5 * ASCENT / 2, fit(b.circuit, x0 - 8, 8.5), 8.5, anchor="end", role="name")
        )
    x100 = x_of(100.0)
    shapes.append(Line(x100, plot_top, x100, plot_bottom, BUDGET_COLOUR, LEVEL_LINE_PT, "budget", BUDGET_DASH))
    title_y = 0.12 * PT_PER_IN + 10.5 * ASCENT
    shapes.append(Text(x0, title_y, "Budget used per protected circuit", 10.5, bold=True, role="headline"))
    shapes.append(Text(x1, title_y, "dashed: budget (100 %)   |  red tick: no-trip level", 8, anchor="end", role="key"))
    return Chart(width, height, tuple(shapes))


def _percent_of_budget(value_ma: float | None, budget_ma: float | None) -> float:
    assert value_ma is not None and budget_ma is not None  # overview_chart keeps protected circuits only
    return 100 * value_ma / budget_ma


def text_extent(text: Text) -> tuple[float, float]:
    """Left and right x [pt] of a chart text, from its anchor and its measured width."""
    width = text_width_pt(text.text, text.size, text.bold)
    start = {"start": text.x, "middle": text.x - width / 2, "end": text.x - width}[text.anchor]
    return start, start + width
