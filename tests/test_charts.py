"""The charts, checked by reading their pixels back: sizes, where the bars end against the level lines, content.

Geometry is checked against the numbers the chart was given: on a linear axis starting at 0, a bar of leakage L
and a line at budget B satisfy (bar length in px) / (line offset in px) = L / B.
"""

from __future__ import annotations

import pytest

from leakbudget.reporting import charts
from leakbudget.reporting.charts import CircuitBar, Segment
from tests.pixels import axis_row, background_share, decode, line_column, mask, stacked_bar


def _bar(
    circuit: str,
    loads: tuple[float, ...],
    budget_ma: float | None = 1.8,
    no_trip_ma: float | None = 4.0,
    status: str = "ok",
    phasor_ma: float | None = None,
) -> CircuitBar:
    total = sum(loads)
    return CircuitBar(
        circuit=circuit,
        device_label="GFCI Class A (personnel)" if budget_ma else "No ground-fault protection",
        status=status,
        segments=tuple(Segment(f"load {i + 1}", v) for i, v in enumerate(loads)),
        leakage_ma=total,
        phasor_ma=total if phasor_ma is None else phasor_ma,
        gate_ma=total,
        gate_is_phasor=False,
        budget_ma=budget_ma,
        no_trip_ma=no_trip_ma,
    )


def test_chart_size_follows_the_legend_rows():
    # 3 legend entries per row: 2 loads + phasor marker = 1 row; 7 loads + marker = 3 rows.
    one = decode(charts.circuit_chart_png(_bar("A", (0.5, 0.4))))
    three = decode(charts.circuit_chart_png(_bar("B", (0.3,) * 7)))
    bands_in = charts.TITLE_IN + charts.BAR_IN + charts.AXIS_LABEL_IN + charts.BOTTOM_IN
    assert one.shape[:2] == (round((bands_in + charts.LEGEND_ROW_IN) * charts.DPI), 760)
    assert three.shape[:2] == (round((bands_in + 3 * charts.LEGEND_ROW_IN) * charts.DPI), 760)
    # the legend fills its three columns top to bottom: the 3rd load's swatch ends the first column, in the last
    # row, drawn whole and clear of the bottom edge
    swatch = mask(three, charts.SEGMENT_COLOURS[2], 3)
    swatch[: axis_row(three) + 1] = False  # below the axis: the legend, not the bar
    rows = swatch.any(axis=1).nonzero()[0]
    assert len(rows) >= 3 and three.shape[0] - 25 < rows.max() < three.shape[0] - 5


def test_over_budget_bar_crosses_the_budget_line_at_the_right_place():
    image = decode(charts.circuit_chart_png(_bar("K9", (1.2, 0.9, 0.3), status="over-budget")))
    budget_col, budget_px = line_column(image, charts.BUDGET_COLOUR)
    no_trip_col, no_trip_px = line_column(image, charts.NO_TRIP_COLOUR)
    bar = stacked_bar(image)
    assert budget_px > 30 and no_trip_px > 50  # both lines drawn across the bar band
    assert bar.left < budget_col < bar.right < no_trip_col
    # just right of the dashed line the bar's own colour continues on the bar's row
    assert any(
        mask(image[bar.row : bar.row + 1, budget_col + 3 : budget_col + 6], c, 3).any() for c in charts.SEGMENT_COLOURS
    )
    length, offset = bar.right + 1 - bar.left, budget_col + 1 - bar.left
    assert length / offset == pytest.approx(2.4 / 1.8, rel=0.02)
    assert (no_trip_col + 1 - bar.left) / offset == pytest.approx(4.0 / 1.8, rel=0.02)


def test_bar_within_budget_stops_short_of_the_line():
    image = decode(charts.circuit_chart_png(_bar("K2", (0.5, 0.4))))
    budget_col, _ = line_column(image, charts.BUDGET_COLOUR)
    bar = stacked_bar(image)
    assert bar.right < budget_col - 5
    assert (bar.right + 1 - bar.left) / (budget_col + 1 - bar.left) == pytest.approx(0.9 / 1.8, rel=0.03)


