"""The layer contract: imports run one way (cli → api → … → physics) and no package has an import cycle.

The contract lives in pyproject.toml ([tool.importlinter]); import-linter (a PyPI package made for this) checks it.
The second test proves the check has teeth: the same contract on a copy of the package with one upward import
added must fail and name that import.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def lint_imports(project: Path) -> subprocess.CompletedProcess[str]:
    """Run import-linter on ``project`` (its pyproject.toml and its leakbudget/ folder, first on the path)."""
    env = {**os.environ, "PYTHONPATH": str(project)}
    script = "import sys; from importlinter.cli import lint_imports_command; sys.exit(lint_imports_command())"
    return subprocess.run(
        [sys.executable, "-c", script, "--config", str(project / "pyproject.toml"), "--no-cache"],
        cwd=project,
        env=env,
        capture_output=True,
        text=True,
    )


def test_imports_run_one_way_and_have_no_cycles():
    result = lint_imports(ROOT)
    assert result.returncode == 0, result.stdout + result.stderr
    assert "2 kept, 0 broken" in result.stdout


def test_an_upward_import_breaks_the_contract(tmp_path):
    shutil.copytree(ROOT / "leakbudget", tmp_path / "leakbudget", ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copy(ROOT / "pyproject.toml", tmp_path / "pyproject.toml")
    physics = tmp_path / "leakbudget" / "leakage.py"
    physics.write_text(
        physics.read_text(encoding="utf-8") + "\nfrom leakbudget.cli import app  # upward\n", encoding="utf-8"
    )
    result = lint_imports(tmp_path)
    assert result.returncode == 1, result.stdout + result.stderr
    assert "leakbudget.leakage -> leakbudget.cli" in result.stdout
    assert "BROKEN" in result.stdout
