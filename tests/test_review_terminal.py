"""`review` on the terminal: a long list of findings is capped, the most severe first, with counts of the rest and
where the full list is; the full list is the `review --json` document (checked against it here)."""

from __future__ import annotations

import json
import re
import sys

import pytest

from benchmarks.workbooks import make_workbook
from leakbudget.api import example_path
from leakbudget.cli.app import main
from leakbudget.cli.render import TERMINAL_FINDINGS


def _run(args: list[str], capsys, monkeypatch) -> tuple[int, str]:
    monkeypatch.setattr(sys, "argv", ["leakbudget", *args])
    monkeypatch.setenv("COLUMNS", "300")
    with pytest.raises(SystemExit) as exit_info:
        main()
    return int(exit_info.value.code or 0), capsys.readouterr().out


HEADER = re.compile(r"^(error|warning|info) (\S+)(?: · (.*))?$")


def test_long_review_lists_the_most_severe_first_then_counts_the_rest(tmp_path, capsys, monkeypatch):
    workbook = make_workbook(tmp_path / "floor.xlsx", 500)  # an invented floor of 100 circuits
    _, out = _run(["review", str(workbook), "--no-write", "--json"], capsys, monkeypatch)
    doc = json.loads(out)
    findings = doc["findings"]
    assert len(findings) > TERMINAL_FINDINGS
    _, out = _run(["review", str(workbook), "--no-write"], capsys, monkeypatch)
    headers = [m.groups() for line in out.splitlines() if (m := HEADER.match(line))]
    expected = [
        (f["severity"], f["rule"], " / ".join(x for x in (f["circuit"], f["load"]) if x) or None)
        for f in findings[:TERMINAL_FINDINGS]
    ]
    assert headers == expected  # the first ones of the full list, which is most severe first
    rest = {s: sum(f["severity"] == s for f in findings[TERMINAL_FINDINGS:]) for s in ("error", "warning", "info")}
    words = {"error": "error(s)", "warning": "warning(s)", "info": "info"}
    more = ", ".join(f"{n:,} {words[s]}" for s, n in rest.items() if n)
    assert (
        f"Showing {TERMINAL_FINDINGS} of {len(findings):,} findings, the most severe first; not shown: {more}. "
        "Every finding is in --json and the report (`leakbudget report`)."
    ) in out
    counts = doc["counts"]
    assert f"{counts['error']} error(s), {counts['warning']} warning(s), {counts['info']} info." in out


def test_review_written_to_a_copy_names_the_sheet_for_the_full_list(tmp_path, capsys, monkeypatch):
    workbook = make_workbook(tmp_path / "floor.xlsx", 500)
    _, out = _run(["review", str(workbook), "--out", str(tmp_path / "reviewed.xlsx")], capsys, monkeypatch)
    assert "Every finding is in the 'Review findings' sheet, --json and the report" in " ".join(out.split())


def test_short_review_lists_every_finding(capsys, monkeypatch):
    workbook = example_path()  # the shipped demo: a handful of findings
    _, out = _run(["review", str(workbook), "--no-write", "--json"], capsys, monkeypatch)
    findings = json.loads(out)["findings"]
    assert 0 < len(findings) <= TERMINAL_FINDINGS
    _, out = _run(["review", str(workbook), "--no-write"], capsys, monkeypatch)
    assert sum(bool(HEADER.match(line)) for line in out.splitlines()) == len(findings)
    assert "Showing" not in out
