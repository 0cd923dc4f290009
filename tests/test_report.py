"""The hand-over report: it renders, holds every circuit, its numbers equal `check --json`, its charts show them.

The shipped example and the small conftest workbook are reported through the real command line; the HTML is
read back with the standard library's HTML parser, its inline SVG charts with defusedxml (tests/svg.py), and the
PDF with poppler's pdftotext and pdftoppm (a PDF reader independent of the library that wrote it).
"""

from __future__ import annotations

import contextlib
import datetime as dt
import io
import json
import math
import re
import shutil
import subprocess
import sys
from dataclasses import dataclass
from html.parser import HTMLParser

import pytest
from defusedxml import ElementTree

from leakbudget.api import example_path, report
from leakbudget.checking import check
from leakbudget.cli.app import main
from leakbudget.planner.plan import SplitOptions
from leakbudget.reporting import charts
from leakbudget.reporting.content import build_report
from leakbudget.reporting.document import Paragraph, Table, iter_tables
from leakbudget.reporting.html import render_html
from leakbudget.reporting.pdf import render_pdf
from leakbudget.workbook.read import read_project
from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER, basic_sheets, write_workbook
from tests.pixels import decode, line_column, stacked_bar
from tests.svg import read_chart


def run_cli(args: list[str], capsys, monkeypatch) -> tuple[int, str, str]:
    """Run the real entry point (errors → exit 2 in main()) and return exit code, stdout, stderr."""
    monkeypatch.setattr(sys, "argv", ["leakbudget", *args])
    monkeypatch.setenv("COLUMNS", "200")
    with pytest.raises(SystemExit) as exit_info:
        main()
    out = capsys.readouterr()
    return int(exit_info.value.code or 0), out.out, out.err


class ReportReader(HTMLParser):
    """Collects tables (cells with their data-key/data-value), figures, sections, and any external reference."""

    def __init__(self) -> None:
        super().__init__()
        self.tables: dict[str, list[list[dict]]] = {}
        self.figures: dict[str, dict] = {}
        self.sections: list[str] = []
        self.tags: set[str] = set()
        self.links: list[str] = []
        self._table: str | None = None
        self._figure: str | None = None
        self._cell: dict | None = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.add(tag)
        for name in ("src", "href", "xlink:href"):
            if a.get(name) and not a[name].startswith("#"):
                self.links.append(a[name])
        if tag == "section":
            self.sections.append(a["id"])
        elif tag == "table":
            self._table = a.get("data-table")
            self.tables[self._table] = []
        elif tag == "tr" and self._table is not None:
            self.tables[self._table].append([])
        elif tag == "td" and self._table is not None:
            self._cell = {"key": a.get("data-key"), "value": a.get("data-value"), "text": ""}
            self.tables[self._table][-1].append(self._cell)
        elif tag == "span" and self._cell is not None:
            self._cell["in_badge"] = True
        elif tag == "small" and self._cell is not None:
            self._cell["in_note"] = True
        elif tag == "figure":
            self._figure = a.get("data-figure")
        elif tag == "svg" and self._figure is not None:
            self.figures[self._figure] = {"alt": a["aria-label"], "width": int(a["width"]), "height": int(a["height"])}

    def handle_endtag(self, tag):
        if tag == "table":
            self._table = None
        elif tag == "td":
            self._cell = None
        elif tag == "figure":
            self._figure = None
        elif tag in ("span", "small") and self._cell is not None:
            self._cell.pop("in_badge" if tag == "span" else "in_note", None)

    def handle_data(self, data):
        if self._cell is not None and not self._cell.get("in_badge") and not self._cell.get("in_note"):
            self._cell["text"] += data


FIGURE_SVG = re.compile(r'<figure id="[^"]*" data-figure="([^"]+)">(<svg .*?</svg>)', re.DOTALL)


def read_html(text: str) -> ReportReader:
    reader = ReportReader()
    reader.feed(text)
    for name, svg in FIGURE_SVG.findall(text):
        reader.figures[name]["svg"] = svg
    return reader


