"""The reorganisation into subpackages changed no result: `check`, `split` and `review --json` on the demo give the
documents saved from version 0.1 before the move (tests/data/before_layout/, made with `leakbudget demo` and
`leakbudget COMMAND alder-quay-remodel.xlsx --json --no-write`), apart from the version and the planner's time."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest
from typer.testing import CliRunner

from leakbudget.cli import app

SAVED = Path(__file__).parent / "data" / "before_layout"
VARYING = {"tool", "time_s"}  # the version string and the planner's wall-clock time


def _comparable(doc: dict[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in doc.items() if k not in VARYING}


@pytest.mark.parametrize(("command", "exit_code"), [("check", 1), ("split", 0), ("review", 0)])
def test_demo_documents_are_those_saved_before_the_move(tmp_path, monkeypatch, command, exit_code):
    monkeypatch.chdir(tmp_path)
    runner = CliRunner()
    assert runner.invoke(app, ["demo"]).exit_code == 0
    result = runner.invoke(app, [command, "alder-quay-remodel.xlsx", "--json", "--no-write"])
    assert result.exit_code == exit_code, result.output
    saved = json.loads((SAVED / f"{command}.json").read_text(encoding="utf-8"))
    assert _comparable(json.loads(result.stdout)) == _comparable(saved)
