"""The HTML report in a real browser (issue 16): headless Chromium opens it without a word of complaint.

The browser is the outside reference (tests/browser.py drives Debian's `chromium` over the DevTools protocol):
what it logs while it parses and draws the page (console messages, SVG attributes it cannot read, failed loads,
DevTools issues), every request the page makes, the DOM as its HTML parser built it, where its layout puts the
chart text, and the pixels it paints. The reports are those of both shipped examples (as `leakbudget demo` copies
them), every circuit with a detail page and a split plan, and one of 200 invented circuits (benchmarks/workbooks.py).
A missing browser fails these tests; it never skips them.
"""

from __future__ import annotations

from collections import Counter
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from benchmarks.workbooks import make_workbook
from leakbudget.api import check, copy_example, report
from leakbudget.cli.app import EXAMPLES
from leakbudget.planner.plan import SplitOptions
from leakbudget.reporting import charts
from tests.browser import Browser, Page
from tests.pixels import background_share, line_column, mask, stacked_bar

pytestmark = pytest.mark.slow  # one browser start (about 1.3 s) and a report or two to build and open (about 1 s each)


@pytest.fixture(scope="module")
def browser():
    with Browser() as b:
        yield b


class SourceReader(HTMLParser):
    """What the HTML text itself holds, read with the standard library's parser (it repairs nothing): each start
    tag, the figures with their <svg>, and each table's body rows by the own text of their first cell (the
    badge and note elements inside a cell are not its name)."""

    VOID = {"meta", "br", "img", "input", "link", "hr", "col", "wbr"}

    def __init__(self) -> None:
        super().__init__()
        self.tags: Counter[str] = Counter()
        self.figures: list[str] = []
        self.svgs = 0
        self.rows: dict[str, list[str]] = {}
        self._table: str | None = None
        self._first_cell = False  # the next <td> is the first of its row
        self._reading = False  # inside a first cell
        self._depth = 0  # elements open inside it

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags[tag] += 1
        if self._reading and tag not in self.VOID:
            self._depth += 1
        if tag == "table":
            self._table = a.get("data-table") or ""
            self.rows[self._table] = []
        elif tag == "tr":
            self._first_cell = True
        elif tag == "td" and self._table is not None and self._first_cell:
            self._first_cell, self._reading, self._depth = False, True, 0
            self.rows[self._table].append("")
        elif tag == "figure":
            self.figures.append(a.get("data-figure", ""))
        elif tag == "svg":
            self.svgs += 1

    def handle_endtag(self, tag):
        if tag == "td":
            self._reading = False
        elif self._reading:
            self._depth -= 1
        if tag == "table":
            self._table = None

    def handle_data(self, data):
        if self._reading and self._depth == 0 and self._table is not None:
            self.rows[self._table][-1] += data


def read_source(text: str) -> SourceReader:
    reader = SourceReader()
    reader.feed(text)
    return reader


# What the browser built: every element by its local name, the tables' first cells (their own text, without the
# badge and note elements inside), each figure's <svg>, and any chart text that the layout puts outside its chart.
DOM_PROBE = """(() => {
  const tags = {};
  for (const el of document.getElementsByTagName('*')) tags[el.localName] = (tags[el.localName] || 0) + 1;
  const own = td => [...td.childNodes].filter(n => n.nodeType === Node.TEXT_NODE).map(n => n.data).join('');
  const rows = {};
  for (const t of document.querySelectorAll('table[data-table]'))
    rows[t.dataset.table] = [...t.tBodies].flatMap(b => [...b.rows]).map(r => own(r.cells[0]));
  const figures = [...document.querySelectorAll('figure')].map(f => {
    const svg = f.querySelector('svg');
    const box = svg.viewBox.baseVal, shown = svg.getBoundingClientRect();
    const outside = [...svg.querySelectorAll('text')].map(t => [t.textContent, t.getBBox()]).filter(([, b]) =>
      b.x < box.x - 0.5 || b.y < box.y - 0.5 || b.x + b.width > box.x + box.width + 0.5 ||
      b.y + b.height > box.y + box.height + 0.5).map(([text]) => text);
    return {name: f.dataset.figure, svgs: f.querySelectorAll('svg').length, namespace: svg.namespaceURI,
            x: shown.left + scrollX, y: shown.top + scrollY, width: shown.width, height: shown.height, outside};
  });
  return {mode: document.compatMode, charset: document.characterSet, tags, rows, figures,
          svgs: document.querySelectorAll('svg').length};
})()"""
SVG_NAMESPACE = "http://www.w3.org/2000/svg"