def pdf_words(path) -> list[tuple[float, float, list[tuple[float, float, float, float, str]]]]:
    """Each page of a PDF as (width, height, words with their boxes [pt]), as poppler's pdftotext reads it."""
    bbox = subprocess.run(["pdftotext", "-bbox", str(path), "-"], capture_output=True, check=True).stdout
    root = ElementTree.fromstring(bbox)
    ns = {"x": "http://www.w3.org/1999/xhtml"}
    return [
        (
            float(page.get("width")),
            float(page.get("height")),
            [
                (float(w.get("xMin")), float(w.get("yMin")), float(w.get("xMax")), float(w.get("yMax")), w.text or "")
                for w in page.findall("x:word", ns)
            ],
        )
        for page in root.iter("{http://www.w3.org/1999/xhtml}page")
    ]


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    """The shipped example, reported to HTML and PDF and checked with --json, through the command line."""
    folder = tmp_path_factory.mktemp("demo")
    workbook = folder / "alder-quay-remodel.xlsx"
    shutil.copyfile(example_path(), workbook)
    before = workbook.read_bytes()
    mp = pytest.MonkeyPatch()  # module scope: monkeypatch and capsys are per test, so patch and capture by hand

    def run(args):
        mp.setattr(sys, "argv", ["leakbudget", *args])
        mp.setenv("COLUMNS", "200")
        out, err = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err), pytest.raises(SystemExit) as ex:
            main()
        return int(ex.value.code or 0), out.getvalue(), err.getvalue()

    html_path, pdf_path = folder / "report.html", folder / "report.pdf"
    report_run = run(["report", str(workbook), "--html", str(html_path), "--pdf", str(pdf_path), "--split"])
    all_path = folder / "all-circuits.html"
    all_run = run(["report", str(workbook), "--html", str(all_path), "--all-circuits"])
    split_run = run(["split", str(workbook), "--no-write", "--json"])
    check_run = run(["check", str(workbook), "--no-write", "--json"])
    review_run = run(["review", str(workbook), "--no-write", "--json"])
    mp.undo()
    return {
        "workbook": workbook,
        "unchanged": workbook.read_bytes() == before,
        "report": report_run,
        "all_run": all_run,
        "all": read_html(all_path.read_text(encoding="utf-8")),
        "check": json.loads(check_run[1]),
        "review": json.loads(review_run[1]),
        "split": json.loads(split_run[1]),
        "html_path": html_path,
        "pdf_path": pdf_path,
        "html": read_html(html_path.read_text(encoding="utf-8")),
        "raw_html": html_path.read_text(encoding="utf-8"),
    }


# ---- the command ------------------------------------------------------------------------------------------------


def test_report_command_writes_both_files_and_leaves_the_workbook_alone(demo_run):
    code, out, err = demo_run["report"]
    html_path, pdf_path = demo_run["html_path"], demo_run["pdf_path"]
    check_doc, review_doc = demo_run["check"], demo_run["review"]
    over = sum(c["status"] == "over-budget" for c in check_doc["circuits"])
    counts = review_doc["counts"]
    assert over == 3 and not any(c["status"] == "trip-risk" for c in check_doc["circuits"])  # the demo's story
    assert code == 0
    assert " ".join(out.split()) == " ".join(
        [  # rich wraps long lines at the terminal width
            f"Report written to {html_path} ({html_path.stat().st_size // 1024} KB).",
            f"Report written to {pdf_path} ({pdf_path.stat().st_size // 1024} KB).",
            f"{len(check_doc['circuits'])} circuit(s), {over} over budget. {over} circuit(s) over budget but below "
            "the no-trip level: the plan needs changes before installation. The split plan in this report brings "
            "every protected circuit within its budget and current limit.",
            f"Reviewed against {review_doc['code_label']}: {counts['error']} error(s), {counts['warning']} warning(s), "
            f"{counts['info']} info.",
            f"Split plan: {demo_run['split']['summary']}",
        ]
    )
    assert err.startswith("Caution: leakbudget is a planning aid")
    assert demo_run["unchanged"]
    assert pdf_path.read_bytes().startswith(b"%PDF-")


@pytest.mark.parametrize(
    "args, message",
    [
        (["--html"], None),
        (
            [],
            "alder-quay-remodel.xlsx: say where to write the report; give --html REPORT.html and/or --pdf REPORT.pdf.",
        ),
        (
            ["--html", "{folder}/report.txt"],
            "{folder}/report.txt: the HTML report needs a name ending in .html or .htm; give e.g. --html report.html.",
        ),
        (
            ["--pdf", "{folder}/missing/report.pdf"],
            "{folder}/missing/report.pdf: the folder {folder}/missing does "
            "not exist; create it or choose another folder.",
        ),
    ],
)
def test_bad_output_names_exit_2_with_one_sentence_and_write_nothing(args, message, tmp_path, capsys, monkeypatch):
    workbook = tmp_path / "alder-quay-remodel.xlsx"
    shutil.copyfile(example_path(), workbook)
    if args == ["--html"]:  # the workbook itself as the output: refused even with an .html name
        html_twin = tmp_path / "plan.html"
        shutil.copyfile(workbook, html_twin)
        args, workbook = ["--html", str(html_twin)], html_twin
        message = f"{html_twin}: this is the workbook itself; give the report a new file name."
    args = [a.format(folder=tmp_path) for a in args]
    before = sorted(p.name for p in tmp_path.iterdir())
    code, out, err = run_cli(["report", str(workbook), *args], capsys, monkeypatch)
    assert code == 2
    assert err.strip() == "Error: " + message.format(folder=tmp_path)
    assert sorted(p.name for p in tmp_path.iterdir()) == before


