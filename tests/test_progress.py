"""Progress of long work: the callback protocol jobs speak, and the bar the command line draws only on a terminal.

The terminal is a real pseudo-terminal (os.openpty) around a real `leakbudget` process; "piped" is typer's
CliRunner, whose output is not a terminal.
"""

from __future__ import annotations

import gc
import json
import os
import pty
import subprocess
import sys
from pathlib import Path

import pytest
from typer.testing import CliRunner

from benchmarks.workbooks import make_workbook
from leakbudget.api import bulk_work, check
from leakbudget.cli.app import app
from leakbudget.progress import tracked

ROOT = Path(__file__).resolve().parents[1]
STAGES = ["Reading", "Estimating", "Writing 'Circuit results'", "Writing 'Load results'"]


def test_tracked_yields_everything_and_reports_every_n_and_the_end():
    heard: list[tuple[str, int, int]] = []
    items = list(tracked(range(25), 25, "Planning", lambda *a: heard.append(a), every=10))
    assert items == list(range(25))
    assert heard == [("Planning", 0, 25), ("Planning", 10, 25), ("Planning", 20, 25), ("Planning", 25, 25)]
    assert list(tracked("abc", 3, "Quiet", None)) == ["a", "b", "c"]


def test_check_reports_each_stage_from_start_to_end(tmp_path: Path):
    path = make_workbook(tmp_path / "ward.xlsx", 60)
    heard: list[tuple[str, int, int]] = []
    check(path, out=tmp_path / "out.xlsx", progress=lambda *a: heard.append(a))
    stages = list(dict.fromkeys(stage for stage, _, _ in heard))
    assert stages == ["Reading ward.xlsx", "Estimating", "Writing 'Circuit results'", "Writing 'Load results'"]
    for stage in stages:
        reports = [(done, total) for s, done, total in heard if s == stage]
        assert reports[-1][0] == reports[-1][1] and [d for d, _ in reports] == sorted(d for d, _ in reports)
    load_rows = [total for s, _, total in heard if s == "Writing 'Load results'"][0]
    assert load_rows == 60 + 12 + 2  # loads, one cable line per circuit, a blank row and the footer line


def test_the_garbage_collector_is_paused_only_during_the_work():
    assert gc.isenabled()
    with pytest.raises(RuntimeError), bulk_work():
        assert not gc.isenabled()
        raise RuntimeError("boom")
    assert gc.isenabled()
    gc.disable()
    try:
        with bulk_work():
            pass
        assert not gc.isenabled()  # left as the caller had it
    finally:
        gc.enable()


def run_on_terminal(args: list[str]) -> tuple[int, str]:
    """Run leakbudget with stdout and stderr on a pseudo-terminal; return its exit code and all it wrote."""
    controller, terminal = pty.openpty()
    env = {**os.environ, "PYTHONPATH": str(ROOT), "COLUMNS": "120", "TERM": "xterm"}
    process = subprocess.Popen(
        [sys.executable, "-m", "leakbudget", *args], stdin=terminal, stdout=terminal, stderr=terminal, env=env
    )
    os.close(terminal)
    chunks = []
    while True:
        try:
            data = os.read(controller, 65536)
        except OSError:  # the terminal closed when the process ended
            break
        if not data:
            break
        chunks.append(data)
    os.close(controller)
    return process.wait(timeout=120), b"".join(chunks).decode("utf-8", "replace")


def test_a_terminal_gets_a_bar_per_stage(tmp_path: Path):
    path = make_workbook(tmp_path / "ward.xlsx", 60)
    code, shown = run_on_terminal(["check", str(path), "--out", str(tmp_path / "out.xlsx")])
    assert code in (0, 1), shown
    positions = [shown.find(stage) for stage in STAGES]
    assert -1 not in positions and positions == sorted(positions), positions
    assert "━" in shown and "100%" in shown  # rich's bar and its percentage


def test_json_on_a_terminal_has_no_bar(tmp_path: Path):
    path = make_workbook(tmp_path / "ward.xlsx", 60)
    code, shown = run_on_terminal(["check", str(path), "--json", "--no-write"])
    assert code in (0, 1)
    assert not any(stage in shown for stage in STAGES) and "━" not in shown
    assert json.loads(shown[: shown.rindex("}") + 1])["loads"][0]["load"] == "Load 1"


def test_piped_output_has_no_bar(tmp_path: Path):
    path = make_workbook(tmp_path / "ward.xlsx", 60)
    result = CliRunner().invoke(app, ["check", str(path), "--out", str(tmp_path / "out.xlsx")])
    assert result.exit_code in (0, 1), result.output
    assert "Results written to" in result.stdout
    assert not any(stage in result.output for stage in STAGES) and "━" not in result.output


def test_a_big_project_shows_the_circuits_nearest_their_budget(tmp_path: Path):
    """A campus has thousands of circuits; the terminal shows the 40 using most of their budget, all of the
    over-budget ones among them when they fit, and says where the rest are."""
    from leakbudget.cli.render import TERMINAL_TABLE_ROWS

    path = make_workbook(tmp_path / "campus.xlsx", 1_000)  # 200 circuits
    result = CliRunner().invoke(app, ["check", str(path), "--no-write"], env={"COLUMNS": "200"})
    doc = json.loads(CliRunner().invoke(app, ["check", str(path), "--no-write", "--json"]).stdout)
    table = result.stdout[: result.stdout.index("Showing")]
    shown = [line.split()[0] for line in table.splitlines() if line.strip().startswith("C0")]
    assert len(shown) == TERMINAL_TABLE_ROWS
    over = [c["circuit"] for c in doc["circuits"] if c["status"] in ("over-budget", "trip-risk")]
    used = sorted((c["headroom_used"] for c in doc["circuits"]), reverse=True)
    expected = [c["circuit"] for c in doc["circuits"] if c["headroom_used"] >= used[TERMINAL_TABLE_ROWS - 1]]
    assert shown == expected and set(over[:TERMINAL_TABLE_ROWS]) <= set(shown)  # in sheet order
    assert f"Showing {TERMINAL_TABLE_ROWS} of 200 circuits" in result.stdout
