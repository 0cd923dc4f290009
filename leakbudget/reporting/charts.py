"""Pictures for the report: one gauge chart per circuit and an overview of budget used, as PNG bytes.

Drawn with matplotlib's object-oriented API on an Agg canvas (no pyplot, no global backend state); matplotlib is
imported inside the functions, so importing this module costs nothing. Colours are defined once in
:mod:`leakbudget.output.palette`, so the report's legend, the workbook's chart, the tests that read the pixels back
and these charts agree.
"""

from __future__ import annotations

import io
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

from leakbudget.output.palette import (
    BACKGROUND,
    BUDGET_COLOUR,
    GRID,
    INK,
    NO_TRIP_COLOUR,
    SEGMENT_COLOURS,
    STATUS_COLOURS,
)

DPI = 100  # pixels per inch of the PNGs; the report shows them at this size
WIDTH_IN = 7.6  # chart width [in] → 760 px, the width of the report's column
TITLE_IN, BAR_IN, AXIS_LABEL_IN = 0.55, 0.8, 0.42  # bands of a circuit chart, top to bottom [in]
LEGEND_ROW_IN, BOTTOM_IN = 0.19, 0.1  # one row of the legend, and the margin under it [in]


@dataclass(frozen=True, slots=True)
class Segment:
    """One load's (or a cable run's) share of a circuit's arithmetic sum."""

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


@dataclass(frozen=True, slots=True)
class Chart:
    """A chart ready to draw: its height [in] at any width near :data:`WIDTH_IN`, and the function that draws it
    onto a matplotlib Figure or SubFigure of that size (all positions are fractions of that target)."""

    height_in: float
    draw: Callable[[Any], None]

    def png(self) -> bytes:
        """The chart as a PNG of WIDTH_IN × height_in at :data:`DPI`."""
        fig = _figure(self.height_in)
        self.draw(fig)
        return _png(fig)


def _plain(text: str) -> str:
    """Text for matplotlib with ``$`` escaped, so a load name is never read as mathtext."""
    return text.replace("$", r"\$")


def _figure(height_in: float) -> Any:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(WIDTH_IN, height_in), dpi=DPI, facecolor=BACKGROUND)
    FigureCanvasAgg(fig)
    return fig


def _png(fig: Any) -> bytes:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI, facecolor=BACKGROUND)
    return buffer.getvalue()


def _style_axis(ax: Any) -> None:
    for side in ("top", "right", "left"):
        ax.spines[side].set_visible(False)
    ax.spines["bottom"].set_color(INK)
    ax.tick_params(colors=INK, labelsize=8)
    ax.xaxis.grid(True, color=GRID, linewidth=0.8)
    ax.set_axisbelow(True)


LEGEND_COLUMNS = 3


def circuit_chart(bar: CircuitBar) -> Chart:
    """A horizontal stacked bar of the circuit's leakage by load, with its budget and no-trip level as lines.

    The bar's length is the arithmetic sum [mA]; a diamond marks the phasor sum. The x axis runs from 0 to a
    little beyond the larger of the no-trip level and the sums, so both lines are always in view.
    """
    legend_in = LEGEND_ROW_IN * max(1, math.ceil((len(bar.segments) + 1) / LEGEND_COLUMNS))
    height = TITLE_IN + BAR_IN + AXIS_LABEL_IN + legend_in + BOTTOM_IN
    return Chart(height, lambda fig: _draw_circuit(fig, bar, height, legend_in))


def circuit_chart_png(bar: CircuitBar) -> bytes:
    """:func:`circuit_chart` as a PNG."""
    return circuit_chart(bar).png()