def assert_opens_cleanly(page: Page, html_path: Path, check_doc: dict) -> dict:
    """The checks every report passes in the browser; returns what the DOM probe found."""
    # the browser's own words: no console message, log entry, exception or DevTools issue of level warning/error
    assert page.messages == []
    # self-contained: the only request is the file itself, and nothing failed to load (names do not resolve,
    # so a reach for the network would fail here)
    assert page.requests == [page.url]
    assert page.failed_loads == []
    dom = page.evaluate(DOM_PROBE)
    source = read_source(html_path.read_text(encoding="utf-8"))
    # standards mode (the doctype was read) and UTF-8 (the meta charset was read)
    assert (dom["mode"], dom["charset"]) == ("CSS1Compat", "UTF-8")
    # markup the browser did not have to repair: its DOM holds exactly the elements the text opens (a misnested
    # tag makes the HTML parser close, move or add elements; WHATWG HTML, "tree construction")
    assert dom["tags"] == dict(source.tags)
    # every circuit of the check, and every row of the summary table, is in the DOM
    assert dom["rows"]["circuits"] == [c["circuit"] for c in check_doc["circuits"]]
    assert dom["rows"]["summary-circuits"] == source.rows["summary-circuits"] != []
    # one <svg> per chart, as many as the source has, each an SVG element (the HTML parser switched namespace)
    assert dom["svgs"] == source.svgs == len(source.figures)
    assert [f["name"] for f in dom["figures"]] == source.figures
    for figure in dom["figures"]:
        assert figure["svgs"] == 1 and figure["namespace"] == SVG_NAMESPACE, figure["name"]
        assert figure["width"] > 300 and figure["height"] > 100, figure["name"]  # drawn, at a readable size
        assert figure["outside"] == [], figure["name"]  # text the browser measured fits inside its chart
    return dom


# ---- the detector itself -----------------------------------------------------------------------------------------


def test_the_browser_reports_a_broken_page_and_paints_a_block_where_css_puts_it(browser, tmp_path):
    # Each fault the report checks look for, put into one page: a negative SVG width (SVG 1.1, "rect": a negative
    # value is an error), a missing image, a style sheet on the network, and a <div> inside a <p> (WHATWG HTML: a
    # <div> start tag closes an open <p>, and the stray </p> then makes an empty one).
    page_path = tmp_path / "broken.html"
    page_path.write_text(
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><title>broken</title>'
        '<link rel="stylesheet" href="https://fonts.example.invalid/face.css">'
        "<style>body { margin: 0; background: #fff; } #block { position: absolute; left: 100px; top: 50px; "
        "width: 40px; height: 30px; background: #2f6f8f; }</style></head><body>"
        '<svg width="10" height="10" viewBox="0 0 10 10"><rect width="-1" height="2"/></svg>'
        '<img src="missing.png" alt=""><p>a<div>b</div></p><div id="block"></div></body></html>',
        encoding="utf-8",
    )
    page = browser.open(page_path, width=400, height=200)
    said = "\n".join(page.messages)
    assert "<rect> attribute width: A negative value is not valid" in said
    assert "missing.png" in said and "https://fonts.example.invalid/face.css" in said
    assert page.requests[0] == page.url and len(page.requests) == 3
    assert sorted(page.failed_loads) == [
        f"{page.url.rsplit('/', 1)[0]}/missing.png: net::ERR_FILE_NOT_FOUND",
        "https://fonts.example.invalid/face.css: net::ERR_NAME_NOT_RESOLVED",
    ]
    dom = page.evaluate(DOM_PROBE)
    assert dom["tags"]["p"] == 2 and read_source(page_path.read_text()).tags["p"] == 1
    # the screenshot, decoded here from its PNG, has the 40 × 30 CSS px block at (100, 50), in its colour
    image = page.screenshot()
    assert image.shape == (200, 400, 3)
    rows, columns = np.nonzero(mask(image, "#2f6f8f", tolerance=0))
    assert len(rows) == 40 * 30
    assert (rows.min(), rows.max(), columns.min(), columns.max()) == (50, 79, 100, 139)


