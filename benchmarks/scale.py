"""How leakbudget scales: `python benchmarks/scale.py [N_LOADS ...] [--runs R]` (default 1,000 10,000 100,000).

For each size it writes an invented workbook (benchmarks/workbooks.py: about one circuit per five loads), then
measures in fresh processes, best of R runs (default 3, 1 from 50,000 loads up):
- `leakbudget check BIG --out OUT`: read, estimate, trip likelihood, and the result sheets written into a copy;
- openpyxl loading the workbook and saving it: what a tool pays that round-trips the workbook through a library;
- a bare python-calamine read of every sheet: the floor for reading;
and prints check / openpyxl (target ≤ 0.6 at 10,000 and 100,000 loads) and check / calamine, the peak memory of
each process (ru_maxrss from os.wait4), and, in this process, the time of each stage of the check (the
estimate-and-sum stage, estimate + evaluate, has a target under 1 s at 100,000 loads).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from benchmarks.workbooks import make_workbook  # noqa: E402

TARGET_VS_OPENPYXL = 0.6
TARGET_ESTIMATE_S = 1.0
OPENPYXL_ROUND_TRIP = "import sys, openpyxl; openpyxl.load_workbook(sys.argv[1]).save(sys.argv[2])"
CALAMINE_READ = (
    "import sys, python_calamine; b = python_calamine.CalamineWorkbook.from_path(sys.argv[1]); "
    "[b.get_sheet_by_name(n).to_python() for n in b.sheet_names]"
)


def measure(command: list[str]) -> tuple[float, float]:
    """Wall seconds and peak resident memory [MB] of one process running ``command``."""
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    start = time.perf_counter()
    process = subprocess.Popen(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    _, status, usage = os.wait4(process.pid, 0)
    elapsed = time.perf_counter() - start
    process.returncode = os.waitstatus_to_exitcode(status)
    if process.returncode not in (0, 1):  # check exits 1 when a circuit is over budget
        raise RuntimeError(f"{command} failed with exit code {process.returncode}")
    return elapsed, usage.ru_maxrss / 1024  # ru_maxrss is in KiB on Linux


def best(command: list[str], runs: int) -> tuple[float, float]:
    results = [measure(command) for _ in range(runs)]
    return min(r[0] for r in results), max(r[1] for r in results)


def stages(path: Path, out: Path) -> dict[str, float]:
    """Seconds of each stage of a check, in this process (each stage once, as the command runs them)."""
    from leakbudget.api import bulk_work
    from leakbudget.checking import CheckResult, check
    from leakbudget.estimate import estimate, evaluate
    from leakbudget.output.check import result_sheets
    from leakbudget.workbook.read import read_project
    from leakbudget.xlsx.package import write_sheets

    times: dict[str, float] = {}
    with bulk_work():
        t0 = time.perf_counter()
        project = read_project(path)
        t1 = time.perf_counter()
        loads = estimate(project)
        CheckResult(project, evaluate(project, loads), loads)
        t2 = time.perf_counter()
        result = check(project)  # estimate and sum again, then the trip likelihood and the readings
        t3 = time.perf_counter()
        sheets = result_sheets(result)
        t4 = time.perf_counter()
        write_sheets(path, sheets, out, force=True)
        t5 = time.perf_counter()
    times["read"] = t1 - t0
    times["estimate+sum"] = t2 - t1
    times["likelihood+readings"] = (t3 - t2) - (t2 - t1)
    times["result rows"] = t4 - t3
    times["write"] = t5 - t4
    return times


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("sizes", nargs="*", type=int, default=[1_000, 10_000, 100_000])
    parser.add_argument("--runs", type=int, default=None, help="runs per measurement (default 3, 1 from 50,000)")
    args = parser.parse_args()
    python = sys.executable
    print(
        f"{'loads':>8} {'check s':>8} {'MB':>5} {'openpyxl s':>10} {'MB':>5} {'calamine s':>10} {'MB':>5} "
        f"{'check/openpyxl':>15} {'check/calamine':>15}   stages of the check [s]"
    )
    for n in args.sizes:
        runs = args.runs or (1 if n >= 50_000 else 3)
        with tempfile.TemporaryDirectory() as folder:
            big = make_workbook(Path(folder) / f"site-{n}.xlsx", n)
            out = Path(folder) / "out.xlsx"
            check_s, check_mb = best(
                [python, "-m", "leakbudget", "check", str(big), "--out", str(out), "--force"], runs
            )
            opx_s, opx_mb = best([python, "-c", OPENPYXL_ROUND_TRIP, str(big), str(out)], runs)
            cal_s, cal_mb = best([python, "-c", CALAMINE_READ, str(big)], runs)
            parts = stages(big, out)
        verdict = "" if n < 10_000 else (" ok" if check_s / opx_s <= TARGET_VS_OPENPYXL else " ABOVE TARGET")
        breakdown = ", ".join(f"{k} {v:.2f}" for k, v in parts.items())
        flag = "" if n != 100_000 or parts["estimate+sum"] < TARGET_ESTIMATE_S else " (estimate+sum ABOVE TARGET)"
        print(
            f"{n:>8,} {check_s:>8.2f} {check_mb:>5.0f} {opx_s:>10.2f} {opx_mb:>5.0f} {cal_s:>10.2f} {cal_mb:>5.0f} "
            f"{check_s / opx_s:>12.2f}{verdict:<3} {check_s / cal_s:>15.1f}   {breakdown}{flag}"
        )
    print(
        f"targets: check/openpyxl ≤ {TARGET_VS_OPENPYXL} from 10,000 loads; estimate+sum < {TARGET_ESTIMATE_S:g} s "
        "at 100,000 loads"
    )


if __name__ == "__main__":
    main()