def test_trip_risk_bar_reaches_past_the_no_trip_line_of_a_30_ma_rcd():
    # IEC 61008-1: no operation below 0.5 IΔn = 15 mA; budget 0.30 × 30 mA = 9 mA (BS 7671:2018 reg. 531.3.2).
    image = decode(
        charts.circuit_chart_png(_bar("E4", (10.0, 6.0), budget_ma=9.0, no_trip_ma=15.0, status="trip-risk"))
    )
    no_trip_col, _ = line_column(image, charts.NO_TRIP_COLOUR)
    budget_col, _ = line_column(image, charts.BUDGET_COLOUR)
    bar = stacked_bar(image)
    assert budget_col < no_trip_col < bar.right
    assert (no_trip_col + 1 - bar.left) / (budget_col + 1 - bar.left) == pytest.approx(15.0 / 9.0, rel=0.02)


def test_unprotected_chart_has_no_level_lines():
    image = decode(
        charts.circuit_chart_png(_bar("O1", (1.25, 0.63), budget_ma=None, no_trip_ma=None, status="unprotected"))
    )
    assert line_column(image, charts.BUDGET_COLOUR)[1] == 0
    assert line_column(image, charts.NO_TRIP_COLOUR)[1] == 0
    bar = stacked_bar(image)
    assert bar.right - bar.left > 500  # the axis is scaled to the bar itself


def test_segments_are_drawn_largest_first_in_proportion():
    image = decode(charts.circuit_chart_png(_bar("K5", (0.2, 0.6), status="ok")))
    bar = stacked_bar(image)
    row = image[bar.row : bar.row + 1, bar.left : bar.right + 1]
    first = mask(row, charts.SEGMENT_COLOURS[0], 3).sum()
    second = mask(row, charts.SEGMENT_COLOURS[1], 3).sum()
    assert first / second == pytest.approx(0.6 / 0.2, rel=0.06)


def test_chart_is_mostly_background_but_not_empty():
    share = background_share(decode(charts.circuit_chart_png(_bar("K2", (0.5, 0.4)))))
    assert 0.05 < share < 0.5


def test_names_with_dollar_signs_are_not_read_as_maths():
    bar = CircuitBar("$A$", "GFCI", "ok", (Segment("pump $2 $x^2$", 0.3),), 0.3, 0.3, 0.3, False, 1.8, 4.0)
    assert decode(charts.circuit_chart_png(bar)).shape[1] == 760


def test_overview_puts_over_budget_bars_past_the_100_percent_line():
    bars = [
        _bar("A", (0.9,)),
        _bar("B", (2.7,), status="over-budget"),
        _bar("C", (0.0,)),
        _bar("D", (1.0,), budget_ma=None, no_trip_ma=None, status="unprotected"),
    ]
    image = decode(charts.overview_chart_png(bars))
    assert image.shape[:2] == (round((0.9 + 0.3 * 3) * charts.DPI), 760)  # unprotected D has no row
    line_col, _ = line_column(image, charts.BUDGET_COLOUR)
    over = mask(image, charts.STATUS_COLOURS["over-budget"], 3)
    ok = mask(image, charts.STATUS_COLOURS["ok"], 3)
    over_cols, ok_cols = over.any(axis=0).nonzero()[0], ok.any(axis=0).nonzero()[0]
    left = min(over_cols.min(), ok_cols.min())
    assert over_cols.max() > line_col > ok_cols.max()
    # B uses 150 % of its budget, A 50 %
    assert (over_cols.max() + 1 - left) / (line_col + 1 - left) == pytest.approx(1.5, rel=0.02)
    assert (ok_cols.max() + 1 - left) / (line_col + 1 - left) == pytest.approx(0.5, rel=0.03)
    # each protected row has a no-trip tick at 4.0 / 1.8 = 222 % of budget
    tick_col, tick_px = line_column(image, charts.NO_TRIP_COLOUR)
    assert tick_px > 3 * 10
    assert (tick_col + 1 - left) / (line_col + 1 - left) == pytest.approx(4.0 / 1.8, rel=0.02)


def test_overview_is_none_without_protected_circuits():
    assert charts.overview_chart_png([_bar("D", (1.0,), budget_ma=None, no_trip_ma=None)]) is None
