"""The colours of every chart leakbudget draws: the report's charts and the workbook's native chart.

Defined once here, so the report's legend, the workbook chart, the charts and the tests that read their pixels
back agree. The two levels are amber (budget, dashed) and crimson (no-trip, solid); loads take calm hues far from
both.
"""

BACKGROUND = "#ffffff"
INK = "#26303b"  # axis text and the phasor marker
GRID = "#e3e6ea"
BUDGET_COLOUR = "#e0a100"  # amber dashed line: the standing-leakage budget
NO_TRIP_COLOUR = "#c4162a"  # crimson solid line: the device's no-trip level
# Load segments: calm hues far from the amber and crimson of the two levels.
SEGMENT_COLOURS = ("#2f6f8f", "#6aa6a0", "#3f4f7a", "#8fb3d9", "#4d8a5c", "#a3c48f", "#7a6a9e", "#b9b2d6")
STATUS_COLOURS = {
    "ok": "#2e7d4f",
    "marginal": "#8a7a00",
    "over-budget": "#b36b00",
    "trip-risk": "#b3122a",
    "unprotected": "#6b5b95",
}