def _draw_circuit(fig: Any, bar: CircuitBar, height: float, legend_in: float) -> None:
    segments = sorted(bar.segments, key=lambda s: -s.leakage_ma)
    ax = fig.add_axes((0.03, (BOTTOM_IN + legend_in + AXIS_LABEL_IN) / height, 0.94, BAR_IN / height))
    _style_axis(ax)
    left = 0.0
    handles = []
    for i, seg in enumerate(segments):
        handles.append(
            ax.barh(
                0,
                seg.leakage_ma,
                left=left,
                height=0.62,
                color=SEGMENT_COLOURS[i % len(SEGMENT_COLOURS)],
                edgecolor=BACKGROUND,
                linewidth=0.8,
                label=_plain(f"{seg.label}  {seg.leakage_ma:.3f} mA"),
                zorder=2,
            )
        )
        left += seg.leakage_ma
    top = max(bar.leakage_ma, bar.phasor_ma, bar.no_trip_ma or 0.0, bar.budget_ma or 0.0)
    ax.set_xlim(0, top * 1.12 if top > 0 else 1.0)
    ax.set_ylim(-0.55, 0.75)
    ax.set_yticks([])
    ax.set_xlabel("standing leakage (mA)", fontsize=8, color=INK, labelpad=2)
    gate_word = "gates the budget" if bar.gate_is_phasor else "for information"
    handles.append(
        ax.plot(
            [bar.phasor_ma],
            [0],
            marker="D",
            markersize=6,
            color=INK,
            linestyle="none",
            label=f"phasor sum {bar.phasor_ma:.3f} mA ({gate_word})",
            zorder=4,
        )[0]
    )
    if bar.protected:
        for level, colour, style, word in (
            (bar.budget_ma, BUDGET_COLOUR, (0, (4, 2)), "budget"),
            (bar.no_trip_ma, NO_TRIP_COLOUR, "solid", "no-trip"),
        ):
            ax.axvline(level, color=colour, linestyle=style, linewidth=2.2, zorder=3)
            near_right = level > 0.75 * ax.get_xlim()[1]
            ax.text(
                level,
                0.42,
                f" {word} {level:.2f} mA ",
                color=colour,
                fontsize=8,
                fontweight="bold",
                ha="right" if near_right else "left",
                va="bottom",
                zorder=5,
            )
        used = f"{100 * bar.gate_ma / bar.budget_ma:.0f} % of budget" if bar.budget_ma else ""
        headline = f"{bar.circuit}: {bar.gate_ma:.3f} mA, {used}, {bar.status}"
    else:
        headline = f"{bar.circuit}: {bar.leakage_ma:.3f} mA, unprotected (no budget applies)"
    fig.text(
        0.03,
        1 - 0.08 / height,
        _plain(headline),
        fontsize=10.5,
        fontweight="bold",
        color=STATUS_COLOURS.get(bar.status, INK),
        va="top",
    )
    fig.text(0.03, 1 - 0.32 / height, _plain(bar.device_label), fontsize=8.5, color=INK, va="top")
    fig.legend(
        handles=handles,
        loc="lower left",
        bbox_to_anchor=(0.02, BOTTOM_IN / 2 / height),
        ncols=LEGEND_COLUMNS,
        fontsize=7.5,
        frameon=False,
        handlelength=1.2,
        columnspacing=1.2,
        labelcolor=INK,
    )


def overview_chart(bars: Sequence[CircuitBar]) -> Chart | None:
    """Budget used by every protected circuit (gate sum ÷ budget, in %), with 100 % and each no-trip level.

    Circuits on different devices have budgets of different size; a share of budget puts them on one scale.
    None when no circuit is protected.
    """
    rows = [b for b in bars if b.protected and b.budget_ma]
    if not rows:
        return None
    height = 0.9 + 0.3 * len(rows)
    return Chart(height, lambda fig: _draw_overview(fig, rows, height))


def overview_chart_png(bars: Sequence[CircuitBar]) -> bytes | None:
    """:func:`overview_chart` as a PNG, None when no circuit is protected."""
    chart = overview_chart(bars)
    return chart.png() if chart is not None else None


def _percent_of_budget(value_ma: float | None, budget_ma: float | None) -> float:
    assert value_ma is not None and budget_ma is not None  # overview_chart keeps protected circuits only
    return 100 * value_ma / budget_ma


def _draw_overview(fig: Any, rows: Sequence[CircuitBar], height: float) -> None:
    ax = fig.add_axes((0.16, 0.55 / height, 0.8, (height - 0.85) / height))
    _style_axis(ax)
    names = [_plain(b.circuit) for b in rows][::-1]
    used = [_percent_of_budget(b.gate_ma, b.budget_ma) for b in rows][::-1]
    no_trip = [_percent_of_budget(b.no_trip_ma, b.budget_ma) for b in rows][::-1]
    colours = [STATUS_COLOURS[b.status] for b in rows][::-1]
    y = list(range(len(rows)))
    ax.barh(y, used, height=0.6, color=colours, zorder=2)
    ax.axvline(100, color=BUDGET_COLOUR, linestyle=(0, (4, 2)), linewidth=2.2, zorder=3)
    ax.plot(
        no_trip, y, marker="|", markersize=14, markeredgewidth=2.4, color=NO_TRIP_COLOUR, linestyle="none", zorder=4
    )
    for yi, value in zip(y, used):
        ax.text(value, yi, f" {value:.0f} %", va="center", ha="left", fontsize=8, color=INK, zorder=5)
    ax.set_yticks(y, names, fontsize=8.5, color=INK)
    ax.set_ylim(-0.6, len(rows) - 0.4)
    ax.set_xlim(0, max(max(used), max(no_trip), 100) * 1.12)
    ax.set_xlabel("standing leakage as a share of the circuit's budget (%)", fontsize=8, color=INK, labelpad=2)
    fig.text(
        0.16,
        1 - 0.12 / height,
        "Budget used per protected circuit",
        fontsize=10.5,
        fontweight="bold",
        color=INK,
        va="top",
    )
    fig.text(
        0.96,
        1 - 0.12 / height,
        "dashed: budget (100 %)   |  red tick: no-trip level",
        fontsize=8,
        color=INK,
        va="top",
        ha="right",
    )
