"""The check and the review against the file format's floor: `python benchmarks/floor.py [--loads N] [--review-loads M]`.

Every figure is the CPU time (user + system, from os.wait4) or the peak resident memory of a fresh process, on an
invented workbook of benchmarks/workbooks.py. It prints:

- `check --out` at N loads (default 100,000) against the floor: a bare python-calamine read of the two sheets the
  check needs (Circuits, Loads), a plain copy of the package, and deflating the result sheets' XML that check
  wrote (taken ready-made from its output): what any tool that reads the workbook and writes the same results
  must pay. Target ≤ 2.5×.
- `check --json` peak memory against `check --out`'s at N loads. Target ≤ 1.2×.
- `review --out` printing to a terminal-wide pipe against `review --json` at M loads (default 10,000). Target
  ≤ 1.3×.

Each command runs once untimed, then `--runs` times (default 3), and its least disturbed (fastest) run counts.
Python's compiled bytecode is kept in a scratch folder (PYTHONPYCACHEPREFIX), as an installed package has it: with
PYTHONDONTWRITEBYTECODE=1 a source checkout would compile every leakbudget module on every start.
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import zipfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from benchmarks.workbooks import make_workbook  # noqa: E402

FLOOR = """
import shutil, sys, zlib, zipfile, python_calamine
book = python_calamine.CalamineWorkbook.from_path(sys.argv[1])
for name in ("Circuits", "Loads"):
    book.get_sheet_by_name(name).to_python()
shutil.copyfile(sys.argv[1], sys.argv[2])
with zipfile.ZipFile(sys.argv[3]) as done:
    for info in done.infolist():
        if info.filename.startswith("xl/worksheets/") and info.file_size > 1_000_000:
            zlib.compress(done.read(info), 6)
"""


BYTECODE = Path(tempfile.mkdtemp(prefix="leakbudget-bytecode-"))


def run(command: list[str]) -> tuple[float, float]:
    """CPU seconds and peak resident memory [MB] of one process."""
    env = {key: value for key, value in os.environ.items() if key != "PYTHONDONTWRITEBYTECODE"}
    env.update(PYTHONPATH=str(ROOT), PYTHONPYCACHEPREFIX=str(BYTECODE), COLUMNS="120")
    process = subprocess.Popen(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    _, status, usage = os.wait4(process.pid, 0)
    code = os.waitstatus_to_exitcode(status)
    if code not in (0, 1):
        raise RuntimeError(f"{command} exited {code}")
    return usage.ru_utime + usage.ru_stime, usage.ru_maxrss / 1024


def best(commands: dict[str, list[str]], runs: int) -> dict[str, tuple[float, float]]:
    """Each command's least CPU time and greatest peak memory over ``runs`` runs, the commands taking turns (so
    that a slower spell of a shared machine weighs on all of them alike), after one untimed run of each in order
    (it compiles the bytecode and warms the file cache)."""
    for command in commands.values():
        run(command)
    results: dict[str, list[tuple[float, float]]] = {name: [] for name in commands}
    for _ in range(runs):
        for name, command in commands.items():
            results[name].append(run(command))
    return {name: (min(r[0] for r in got), max(r[1] for r in got)) for name, got in results.items()}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--loads", type=int, default=100_000)
    parser.add_argument("--review-loads", type=int, default=10_000)
    parser.add_argument("--runs", type=int, default=3)
    args = parser.parse_args()
    python = sys.executable
    with tempfile.TemporaryDirectory() as folder:
        big = make_workbook(Path(folder) / "site.xlsx", args.loads)
        out = Path(folder) / "out.xlsx"
        copy = Path(folder) / "copy.xlsx"
        review_book = make_workbook(Path(folder) / "review.xlsx", args.review_loads)
        review_out = Path(folder) / "review-out.xlsx"
        lb = [python, "-m", "leakbudget"]
        got = best(
            {
                "check": [*lb, "check", str(big), "--out", str(out), "--force"],
                "floor": [python, "-c", FLOOR, str(big), str(copy), str(out)],  # after check: it deflates check's XML
                "json": [*lb, "check", str(big), "--json", "--no-write"],
                "review": [*lb, "review", str(review_book), "--out", str(review_out), "--force"],
                "review json": [*lb, "review", str(review_book), "--json", "--no-write"],
            },
            args.runs,
        )
        (check_cpu, check_mb), (floor_cpu, _), (json_cpu, json_mb) = got["check"], got["floor"], got["json"]
        terminal_cpu, review_json_cpu = got["review"][0], got["review json"][0]
        with zipfile.ZipFile(out) as done:
            result_mb = sum(i.file_size for i in done.infolist() if i.file_size > 1_000_000) / 1e6
    print(f"check --out at {args.loads:,} loads: {check_cpu:.2f} s CPU, {check_mb:.0f} MB peak")
    print(
        f"floor (calamine read of 2 sheets, package copy, deflating {result_mb:.0f} MB of result XML): {floor_cpu:.2f} s"
    )
    print(f"  check --out / floor = {check_cpu / floor_cpu:.2f} (target ≤ 2.5)")
    print(f"check --json at {args.loads:,} loads: {json_cpu:.2f} s CPU, {json_mb:.0f} MB peak")
    print(f"  check --json memory / check --out memory = {json_mb / check_mb:.2f} (target ≤ 1.2)")
    print(
        f"review --out at {args.review_loads:,} loads, printed: {terminal_cpu:.2f} s; --json: {review_json_cpu:.2f} s"
    )
    print(f"  review printed / review --json = {terminal_cpu / review_json_cpu:.2f} (target ≤ 1.3)")


if __name__ == "__main__":
    try:
        main()
    finally:
        shutil.rmtree(BYTECODE, ignore_errors=True)
