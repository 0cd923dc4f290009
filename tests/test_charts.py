"""The charts, checked by reading their SVG back: sizes, where the bars end against the level lines, content.

Values are read the way a reader reads the picture: a shape's position against the printed tick labels of the
x axis (tests/svg.py fits the scale through them). On a linear axis from 0, a bar of leakage L and a line at
budget B then read L and B; the ratios of the levels come from the standards named beside each check.
"""

from __future__ import annotations

import pytest

from leakbudget.reporting import charts
from leakbudget.reporting.charts import CircuitBar, Segment, nice_ticks, text_extent
from tests.svg import read_chart


def _bar(
    circuit: str,
    loads: tuple[float, ...],
    budget_ma: float | None = 1.8,
    no_trip_ma: float | None = 4.0,
    status: str = "ok",
    phasor_ma: float | None = None,
    labels: tuple[str, ...] | None = None,
) -> CircuitBar:
    total = sum(loads)
    return CircuitBar(
        circuit=circuit,
        device_label="GFCI Class A (personnel)" if budget_ma else "No ground-fault protection",
        status=status,
        segments=tuple(Segment(labels[i] if labels else f"load {i + 1}", v) for i, v in enumerate(loads)),
        leakage_ma=total,
        phasor_ma=total if phasor_ma is None else phasor_ma,
        gate_ma=total,
        gate_is_phasor=False,
        budget_ma=budget_ma,
        no_trip_ma=no_trip_ma,
    )


def _read(bar: CircuitBar):
    return read_chart(charts.circuit_chart(bar).svg())


def _bar_end(reading) -> float:
    """The stacked bar's right end, in mA read against the axis."""
    segments = reading.rects("segment")
    return reading.value_at(max(x + w for x, _, w, _, _ in segments))


def test_chart_size_follows_the_legend_rows():
    # 3 legend entries per row: 2 loads + phasor marker = 1 row; 7 loads + marker = 3 rows.
    one, three = _read(_bar("A", (0.5, 0.4))), _read(_bar("B", (0.3,) * 7))
    bands_in = charts.TITLE_IN + charts.BAR_IN + charts.AXIS_LABEL_IN + charts.BOTTOM_IN
    assert one.size_pt == pytest.approx((7.6 * 72, (bands_in + charts.LEGEND_ROW_IN) * 72))
    assert three.size_pt == pytest.approx((7.6 * 72, (bands_in + 3 * charts.LEGEND_ROW_IN) * 72))
    # shown 760 px wide (7.6 in at 100 px an inch) with the height in proportion
    assert one.root.get("width") == "760"
    # the last legend row is drawn whole, above the bottom edge
    width, height = three.size_pt
    swatches = three.all("rect", "swatch")
    assert len(swatches) == 7 and len(three.all("polygon", "swatch")) == 1
    assert max(float(s.get("y", "0")) + float(s.get("height", "0")) for s in swatches) < height - 5


def test_over_budget_bar_crosses_the_budget_line_at_the_right_place():
    reading = _read(_bar("K9", (1.2, 0.9, 0.3), status="over-budget"))
    # UL 943 Class A: no trip below 4 mA; the budget is 30 % of the 6 mA trip level (by analogy with BS 7671:2018
    # reg. 531.3.2) = 1.8 mA; the loads add to 2.4 mA
    assert reading.line_value("budget") == pytest.approx(1.8, rel=1e-3)
    assert reading.line_value("no-trip") == pytest.approx(4.0, rel=1e-3)
    assert _bar_end(reading) == pytest.approx(2.4, rel=1e-3)
    assert reading.line_value("budget") < _bar_end(reading) < reading.line_value("no-trip")
    # the budget line is dashed, the no-trip line solid, each in its palette colour
    budget, no_trip = reading.all("line", "budget")[0], reading.all("line", "no-trip")[0]
    assert budget.get("stroke") == charts.BUDGET_COLOUR and budget.get("stroke-dasharray")
    assert no_trip.get("stroke") == charts.NO_TRIP_COLOUR and no_trip.get("stroke-dasharray") is None
    # both lines run across the bar's band
    (x, y, w, h, _), *_ = reading.rects("segment")
    for line in (budget, no_trip):
        assert float(line.get("y1", "0")) <= y and float(line.get("y2", "0")) >= y + h
    assert "K9: 2.400 mA, 133 % of budget, over-budget" in reading.texts("headline")


def test_bar_within_budget_stops_short_of_the_line():
    reading = _read(_bar("K2", (0.5, 0.4)))
    assert _bar_end(reading) == pytest.approx(0.9, rel=1e-3)
    assert _bar_end(reading) < reading.line_value("budget")


def test_trip_risk_bar_reaches_past_the_no_trip_line_of_a_30_ma_rcd():
    # IEC 61008-1: no operation below 0.5 IΔn = 15 mA; budget 0.30 × 30 mA = 9 mA (BS 7671:2018 reg. 531.3.2).
    reading = _read(_bar("E4", (10.0, 6.0), budget_ma=9.0, no_trip_ma=15.0, status="trip-risk"))
    budget, no_trip = reading.line_value("budget"), reading.line_value("no-trip")
    assert budget < no_trip < _bar_end(reading)
    assert no_trip / budget == pytest.approx(15.0 / 9.0, rel=1e-3)
    assert _bar_end(reading) == pytest.approx(16.0, rel=1e-3)


