"""How fast leakbudget starts: `python benchmarks/startup.py [RUNS]` (default 9 runs of each command).

Times, in fresh processes, `leakbudget --help` and `leakbudget check` of an invented 20-load workbook (written into
a copy, so every run does the same work), against `python -c "import openpyxl"`, and prints each as a ratio to
that. Target: both ≤ 2×. The machine may be busy with other work, so each command's fastest run is compared (the
least disturbed one) and the median is shown beside it. `python -X importtime -m leakbudget check …` shows where
the time goes.

Python's compiled bytecode is kept (in a scratch folder, PYTHONPYCACHEPREFIX) and every command runs once untimed
first, as an installed package would have it: pip compiles the package on install, and a source checkout run with
PYTHONDONTWRITEBYTECODE=1 would otherwise compile leakbudget's modules on every start (about 50 ms).
"""

from __future__ import annotations

import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from benchmarks.workbooks import make_workbook  # noqa: E402

TARGET_RATIO = 2.0


def wall_times(command: list[str], runs: int, bytecode: Path, before=None) -> list[float]:  # noqa: ANN001
    """Wall-clock seconds of ``runs`` fresh processes of ``command`` after an untimed one (``before()`` runs
    untimed before each); bytecode is cached in the folder ``bytecode``."""
    env = {key: value for key, value in os.environ.items() if key != "PYTHONDONTWRITEBYTECODE"}
    env.update(PYTHONPATH=str(ROOT), PYTHONPYCACHEPREFIX=str(bytecode))
    times = []
    for _ in range(runs + 1):
        if before is not None:
            before()
        start = time.perf_counter()
        subprocess.run(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=False)
        times.append(time.perf_counter() - start)
    return times[1:]


def main(runs: int) -> None:
    python = sys.executable
    with tempfile.TemporaryDirectory() as folder:
        source = make_workbook(Path(folder) / "house.xlsx", 20)
        work = Path(folder) / "work.xlsx"
        fresh = lambda: shutil.copyfile(source, work)  # noqa: E731
        bytecode = Path(folder) / "bytecode"
        cases = {
            "import openpyxl": wall_times([python, "-c", "import openpyxl"], runs, bytecode),
            "leakbudget --help": wall_times([python, "-m", "leakbudget", "--help"], runs, bytecode),
            "leakbudget check (20 loads)": wall_times(
                [python, "-m", "leakbudget", "check", str(work)], runs, bytecode, fresh
            ),
        }
    base = min(cases["import openpyxl"])
    print(
        f"{'command':<30}{'fastest s':>10}{'median s':>10}{'ratio':>8}   (ratio = fastest / fastest import "
        f"openpyxl; target ≤ {TARGET_RATIO:g})"
    )
    for name, times in cases.items():
        print(f"{name:<30}{min(times):>10.3f}{statistics.median(times):>10.3f}{min(times) / base:>8.2f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 9)
