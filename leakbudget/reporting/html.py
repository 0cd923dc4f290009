"""Lay a :class:`leakbudget.reporting.document.Report` out as one self-contained HTML document.

Inline CSS, charts as inline SVG (vector, text selectable), no scripts and no external fetches: the file can be mailed, archived
and opened offline. Every text from the workbook is escaped. Number cells carry ``data-key`` (the ``check --json``
key) and ``data-value`` (its value) so a reader's tools, and the tests, can compare them with the check.
"""

from __future__ import annotations

import html
import re

from leakbudget.reporting.document import Cell, Facts, Figure, Paragraph, Report, Section, Table

TONES = ("ok", "marginal", "over-budget", "trip-risk", "unprotected", "error", "warning", "info", "caution", "muted")

CSS = """
:root { --paper:#f4f1ea; --card:#ffffff; --ink:#1f2a36; --soft:#5b6672; --rule:#ddd7ca; --accent:#1d5c63;
  --ok:#2e7d4f; --marginal:#8a7a00; --over:#b36b00; --trip:#b3122a; --unprot:#6b5b95; --info:#3f5f8a; }
* { box-sizing: border-box; }
body { margin:0; background:var(--paper); color:var(--ink);
  font:15px/1.5 "Segoe UI", "Helvetica Neue", Arial, sans-serif; }
main { max-width: 1040px; margin: 24px auto; background:var(--card); padding: 0 40px 32px;
  border-top: 8px solid var(--accent); box-shadow: 0 1px 4px rgba(0,0,0,.08); }
header.cover { padding: 28px 0 18px; border-bottom: 1px solid var(--rule); }
.eyebrow { text-transform: uppercase; letter-spacing: .14em; font-size: 12px; color: var(--accent); margin: 0; }
h1 { font-size: 30px; margin: 6px 0 2px; line-height: 1.2; }
.sub { color: var(--soft); margin: 0 0 14px; }
.verdict { font-weight: 600; padding: 10px 14px; border-left: 5px solid currentColor; background: #faf8f3; }
ul.counts { list-style: none; padding: 0; margin: 10px 0 0; display: flex; gap: 8px; flex-wrap: wrap; }
ul.counts li { border: 1px solid currentColor; border-radius: 14px; padding: 1px 12px; font-size: 13px; }
nav.toc { font-size: 13px; padding: 10px 0; border-bottom: 1px solid var(--rule); column-count: 3; }
nav.toc ol { margin: 0; padding-left: 20px; }
nav.toc a { color: var(--accent); text-decoration: none; }
section { padding: 6px 0 10px; border-bottom: 1px solid var(--rule); }
h2 { font-size: 20px; color: var(--accent); margin: 20px 0 8px; }
h3 { font-size: 16px; color: var(--accent); margin: 16px 0 6px; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 4px 18px; margin: 8px 0 12px; }
dl.facts dt { color: var(--soft); }
dl.facts dd { margin: 0; }
p.caution { background: #fff4e5; border-left: 5px solid var(--over); padding: 8px 12px; }
p.muted { color: var(--soft); font-size: 14px; }
figure { margin: 12px 0; }
figure svg.chart { max-width: 100%; height: auto; border: 1px solid var(--rule); display: block; }
figcaption { font-size: 13px; color: var(--soft); margin-top: 4px; }
.table-wrap { overflow-x: auto; margin: 8px 0 16px; }
table { border-collapse: collapse; width: 100%; font-size: 13px; }
caption { text-align: left; font-weight: 600; padding: 4px 0 6px; }
th { text-align: left; background: #eef2f1; color: var(--accent); font-weight: 600; padding: 6px 8px;
  border-bottom: 2px solid var(--accent); vertical-align: bottom; }
td { padding: 5px 8px; border-bottom: 1px solid var(--rule); vertical-align: top; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td small.src, dd small.src { display: block; color: var(--soft); font-size: 11.5px; white-space: normal;
  text-align: left; max-width: 28em; }
.badge { display: inline-block; font-size: 10.5px; line-height: 1.5; padding: 0 6px; margin-left: 4px;
  border-radius: 8px; border: 1px solid; white-space: nowrap; vertical-align: 1px; }
.k-published { color: #1f4e8c; background: #e8f0fb; }
.k-measured { color: #1f6b3a; background: #e6f4ea; }
.k-computed { color: #1d5c63; background: #e3f1f2; }
.k-typical-from-memory { color: #8a5300; background: #fff1d6; font-style: italic; }
.k-common-practice { color: #5b6672; background: #eef0f2; }
.k-user-setting { color: #4b3f7a; background: #efeaf8; }
.k-default { color: #6d7680; background: #f6f6f6; }
.tone-ok { color: var(--ok); } .tone-marginal { color: var(--marginal); } .tone-over-budget { color: var(--over); } .tone-trip-risk { color: var(--trip); }
.tone-unprotected { color: var(--unprot); } .tone-error { color: var(--trip); } .tone-warning { color: var(--over); }
.tone-info { color: var(--info); }
td.tone-ok, td.tone-marginal, td.tone-over-budget, td.tone-trip-risk, td.tone-unprotected, td.tone-error, td.tone-warning,
td.tone-info { font-weight: 600; }
footer { font-size: 12px; color: var(--soft); padding-top: 14px; }
@media print {
  body { background: #fff; font-size: 11pt; }
  main { box-shadow: none; margin: 0; max-width: none; padding: 0; border-top: 0; }
  nav.toc { display: none; }
  figure, tr, dl.facts { break-inside: avoid; }
  section { break-before: auto; }
  h2 { break-after: avoid; }
  @page { size: A4; margin: 14mm; }
}
"""