def test_unprotected_chart_has_no_level_lines():
    reading = _read(_bar("O1", (1.25, 0.63), budget_ma=None, no_trip_ma=None, status="unprotected"))
    assert reading.all("line", "budget") == [] and reading.all("line", "no-trip") == []
    width, _ = reading.size_pt
    segments = reading.rects("segment")
    bar_width = max(x + w for x, _, w, _, _ in segments) - min(x for x, *_ in segments)
    assert bar_width > 0.8 * width  # the axis is scaled to the bar itself
    assert _bar_end(reading) == pytest.approx(1.88, rel=1e-3)


def test_segments_are_drawn_largest_first_in_proportion():
    reading = _read(_bar("K5", (0.2, 0.6)))
    (x1, _, w1, _, fill1), (x2, _, w2, _, fill2) = reading.rects("segment")
    assert fill1 == charts.SEGMENT_COLOURS[0] and fill2 == charts.SEGMENT_COLOURS[1]
    assert x2 == pytest.approx(x1 + w1, abs=0.02)  # stacked end to end (coordinates have 2 decimals)
    assert w1 / w2 == pytest.approx(0.6 / 0.2, rel=1e-3)
    assert reading.value_at(x1 + w1) == pytest.approx(0.6, rel=1e-3)
    # the phasor diamond sits at the phasor sum (here equal to the arithmetic sum, 0.8 mA)
    points = reading.all("polygon", "phasor")[0].get("points", "").split()
    xs = [float(p.split(",")[0]) for p in points]
    assert reading.value_at((min(xs) + max(xs)) / 2) == pytest.approx(0.8, rel=1e-3)


def test_every_text_stays_inside_the_chart():
    long_names = ("Display refrigerator with glass door and its lighting", "Coffee machine", "Kettle")
    chart = charts.circuit_chart(_bar("K7", (0.5, 0.4, 0.2), labels=long_names))
    for shape in chart.shapes:
        if isinstance(shape, charts.Text):
            left, right = text_extent(shape)
            assert left >= 0 and right <= chart.width_pt, shape.text
            assert 0 < shape.y <= chart.height_pt, shape.text
    legend = read_chart(chart.svg()).texts("legend")
    assert legend[0].startswith("Display refrigerator") and legend[0].endswith("…")  # cut to its column
    assert legend[1] == "Coffee machine  0.400 mA"


def test_workbook_text_is_kept_literally_and_escaped():
    bar = CircuitBar("$A$ <b>", "GFCI", "ok", (Segment("pump & $2 $x^2$", 0.3),), 0.3, 0.3, 0.3, False, 1.8, 4.0)
    svg = charts.circuit_chart(bar).svg()
    assert "<b>" not in svg and "&lt;b&gt;" in svg
    reading = read_chart(svg)
    assert reading.texts("headline")[0].startswith("$A$ <b>: 0.300 mA")
    assert reading.texts("legend")[0] == "pump & $2 $x^2$  0.300 mA"


def test_axis_ticks_are_round_numbers():
    # steps of 1, 2, 2.5 or 5 times a power of ten, at most seven ticks, never past the top
    assert nice_ticks(4.48) == [0, 1, 2, 3, 4]
    assert nice_ticks(17.92) == [0, 5, 10, 15]
    assert nice_ticks(0.336) == [0, 0.1, 0.2, 0.3]
    assert nice_ticks(0.3) == [0, 0.05, 0.1, 0.15, 0.2, 0.25, 0.3]
    assert nice_ticks(250) == [0, 50, 100, 150, 200, 250]


def test_overview_puts_over_budget_bars_past_the_100_percent_line():
    bars = [
        _bar("A", (0.9,)),
        _bar("B", (2.7,), status="over-budget"),
        _bar("C", (0.0,)),
        _bar("D", (1.0,), budget_ma=None, no_trip_ma=None, status="unprotected"),
    ]
    chart = charts.overview_chart(bars)
    assert chart is not None
    reading = read_chart(chart.svg())
    assert reading.size_pt == pytest.approx((7.6 * 72, (0.9 + 0.3 * 3) * 72))  # unprotected D has no row
    assert reading.texts("name") == ["A", "B", "C"]
    assert reading.line_value("budget") == pytest.approx(100, rel=1e-3)
    used = reading.rects("used")
    ends = [reading.value_at(x + w) for x, _, w, _, _ in used]
    # A uses 0.9 / 1.8 = 50 % of its budget, B 2.7 / 1.8 = 150 %, C nothing
    assert ends == pytest.approx([50, 150, 0], abs=0.01)
    assert [fill for *_, fill in used] == [charts.STATUS_COLOURS[s] for s in ("ok", "over-budget", "ok")]
    assert reading.texts("value") == ["50 %", "150 %", "0 %"]
    # each protected row has a no-trip tick at 4.0 / 1.8 = 222 % of budget (UL 943 Class A no-trip level)
    ticks = {float(e.get("x1", "nan")) for e in reading.all("line", "no-trip")}
    assert len(reading.all("line", "no-trip")) == 3 and len(ticks) == 1
    assert reading.value_at(ticks.pop()) == pytest.approx(100 * 4.0 / 1.8, rel=1e-3)


def test_overview_is_none_without_protected_circuits():
    assert charts.overview_chart([_bar("D", (1.0,), budget_ma=None, no_trip_ma=None)]) is None