# ---- content ----------------------------------------------------------------------------------------------------


def test_html_is_self_contained(demo_run):
    for key in ("html", "all"):
        html = demo_run[key]
        assert html.links == []  # every src/href is an in-page anchor; charts are inline SVG, not files or URIs
        assert not {"script", "link", "iframe", "object", "img", "image", "use"} & html.tags
    raw = demo_run["raw_html"]
    assert "http://" not in raw and "https://" not in raw and "data:" not in raw and "url(" not in raw
    assert raw.startswith("<!DOCTYPE html>")


SECTIONS = ("summary", "job", "cautions", "supply", "circuits", "likelihood", "readings", "split", "findings", "method")


def test_report_has_a_detail_section_for_each_circuit_not_ok_and_all_with_the_option(demo_run):
    doc = demo_run["check"]
    ids = [c["circuit"] for c in doc["circuits"]]
    not_ok = [c["circuit"] for c in doc["circuits"] if c["status"] != "ok"]
    assert len(ids) == len(set(ids)) > 10 and 0 < len(not_ok) < len(ids)
    for html, shown in ((demo_run["html"], not_ok), (demo_run["all"], ids)):
        assert [row[0]["text"] for row in html.tables["circuits"][1:]] == ids  # the circuit table: every one
        assert [s.removeprefix("circuit-") for s in html.sections if s.startswith("circuit-")] == shown
        for cid in shown:
            assert f"chart-{cid}" in html.figures
            names = [row[0]["text"] for row in html.tables[f"loads-{cid}"][1:]]
            assert names == [d["load"] for d in doc["loads"] if d["circuit"] == cid]
        assert [row[0]["text"] for row in html.tables["loads-unplaced"][1:]] == [
            d["load"] for d in doc["loads"] if d["kind"] == "load" and d["circuit"] is None
        ]
        assert set(SECTIONS) <= set(html.sections) and html.sections[0] == "summary"
    assert demo_run["all_run"][0] == 0


def test_summary_lists_every_protected_circuit_and_what_must_change(demo_run):
    doc, html, raw = demo_run["check"], demo_run["html"], demo_run["raw_html"]
    protected = [c for c in doc["circuits"] if c["status"] != "unprotected"]
    rows = html.tables["summary-circuits"][1:]
    assert [row[0]["text"] for row in rows] == [c["circuit"] for c in protected]
    for c, row in zip(protected, rows, strict=True):
        cells = _numbers(row)
        assert float(cells["gate_ma"]["value"]) == c["gate_ma"] and cells["gate_ma"]["text"] == f"{c['gate_ma']:.3f}"
        assert float(cells["budget_ma"]["value"]) == c["budget_ma"]
        assert cells["headroom_used"]["text"] == f"{100 * c['headroom_used']:.0f} %"
        assert row[5]["text"] == c["status"]
    summary = raw[raw.index('<section id="summary">') : raw.index('<section id="job">')]
    for c in doc["circuits"]:
        if c["status"] == "over-budget":  # each named with its numbers
            assert (
                f"{c['circuit']}: {c['gate_ma']:.3f} mA against a {c['budget_ma']:.3f} mA budget "
                f"({100 * c['headroom_used']:.0f} %), over budget"
            ) in summary
    assert "never remove or up-rate protection" in summary
    moved = [a for a in demo_run["split"]["assignments"] if a["moved"]]
    assert moved and all(f"{a['load']} from {a['from']} to {a['to']}" in summary for a in moved)
    assert "Caution: leakbudget is a planning aid" in summary


CIRCUIT_KEYS = ("load_count", "cable_leakage_ma", "leakage_ma", "phasor_ma", "budget_ma", "no_trip_ma", "headroom_used")


def _numbers(row: list[dict]) -> dict[str, dict]:
    return {cell["key"]: cell for cell in row if cell["key"]}


