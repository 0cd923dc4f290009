"""How the command line ends its process (``leakbudget.cli.app.leave``): at once, but with the exit functions run,
the output flushed and the exit status kept; Python's own exit whenever a fast one could lose something."""

from __future__ import annotations

import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def run_python(code: str, *args: str, stdout: int = subprocess.PIPE) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-c", textwrap.dedent(code), *args],
        stdout=stdout,
        stderr=subprocess.PIPE,
        text=True,
        cwd=ROOT,
        timeout=120,
    )


MAIN = """
    import atexit, sys
    atexit.register(lambda: print("exit function ran", file=sys.stderr))
    sys.argv = ["leakbudget", *sys.argv[1:]]
    from leakbudget.cli import script
    script()
"""


def test_the_exit_functions_run_and_the_output_is_whole():
    done = run_python(MAIN, "--version")
    assert done.returncode == 0
    from leakbudget import __version__

    assert done.stdout == f"leakbudget {__version__}\n"
    assert "exit function ran" in done.stderr


@pytest.mark.parametrize("found", ["exists", "missing"])
def test_the_exit_status_is_the_commands(tmp_path: Path, make_workbook, found: str):
    path = make_workbook() if found == "exists" else tmp_path / "no-such.xlsx"
    done = run_python(MAIN, "check", str(path), "--no-write", "--json")
    if found == "missing":
        assert done.returncode == 2 and "does not exist" in done.stderr and done.stdout == ""
    else:
        import json

        document = json.loads(done.stdout)  # flushed whole before the process ended
        assert done.returncode == (0 if document["all_ok"] else 1)
    assert "exit function ran" in done.stderr


def test_a_thread_still_running_is_waited_for():
    code = """
        import sys, threading, time
        def late():
            time.sleep(0.3)
            print("thread finished", flush=True)
        threading.Thread(target=late).start()
        from leakbudget.cli.app import leave
        leave(3)
    """
    done = run_python(code)
    assert done.returncode == 3 and done.stdout == "thread finished\n"


def test_a_status_that_is_not_a_number_is_left_to_python():
    done = run_python("from leakbudget.cli.app import leave\nleave('stopped: no workbook')")
    assert done.returncode == 1 and "stopped: no workbook" in done.stderr


def test_output_that_cannot_be_flushed_is_left_to_python():
    """A reader that went away before the output was flushed (``| head -1``): Python's own exit reports it, with
    status 120 as Python documents for a failed flush at exit (sys.exit), instead of a silent success."""
    code = """
        import io, sys, time
        sys.stdout = io.TextIOWrapper(open(1, "wb", buffering=1 << 20, closefd=False))
        sys.stdout.write("x" * 100_000)  # stays in the buffer until the exit flushes it
        time.sleep(0.3)  # the reader has gone by then
        from leakbudget.cli.app import leave
        leave(0)
    """
    process = subprocess.Popen(
        [sys.executable, "-c", textwrap.dedent(code)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, cwd=ROOT
    )
    assert process.stdout is not None and process.stderr is not None
    process.stdout.close()
    errors = process.stderr.read().decode()
    assert process.wait(timeout=120) == 120 and "BrokenPipeError" in errors
