"""How fast the report is written: `python benchmarks/report.py [--runs R] [--sizes N N] [--skip-big]`.

Measures CPU time (user + system of the child process, from os.wait4; wall time on the shared 2-core machine is
noisier), median of R fresh processes (default 3), of:
- the shipped demo (14 circuits): `check --no-write`, `report --html`, `report --pdf`;
- two invented building floors (benchmarks/workbooks.py, about one circuit per five loads; default 50 and 200
  circuits): `check --no-write`, `report --html`, `report --pdf`, `report --html --pdf`, each as the command
  runs by default (detail pages only for circuits that are not ok) and with `--all-circuits` (a page for every
  circuit) when the command has that option;
and prints each against its target (issue 16):
- demo `report --html` ≤ 1.5 × its `check`; demo `report --pdf` ≤ 2 ×;
- at 200 circuits `report --html --pdf` ≤ 3 × its `check`;
- per extra circuit (the slope of the report's CPU time between the two floors) ≤ 5 ms HTML and ≤ 10 ms PDF.
The `check` compared is `check --no-write`: the same read, estimate, likelihood and sums the report runs, with
nothing written, so the ratio is the report's own cost (a `check` that writes its result sheets costs more).
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from benchmarks.workbooks import make_workbook  # noqa: E402

TARGET_DEMO_HTML = 1.5  # × the demo's check
TARGET_DEMO_PDF = 2.0
TARGET_BIG_BOTH = 3.0  # × the 200-circuit floor's check, HTML and PDF together
TARGET_PER_CIRCUIT_HTML_MS = 5.0
TARGET_PER_CIRCUIT_PDF_MS = 10.0
LOADS_PER_CIRCUIT = 5  # benchmarks/workbooks.py puts about one circuit on every five loads


def cpu_seconds(command: list[str]) -> float:
    """User + system CPU seconds of one fresh process running ``command`` (its children included)."""
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    process = subprocess.Popen(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(process.pid, 0)
    code = os.waitstatus_to_exitcode(status)
    if code not in (0, 1):  # check exits 1 when a circuit is over budget
        error = process.stderr.read().decode() if process.stderr else ""
        raise RuntimeError(f"{' '.join(command)} failed with exit code {code}: {error}")
    return usage.ru_utime + usage.ru_stime


def median(command: list[str], runs: int) -> float:
    return statistics.median(cpu_seconds(command) for _ in range(runs))


def has_all_circuits_option() -> bool:
    help_text = subprocess.run(
        [sys.executable, "-m", "leakbudget", "report", "--help"],
        capture_output=True,
        text=True,
        env={**os.environ, "PYTHONPATH": str(ROOT), "COLUMNS": "200"},
        check=False,
    ).stdout
    return "--all-circuits" in help_text


def times(workbook: Path, folder: Path, runs: int, variants: list[list[str]]) -> dict[str, float]:
    """Median CPU seconds of check and of each report kind on ``workbook``."""
    cli = [sys.executable, "-m", "leakbudget"]
    html, pdf = str(folder / "r.html"), str(folder / "r.pdf")
    result = {"check": median([*cli, "check", str(workbook), "--no-write"], runs)}
    for extra in variants:
        tag = " ".join(extra)
        for kind, outputs in (
            ("html", ["--html", html]),
            ("pdf", ["--pdf", pdf]),
            ("both", ["--html", html, "--pdf", pdf]),
        ):
            result[f"{kind}{' ' + tag if tag else ''}"] = median(
                [*cli, "report", str(workbook), *outputs, *extra], runs
            )
    return result


def verdict(ratio: float, target: float) -> str:
    return "meets" if ratio <= target else "MISSES"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=3, help="runs of each command (median shown)")
    parser.add_argument("--sizes", type=int, nargs=2, default=(50, 200), help="circuits of the two floors")
    parser.add_argument("--skip-big", action="store_true", help="the demo only")
    args = parser.parse_args()
    variants = [[], ["--all-circuits"]] if has_all_circuits_option() else [[]]  # --help ran once: bytecode compiled
    with tempfile.TemporaryDirectory() as scratch:
        folder = Path(scratch)
        demo = folder / "demo.xlsx"
        shutil.copyfile(ROOT / "examples" / "alder-quay-remodel.xlsx", demo)
        d = times(demo, folder, args.runs, variants)
        print(f"demo (14 circuits), CPU seconds, median of {args.runs}:")
        for name, seconds in d.items():
            print(f"  {name:<24} {seconds:7.2f} s  {seconds / d['check']:5.2f} × check")
        html_ratio, pdf_ratio = d["html"] / d["check"], d["pdf"] / d["check"]
        print(
            f"  report --html / check = {html_ratio:.2f} (target ≤ {TARGET_DEMO_HTML}: {verdict(html_ratio, TARGET_DEMO_HTML)})"
        )
        print(
            f"  report --pdf / check  = {pdf_ratio:.2f} (target ≤ {TARGET_DEMO_PDF}: {verdict(pdf_ratio, TARGET_DEMO_PDF)})"
        )
        if args.skip_big:
            return
        small_n, big_n = args.sizes
        floors = {}
        for n in (small_n, big_n):
            workbook = make_workbook(folder / f"floor-{n}.xlsx", n * LOADS_PER_CIRCUIT)
            floors[n] = times(workbook, folder, args.runs, variants)
            print(f"floor of {n} circuits ({n * LOADS_PER_CIRCUIT} loads), CPU seconds, median of {args.runs}:")
            for name, seconds in floors[n].items():
                print(f"  {name:<24} {seconds:7.2f} s  {seconds / floors[n]['check']:5.2f} × check")
        big = floors[big_n]
        both_ratio = big["both"] / big["check"]
        print(
            f"  {big_n} circuits: report --html --pdf / check = {both_ratio:.2f} (target ≤ {TARGET_BIG_BOTH}: {verdict(both_ratio, TARGET_BIG_BOTH)})"
        )
        for extra in variants:
            tag = " ".join(extra)
            suffix = " " + tag if tag else ""
            for kind, target in (("html", TARGET_PER_CIRCUIT_HTML_MS), ("pdf", TARGET_PER_CIRCUIT_PDF_MS)):
                key = kind + suffix
                slope_ms = 1000 * (big[key] - floors[small_n][key]) / (big_n - small_n)
                print(
                    f"  per extra circuit, {kind}{suffix}: {slope_ms:.1f} ms (target ≤ {target:g} ms: {verdict(slope_ms, target)})"
                )


if __name__ == "__main__":
    main()