def test_circuit_numbers_equal_check_json(demo_run):
    doc, html = demo_run["check"], demo_run["html"]
    for c, row in zip(doc["circuits"], html.tables["circuits"][1:]):
        cells = _numbers(row)
        assert set(cells) == set(CIRCUIT_KEYS)
        for key in CIRCUIT_KEYS:
            value = c[key]
            shown = cells[key]
            if value is None:
                assert shown["value"] is None and shown["text"] == "-"
                continue
            assert float(shown["value"]) == value, (c["circuit"], key)
            if key == "headroom_used":
                assert shown["text"] == f"{100 * value:.0f} %"
            elif key == "load_count":
                assert shown["text"] == str(value)
            else:
                assert shown["text"] == f"{value:.3f}"
        assert row[-1]["text"] == c["status"]


def test_trip_likelihood_and_readings_equal_check_json(demo_run):
    doc, html = demo_run["check"], demo_run["html"]
    for c, row in zip(doc["circuits"], html.tables["likelihood"][1:], strict=True):
        cells = _numbers(row)
        for key in ("trip_probability", "trip_probability_switch_on"):
            shown = cells[key]
            assert (float(shown["value"]) if shown["value"] is not None else None) == c[key]
            assert shown["text"] == (c[f"{key}_text"] or "-")
    assert "Monte Carlo, 10,000 samples, seed 1" in demo_run["raw_html"]
    readings = html.tables["readings"][1:]
    assert [row[0]["text"] for row in readings] == [d["circuit"] for d in doc["readings"]]
    for d, row in zip(doc["readings"], readings, strict=True):
        cells = _numbers(row)
        assert float(cells["reading_ma"]["value"]) == d["reading_ma"]
        assert float(cells["estimate_median_ma"]["value"]) == d["estimate_median_ma"]
        assert row[3]["text"] == d["flag"]
    # a reading far above the estimate is a caution, in words the reader can act on
    assert "Reading on K-DW (3.1 mA, all on): far above the estimate" in demo_run["raw_html"]


def test_load_numbers_equal_check_json_and_add_up_to_the_circuit(demo_run):
    doc, html = demo_run["check"], demo_run["all"]
    for c in doc["circuits"]:
        loads = [d for d in doc["loads"] if d["circuit"] == c["circuit"]]
        rows = html.tables[f"loads-{c['circuit']}"][1:]
        for d, row in zip(loads, rows, strict=True):
            cells = _numbers(row)
            for key in ("quantity", "per_unit_ma", "leakage_ma"):
                assert float(cells[key]["value"]) == d[key]
            assert cells["leakage_ma"]["text"] == f"{d['leakage_ma']:.3f}"
            assert row[-1]["text"] == d["basis"]
        # the arithmetic sum is the sum of the loads shown (each rounded to 4 decimals in the JSON)
        shown_sum = sum(float(_numbers(r)["leakage_ma"]["value"]) for r in rows)
        assert shown_sum == pytest.approx(c["leakage_ma"], abs=1e-4 * (len(rows) + 1))


def test_every_load_shows_its_source_and_provenance_mark(demo_run):
    raw = demo_run["raw_html"]
    # the measured microwave reading and a catalogue value from memory, each with its mark
    assert 'measured<small class="src">measured (your Leakage value)</small>' in raw
    assert (
        'catalogue<span class="badge k-typical-from-memory">typical, from memory</span><small class="src">'
        "catalogue &#x27;dishwasher&#x27; typical 0.8 mA: typical, from memory</small>"
    ) in raw
    # the budget rule's source and the device levels' sources (UL 943, BS 7671:2018 reg. 531.3.2)
    assert "UL 943 Class A (no trip below 4 mA)" in raw
    assert "modelling choice: 30 % of the trip level, by analogy with BS 7671:2018 reg. 531.3.2" in raw


def test_embedded_charts_show_the_check_numbers(demo_run):
    doc, html = demo_run["check"], demo_run["all"]
    by_id = {c["circuit"]: c for c in doc["circuits"]}
    for cid in ("P-OUT", "K-CTR2", "K-RANGE"):  # over budget, well within, near it
        figure = html.figures[f"chart-{cid}"]
        chart = read_chart(figure["svg"])
        c = by_id[cid]
        # read against the chart's own tick labels, the bar ends at the circuit's sum and the lines sit at its
        # budget and no-trip level, to the shown digits
        end = chart.value_at(max(x + w for x, _, w, _, _ in chart.rects("segment")))
        assert end == pytest.approx(c["leakage_ma"], abs=5e-4), cid
        assert chart.line_value("budget") == pytest.approx(c["budget_ma"], abs=5e-4)
        assert chart.line_value("no-trip") == pytest.approx(c["no_trip_ma"], abs=5e-4)
        assert (end > chart.line_value("budget")) == (c["status"] == "over-budget")
        assert f"{c['leakage_ma']:.3f} mA" in figure["alt"]
        assert figure["width"] == 760
    overview = read_chart(html.figures["overview"]["svg"])
    protected = [c for c in doc["circuits"] if c["budget_ma"] is not None]
    ends = [overview.value_at(x + w) for x, _, w, _, _ in overview.rects("used")]
    assert ends == pytest.approx([100 * c["gate_ma"] / c["budget_ma"] for c in protected], abs=0.01)
    assert f"P-OUT {100 * by_id['P-OUT']['headroom_used']:.0f} %" in html.figures["overview"]["alt"]