def _e(text: object) -> str:
    return html.escape(str(text), quote=True)


def _slug(text: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")


def _badge(kind: str | None) -> str:
    return f'<span class="badge k-{_slug(kind)}">{_e(kind)}</span>' if kind else ""


def _cell_body(cell: Cell) -> str:
    body = _e(cell.text) + (_badge(cell.kind) if cell.kind != cell.text else "")
    if cell.note:
        body += f'<small class="src">{_e(cell.note)}</small>'
    return body


def _td(cell: Cell) -> str:
    classes = []
    attrs = ""
    if cell.key is not None:
        attrs += f' data-key="{_e(cell.key)}"'
        if cell.value is not None:
            attrs += f' data-value="{_e(repr(cell.value))}"'
        if cell.value is not None or cell.text == "-":
            classes.append("num")
    if cell.tone in TONES:
        classes.append(f"tone-{cell.tone}")
    cls = f' class="{" ".join(classes)}"' if classes else ""
    return f"<td{cls}{attrs}>{_cell_body(cell)}</td>"


def _table(table: Table) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in table.headers)
    rows = "\n".join("<tr>" + "".join(_td(c) for c in row) + "</tr>" for row in table.rows)
    ident = f' id="t-{_slug(table.name)}" data-table="{_e(table.name)}"' if table.name else ""
    caption = f"<caption>{_e(table.caption)}</caption>" if table.caption else ""
    return (
        f'<div class="table-wrap"><table{ident}>{caption}<thead><tr>{head}</tr></thead>'
        f"<tbody>\n{rows}\n</tbody></table></div>"
    )


def _figure(fig: Figure) -> str:
    ident = f' id="f-{_slug(fig.name)}" data-figure="{_e(fig.name)}"' if fig.name else ""
    return f"<figure{ident}>{fig.chart.svg(fig.alt)}<figcaption>{_e(fig.caption)}</figcaption></figure>"


def _paragraph(p: Paragraph) -> str:
    if p.tone == "heading":
        return f"<h3>{_e(p.text)}</h3>"
    cls = f' class="{p.tone if p.tone in ("caution", "muted") else "tone-" + p.tone}"' if p.tone in TONES else ""
    return f"<p{cls}>{_e(p.text)}</p>"


def _facts(facts: Facts) -> str:
    items = "".join(f"<dt>{_e(label)}</dt><dd>{_cell_body(cell)}</dd>" for label, cell in facts.items)
    return f'<dl class="facts">{items}</dl>'


def _section(section: Section) -> str:
    parts = [f'<section id="{_e(section.anchor)}"><h2>{_e(section.title)}</h2>']
    for block in section.blocks:
        if isinstance(block, Table):
            parts.append(_table(block))
        elif isinstance(block, Figure):
            parts.append(_figure(block))
        elif isinstance(block, Facts):
            parts.append(_facts(block))
        else:
            parts.append(_paragraph(block))
    parts.append("</section>")
    return "\n".join(parts)


def render_html(report: Report) -> str:
    """The whole report as one HTML5 document (a string)."""
    counts = "".join(
        f'<li class="tone-{_e(status)}">{n} {_e(status)}</li>' for status, n in sorted(report.status_counts.items())
    )
    toc = "".join(f'<li><a href="#{_e(s.anchor)}">{_e(s.title)}</a></li>' for s in report.sections)
    verdict = report.verdict
    body = "\n".join(_section(s) for s in report.sections)
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="{_e(report.tool)}">
<title>{_e(report.title)}</title>
<style>{CSS}</style>
</head>
<body>
<main>
<header class="cover">
<p class="eyebrow">Standing earth-leakage report</p>
<h1>{_e(report.title)}</h1>
<p class="sub">{_e(report.subtitle)}</p>
<p class="verdict tone-{_e(verdict.tone or "muted")}">{_e(verdict.text)}</p>
<ul class="counts">{counts}</ul>
</header>
<nav class="toc"><ol>{toc}</ol></nav>
{body}
<footer>Prepared {_e(report.generated)} with {_e(report.tool)}. A planning aid: every figure is an estimate with
its source shown beside it; measurement on site and the code in force decide.</footer>
</main>
</body>
</html>
"""
