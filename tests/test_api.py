"""The front door: `import leakbudget` gives check, split, review, report and read_project; results as frames."""

from __future__ import annotations

import doctest
import json
import re
import subprocess
import sys
from pathlib import Path

import pytest
from typer.testing import CliRunner

import leakbudget
from leakbudget.api import copy_example, example_path
from leakbudget.cli import app

README = Path(__file__).resolve().parents[1] / "README.md"


def readme_session() -> str:
    """The ```pycon block of the README's "Python API" section."""
    text = README.read_text(encoding="utf-8")
    section = text[text.index("## Python API") :]
    match = re.search(r"```pycon\n(.*?)```", section, re.S)
    assert match, "the Python API section has no pycon session"
    return match.group(1)


def test_the_readme_python_session_runs_with_its_shown_output(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    copy_example(tmp_path)
    test = doctest.DocTestParser().get_doctest(readme_session(), {}, "README Python API", str(README), 0)
    runner = doctest.DocTestRunner(optionflags=doctest.NORMALIZE_WHITESPACE)
    runner.run(test)
    assert runner.failures == 0 and runner.tries > 10


def test_front_door_names_and_a_cheap_import():
    assert set(leakbudget.__all__) >= {"check", "split", "review", "report", "read_project"}
    # Importing the package loads neither pandas, scipy nor matplotlib, nor the CLI's typer and rich, nor Dask.
    code = (
        "import sys, leakbudget; leakbudget.check; leakbudget.check_many; "
        "print([m for m in ('pandas', 'scipy', 'matplotlib', 'typer', 'rich', 'dask', 'distributed') "
        "if m in sys.modules])"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


def test_check_writes_nothing_unless_asked(tmp_path):
    path = copy_example(tmp_path)
    before = path.read_bytes()
    job = leakbudget.check(path)
    assert job.written is None and path.read_bytes() == before
    assert list(tmp_path.iterdir()) == [path]
    job = leakbudget.check(path, out=tmp_path / "copy.xlsx")
    assert job.written.path == tmp_path / "copy.xlsx" and path.read_bytes() == before
    job = leakbudget.check(path, write=True)
    assert job.written.path == path and path.read_bytes() != before


@pytest.mark.parametrize("command", ["check", "split", "review"])
def test_documents_and_frames_equal_what_the_command_prints(tmp_path, monkeypatch, command):
    monkeypatch.chdir(tmp_path)
    path = copy_example(tmp_path)
    printed = json.loads(CliRunner().invoke(app, [command, str(path.name), "--json", "--no-write"]).stdout)
    job = getattr(leakbudget, command)(path.name)
    doc = job.document()
    printed.pop("time_s", None), doc.pop("time_s", None)
    assert doc == printed
    frames = {
        "check": {"circuits": "circuits_frame", "loads": "loads_frame"},
        "split": {"assignments": "assignments_frame", "circuits": "circuits_frame"},
        "review": {"findings": "findings_frame"},
    }[command]
    for key, method in frames.items():
        df = getattr(job, method)()
        assert list(df.columns) == list(printed[key][0])  # the document's keys, in its order
        assert len(df) == len(printed[key])
        assert df.to_dict("records")[0].keys() == printed[key][0].keys()


def test_read_project_gives_the_workbook_as_a_project():
    project = leakbudget.read_project(example_path())
    assert {c.circuit_id for c in project.circuits} >= {"K-CTR1", "O-DESK"}


def test_the_streamed_check_document_is_the_document(tmp_path) -> None:
    # the streamed text (check --json) must be exactly what json.dumps (the standard library) gives for document()
    import json

    from tests.conftest import basic_sheets, write_workbook

    for sheets in (basic_sheets(), {**basic_sheets(), "Loads": basic_sheets()["Loads"][:1]}):
        path = write_workbook(tmp_path / "plan.xlsx", sheets)
        job = leakbudget.check(path)
        streamed = "".join(job.document_chunks())
        assert streamed == json.dumps(job.document(), indent=2, ensure_ascii=False, allow_nan=False)
        assert json.loads(streamed) == job.document()