def test_pdf_opens_names_every_circuit_and_its_text_stays_on_the_page(demo_run, tmp_path):
    pdf = demo_run["pdf_path"]
    pages = pdf_words(pdf)
    info = subprocess.run(["pdfinfo", str(pdf)], capture_output=True, text=True, check=True).stdout
    assert re.search(rf"^Pages:\s+{len(pages)}$", info, re.MULTILINE)
    assert len(re.findall(rb"/Type\s*/Page\b(?!s)", pdf.read_bytes())) == len(pages)
    assert len(pages) <= 15  # the demo's report was 20 pages before the summary and detail for not-ok only
    fonts = subprocess.run(["pdffonts", str(pdf)], capture_output=True, text=True, check=True).stdout.splitlines()
    assert [line.split()[0].split("+")[-1] for line in fonts[2:]] == ["DejaVuSans", "DejaVuSans-Bold"]
    assert all(" yes yes yes " in line for line in fonts[2:])  # embedded, subset, with a Unicode map
    words = []
    for width, height, boxes in pages:
        for x0, y0, x1, y1, text in boxes:
            assert x0 >= 0 and y0 >= 0 and x1 <= width and y1 <= height, text
        words.append([b[4] for b in boxes])
    text = [" ".join(w) for w in words]
    for c in demo_run["check"]["circuits"]:
        assert c["circuit"] in " ".join(words[0])  # the summary on page 1 names every circuit
        assert f"{c['leakage_ma']:.3f}" in " ".join(text)
    assert "Before installation" in text[0] and "Caution: leakbudget is a planning aid" in text[0]
    assert "IΔn" in " ".join(text)  # the Greek letter survives (it is not in the PDF standard fonts)
    # poppler renders every page
    subprocess.run(["pdftoppm", "-r", "30", "-png", str(pdf), str(tmp_path / "page")], check=True)
    assert len(list(tmp_path.glob("page-*.png"))) == len(pages)


def test_pdf_chart_pixels_show_the_check_numbers(demo_run, tmp_path):
    """P-OUT's chart as poppler rasterises it: bar length / budget line offset = sum / budget (within 2 %)."""
    c = next(c for c in demo_run["check"]["circuits"] if c["circuit"] == "P-OUT")
    page, top = next(  # the chart's headline: "P-OUT: 1.978 mA, 110 % of budget, over-budget"
        (i + 1, boxes[k][1])
        for i, (_, _, boxes) in enumerate(pdf_words(demo_run["pdf_path"]))
        for k in range(len(boxes) - 3)
        if [b[4] for b in boxes[k : k + 3]] == ["P-OUT:", f"{c['gate_ma']:.3f}", "mA,"]
    )
    dpi, height_in = 144, 1.9  # the title, bar and axis bands of a circuit chart, above its legend
    crop = ["-x", "0", "-y", str(int(top / 72 * dpi) - 4), "-W", str(int(8.27 * dpi)), "-H", str(int(height_in * dpi))]
    out = tmp_path / "chart"
    subprocess.run(
        [
            "pdftoppm",
            "-r",
            str(dpi),
            "-f",
            str(page),
            "-l",
            str(page),
            "-singlefile",
            *crop,
            str(demo_run["pdf_path"]),
            str(out),
        ],
        check=True,
    )
    image = decode(out.with_suffix(".ppm").read_bytes())
    budget_col, budget_px = line_column(image, charts.BUDGET_COLOUR)
    no_trip_col, no_trip_px = line_column(image, charts.NO_TRIP_COLOUR)
    bar = stacked_bar(image)
    assert budget_px > 30 and no_trip_px > 50
    offset = budget_col + 1 - bar.left
    assert (bar.right + 1 - bar.left) / offset == pytest.approx(c["leakage_ma"] / c["budget_ma"], rel=0.02)
    # UL 943 Class A: no trip below 4 mA, against the 1.8 mA budget
    assert (no_trip_col + 1 - bar.left) / offset == pytest.approx(c["no_trip_ma"] / c["budget_ma"], rel=0.02)


