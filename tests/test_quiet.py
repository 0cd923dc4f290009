"""`--quiet` on every command that judges a workbook: the verdict, the counts, where results went, the caution."""

from __future__ import annotations

from pathlib import Path

import pytest
from typer.testing import CliRunner

from leakbudget.about import CAUTION
from leakbudget.cli.app import app
from tests.conftest import basic_sheets, write_workbook

runner = CliRunner()


@pytest.mark.parametrize(
    "command, expected",
    [
        (["check", "{p}", "--no-write", "--quiet"], "plan.xlsx: 2 circuit(s) (2 ok); every one within its budget."),
        (["review", "{p}", "--no-write", "--quiet"], "Review of plan.xlsx against"),
        (["split", "{p}", "--no-write", "--quiet"], "Split plan for plan.xlsx: 0 new circuit(s)"),
    ],
)
def test_quiet_prints_the_verdict_and_the_caution_only(tmp_path: Path, command: list[str], expected: str) -> None:
    path = write_workbook(tmp_path / "plan.xlsx", basic_sheets())
    result = runner.invoke(app, [c.format(p=path) for c in command])
    assert result.exit_code == 0, result.output
    text = " ".join(result.output.split())
    assert expected in text and " ".join(CAUTION.split()) in text
    loud = runner.invoke(app, [c for c in (x.format(p=path) for x in command) if c != "--quiet"])
    assert len(result.output.splitlines()) < len(loud.output.splitlines())
    assert len(result.output.splitlines()) <= 12  # the caution wraps over five of them at 80 columns


def test_quiet_check_says_where_results_went(tmp_path: Path) -> None:
    path = write_workbook(tmp_path / "plan.xlsx", basic_sheets())
    text = " ".join(runner.invoke(app, ["check", str(path), "-q"]).output.split())
    assert f"Results written to {path}" in text and "Previous version kept as" in text