# ---- the reports -------------------------------------------------------------------------------------------------


@pytest.fixture(scope="module", params=EXAMPLES)
def demo(request, browser, tmp_path_factory):
    """A shipped example as `leakbudget demo` copies it, reported to HTML with every circuit and a split plan,
    opened in the browser; with its `check --json` document."""
    folder = tmp_path_factory.mktemp(request.param)
    workbook = copy_example(folder, f"{request.param}.xlsx")
    html_path = folder / "report.html"
    report(workbook, html=html_path, split=SplitOptions(), all_circuits=True)
    return {"html": html_path, "check": check(workbook).document(), "page": browser.open(html_path)}


def test_demo_report_opens_without_complaint_and_holds_every_circuit_and_chart(demo):
    dom = assert_opens_cleanly(demo["page"], demo["html"], demo["check"])
    names = [f["name"] for f in dom["figures"]]
    # with --all-circuits and --split: the overview, a chart per circuit, and the split plan's overview
    assert names[0] == "overview" and names[-1] == "split-overview"
    assert {f"chart-{c['circuit']}" for c in demo["check"]["circuits"]} <= set(names)


def test_demo_report_screenshot_shows_the_page_and_its_charts(demo):
    page = demo["page"]
    # the first screen is not blank: the browser painted the cover (heading, verdict, contents) on the paper
    first = page.screenshot()
    assert first.shape == (800, 1100, 3)
    assert 1 - mask(first, "#f4f1ea", tolerance=2).mean() - mask(first, "#ffffff", tolerance=2).mean() > 0.01
    # a chart as painted: the bar's right end lies past the budget line exactly when the check's sum exceeds the
    # budget (pixels read by colour, tests/pixels.py); one chart of each kind, of a circuit or a shared device
    figures = {f["name"]: f for f in page.evaluate(DOM_PROBE)["figures"]}
    doc = demo["check"]
    charted = [(f"chart-{c['circuit']}", c) for c in doc["circuits"]] + [
        (f"chart-device-{d['id']}", d) for d in doc["devices"]
    ]
    over = next(n for n, c in charted if c["budget_ma"] and c["leakage_ma"] > 1.05 * c["budget_ma"])
    within = next(n for n, c in charted if c["budget_ma"] and c["leakage_ma"] < 0.95 * c["budget_ma"])
    for name in (over, within):
        f = figures[name]
        image = page.screenshot({"x": f["x"], "y": f["y"], "width": f["width"], "height": f["height"]})
        assert background_share(image) > 0.05  # not an empty white box
        budget_column, budget_pixels = line_column(image, charts.BUDGET_COLOUR)
        _, no_trip_pixels = line_column(image, charts.NO_TRIP_COLOUR)
        assert budget_pixels > 10 and no_trip_pixels > 10, name
        assert (stacked_bar(image).right > budget_column) == (name == over), name


def test_report_of_200_circuits_opens_without_complaint(browser, tmp_path):
    workbook = make_workbook(tmp_path / "floor.xlsx", 1000)  # about one circuit on every five loads
    html_path = tmp_path / "floor.html"
    report(workbook, html=html_path, all_circuits=True)
    check_doc = check(workbook).document()
    assert len(check_doc["circuits"]) == 200
    dom = assert_opens_cleanly(browser.open(html_path), html_path, check_doc)
    assert len(dom["figures"]) > 200  # the overview (split to fit pages) and a chart per circuit