def test_findings_equal_review_json(demo_run):
    doc, html = demo_run["review"], demo_run["html"]
    rows = html.tables["findings"][1:]
    assert len(rows) == len(doc["findings"]) > 0
    for f, row in zip(doc["findings"], rows, strict=True):  # both most severe first, then in circuit order
        assert [cell["text"] for cell in row] == [
            f["severity"],
            f["circuit"] or "-",
            f["load"] or "-",
            f["message"],
            f["source"],
        ]
    assert f"Reviewed against {doc['code_label']} ({doc['code_source']})." in demo_run["raw_html"]


def test_code_option_reaches_the_review(make_workbook, tmp_path, capsys, monkeypatch):
    out = tmp_path / "r.html"
    code, stdout, _ = run_cli(
        ["report", str(make_workbook()), "--html", str(out), "--code", "bs-7671"], capsys, monkeypatch
    )
    assert code == 0
    assert "Reviewed against BS 7671" in stdout
    assert "Reviewed against BS 7671" in out.read_text(encoding="utf-8")
    code, _, err = run_cli(
        ["report", str(make_workbook()), "--html", str(out), "--code", "nec-1999"], capsys, monkeypatch
    )
    assert code == 2 and err.startswith("Error: 'nec-1999' is not a code leakbudget reviews against")


# ---- the small workbook: physics against published figures -------------------------------------------------------


def test_small_workbook_report_against_published_figures(make_workbook, tmp_path):
    job = report(make_workbook(), html=tmp_path / "r.html", generated=dt.date(2026, 1, 5), all_circuits=True)
    html = read_html((tmp_path / "r.html").read_text(encoding="utf-8"))
    rows = {row[0]["text"]: _numbers(row) for row in html.tables["circuits"][1:]}
    # UL 943 Class A trips at 6 mA; 30 % of it by analogy with BS 7671:2018 reg. 531.3.2 = 1.8 mA.
    assert float(rows["K1"]["budget_ma"]["value"]) == pytest.approx(0.30 * 6.0)
    # IEC 61008-1: 30 mA RCD, no operation below 0.5 IΔn = 15 mA; budget 30 % of IΔn = 9 mA (BS 7671 531.3.2).
    assert float(rows["E1"]["no_trip_ma"]["value"]) == pytest.approx(15.0)
    assert float(rows["E1"]["budget_ma"]["value"]) == pytest.approx(9.0)
    # I = 2πfCV: 4.7 nF at 120 V 60 Hz = 0.2126 mA (physics, computed here independently)
    filter_ma = 2 * math.pi * 60 * 4.7e-9 * 120 * 1e3
    load = _numbers(html.tables["loads-K1"][1])
    assert float(load["leakage_ma"]["value"]) == pytest.approx(filter_ma, abs=1e-4)
    assert load["leakage_ma"]["text"] == f"{filter_ma:.3f}"
    assert job.report.verdict.text == "Every protected circuit is within its budget."


def test_job_settings_head_the_report(tmp_path):
    sheets = basic_sheets()
    sheets["Settings"] = [
        ["Setting", "Value"],
        ["Job", "Bakery fit-out, ground floor"],
        ["Site", "4 Tallow Lane, Eskbridge"],
        ["Client", "Fennick Bakes"],
        ["Prepared by", "J. Arkwright"],
    ]
    workbook = write_workbook(tmp_path / "bakery.xlsx", sheets)
    report = build_report(check(read_project(workbook)), generated=dt.date(2026, 3, 1))
    text = render_html(report)
    assert "<title>Bakery fit-out, ground floor</title>" in text
    assert '<p class="sub">4 Tallow Lane, Eskbridge · Fennick Bakes</p>' in text
    assert "<dt>Prepared by</dt><dd>J. Arkwright</dd>" in text
    assert "Job" not in [row[0].text for row in next(t for t in iter_tables(report) if t.name == "settings").rows]


def test_circuit_ids_with_spaces_give_working_links(tmp_path):
    sheets = basic_sheets()
    sheets["Circuits"][1][0] = "Kitchen 1"
    sheets["Circuits"][2][0] = "Kitchen_1"
    sheets["Loads"][1][1], sheets["Loads"][2][1] = "Kitchen 1", "Kitchen_1"
    project = read_project(write_workbook(tmp_path / "s.xlsx", sheets))
    text = render_html(build_report(check(project), all_circuits=True))
    assert {"circuit-Kitchen_1", "circuit-Kitchen_1-2"} <= set(read_html(text).sections)
    assert '<a href="#circuit-Kitchen_1">Circuit Kitchen 1</a>' in text
    assert '<a href="#circuit-Kitchen_1-2">Circuit Kitchen_1</a>' in text


def test_workbook_text_is_escaped(tmp_path):
    sheets = basic_sheets()
    sheets["Loads"][1][0] = "<script>alert('x')</script>"
    sheets["Circuits"][1].append(None)
    text = render_html(build_report(check(read_project(write_workbook(tmp_path / "x.xlsx", sheets)))))
    assert "<script>" not in text
    assert "&lt;script&gt;alert(&#x27;x&#x27;)&lt;/script&gt;" in text


# ---- sections filled from the review and the split planner ------------------------------------------------------


@dataclass
class Finding:
    severity: str
    rule: str
    source: str
    circuit: str | None
    load: str | None
    message: str


def test_findings_are_listed_most_severe_first(make_workbook):
    result = check(read_project(make_workbook()))
    findings = [
        Finding("info", "room-unclassified", "common practice", "K1", None, "Room 'Snug' could not be classified."),
        Finding(
            "error",
            "location-protection",
            "NEC 2023 210.8(A)(1)",
            "K1",
            None,
            "Bathroom receptacle needs GFCI protection.",
        ),
        Finding("warning", "waveform", "IEC 62423", "E1", "Meter", "Smooth-DC leakage on a Type A RCD."),
    ]
    report = build_report(result, findings=findings)
    table = next(t for t in iter_tables(report) if t.name == "findings")
    assert [row[0].text for row in table.rows] == ["error", "warning", "info"]
    assert table.rows[0][3].note == "rule: location-protection" and table.rows[0][4].text == "NEC 2023 210.8(A)(1)"
    section = next(s for s in report.sections if s.anchor == "findings")
    assert section.blocks[0].text.startswith("3 finding(s): 1 error, 1 warning, 1 info. ")
    assert report.verdict.text == (
        "Every protected circuit is within its budget. The review found 1 error(s): see 'Review findings'."
    )


def test_findings_section_says_when_the_review_was_not_run_or_found_nothing(make_workbook):
    result = check(read_project(make_workbook()))
    for findings, text in (
        (None, "The compliance review was not run for this report."),
        ([], "The review found nothing to report for the rules it checks."),
    ):
        section = next(s for s in build_report(result, findings=findings).sections if s.anchor == "findings")
        assert section.blocks[0].text == text


def test_split_plan_section_equals_split_json(tmp_path, capsys, monkeypatch):
    # two 6 mA loads on one 30 mA RCD: 12 mA is over the 9 mA budget (BS 7671:2018 reg. 531.3.2, 30 % of IΔn)
    # and below the 15 mA no-trip level (IEC 61008-1, 0.5 IΔn); one of them needs a circuit of its own
    sheets = {
        "Circuits": [CIRCUITS_HEADER, ["E1", "rcd-30", 230, 50, "single", 32, None, "Office"]],
        "Loads": [
            LOADS_HEADER,
            ["Server A", "E1", None, 1, "6 mA", None, None, None, "Office"],
            ["Server B", "E1", None, 1, "6 mA", None, None, None, "Office"],
        ],
    }
    workbook = write_workbook(tmp_path / "servers.xlsx", sheets)
    code, out, _ = run_cli(["split", str(workbook), "--no-write", "--json"], capsys, monkeypatch)
    plan = json.loads(out)
    assert code == 0 and plan["new_circuits"] == 1
    code, out, _ = run_cli(
        ["report", str(workbook), "--html", str(tmp_path / "r.html"), "--split"], capsys, monkeypatch
    )
    assert code == 0 and f"Split plan: {plan['summary']}" in " ".join(out.split())
    html = read_html((tmp_path / "r.html").read_text(encoding="utf-8"))
    moved = [a for a in plan["assignments"] if a["moved"] or a["placed"]]
    assert [[c["text"] for c in row] for row in html.tables["split-moves"][1:]] == [
        [a["load"], a["from"], a["to"], f"{a['leakage_ma']:.3f}"] for a in moved
    ]
    assert [row[0]["text"] for row in html.tables["split-new"][1:]] == ["NEW-1"]
    after = html.tables["split-circuits"][1:]
    for c, row in zip(plan["circuits"], after, strict=True):
        cells = _numbers(row)
        assert row[0]["text"] == c["circuit"] and row[4]["text"] == c["status"] == "ok"
        assert float(cells["leakage_ma"]["value"]) == c["leakage_ma"]
        assert float(cells["current_a"]["value"]) == c["current_a"]
    assert "split-overview" in html.figures
    report = build_report(check(read_project(workbook)), plan=plan)
    assert report.verdict.text.endswith(
        "The split plan in this report brings every protected circuit within its budget and current limit."
    )
    section = next(s for s in report.sections if s.anchor == "split")
    assert section.blocks[0].text == plan["summary"]


@pytest.mark.slow
def test_unprotected_only_plan_renders_without_overview(tmp_path):
    sheets = basic_sheets()
    for row in sheets["Circuits"][1:]:
        row[1] = "none"
    report = build_report(check(read_project(write_workbook(tmp_path / "u.xlsx", sheets))))
    html = read_html(render_html(report))
    assert "overview" not in html.figures and set(html.figures) == {"chart-K1", "chart-E1"}
    assert report.verdict.text == "Every protected circuit is within its budget."
    assert render_pdf(report).startswith(b"%PDF-")


def test_report_file_takes_the_workbook_permissions_and_keeps_its_own_when_replaced(make_workbook, tmp_path):
    workbook = make_workbook()
    workbook.chmod(0o644)
    out = tmp_path / "r.html"
    report(workbook, html=out)
    assert out.stat().st_mode & 0o777 == 0o644
    out.chmod(0o640)
    report(workbook, html=out)
    assert out.stat().st_mode & 0o777 == 0o640
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith("r.html")] == ["r.html"]  # no temp left


def test_overview_is_split_so_each_chart_fits_a_page(tmp_path):
    from benchmarks.workbooks import make_workbook
    from leakbudget.reporting.content import OVERVIEW_ROWS
    from leakbudget.reporting.pdf import FOOTER_IN, MARGIN_IN, PAGE_H_IN

    workbook = make_workbook(tmp_path / "floor.xlsx", 150)  # 30 circuits on 30 mA RCDs
    report = build_report(check(read_project(workbook)))
    section = next(s for s in report.sections if s.anchor == "circuits")
    overviews = [b for b in section.blocks if hasattr(b, "chart")]
    assert [f.name for f in overviews] == ["overview-1", "overview-2"]
    assert [f.alt.count(" %") for f in overviews] == [OVERVIEW_ROWS, 30 - OVERVIEW_ROWS]
    assert all(f.chart.height_in < PAGE_H_IN - 2 * MARGIN_IN - FOOTER_IN - 0.5 for f in overviews)


def test_summary_of_a_dual_rcd_board_names_the_device_not_the_circuits_it_carries(tmp_path):
    from leakbudget.output.check import to_json
    from leakbudget.output.split import to_json as split_json

    # the UK example: RCD1 (30 mA) carries 14.1 mA from five circuits, over its 9 mA budget (BS 7671:2018 reg.
    # 531.3.2, 30 % of IΔn); each circuit alone is within it, so the change is at the device
    workbook = tmp_path / "tanners-row-flat.xlsx"
    shutil.copyfile(example_path("tanners-row-flat.xlsx"), workbook)
    job = report(workbook, html=tmp_path / "r.html", split=SplitOptions())
    doc, plan = to_json(job.review.check), split_json(job.plan)
    summary = next(s for s in job.report.sections if s.anchor == "summary")
    tables = {b.name: b for b in summary.blocks if isinstance(b, Table)}
    assert [row[0].text for row in tables["summary-devices"].rows] == [d["id"] for d in doc["devices"]]
    rcd1 = next(d for d in doc["devices"] if d["id"] == "RCD1")
    assert rcd1["status"] == "over-budget" and rcd1["budget_ma"] == pytest.approx(0.30 * 30)
    texts = [b.text for b in summary.blocks if isinstance(b, Paragraph)]
    line = next(t for t in texts if t.startswith("RCD1: "))
    assert line.endswith(f"Circuits below it: {', '.join(rcd1['circuits'])}.")
    carried = [c["circuit"] for c in doc["circuits"] if c.get("protected_by") == "RCD1"]
    assert carried and all((c["headroom_used"] or 0) <= 1 for c in doc["circuits"] if c["circuit"] in carried)
    assert not any(t.startswith(f"{cid}: ") for cid in carried for t in texts)
    assert {row[1].text for row in tables["summary-circuits"].rows if row[0].text in carried} == {"behind RCD1"}
    moved = [m for m in plan["circuit_assignments"] if m["moved"]]
    plan_line = next(t for t in texts if t.startswith("The split plan"))
    assert moved and all(f"circuit {m['circuit']} from {m['from']} to {m['to']}" in plan_line for m in moved)
