"""How much the trip likelihood adds to `check`: run `python benchmarks/risk.py [N_LOADS]` (default 100,000).

Prints the time to read the workbook, to estimate and evaluate, and to compute the trip likelihoods, and the
likelihood's share of the whole. Target: under a quarter of read + estimate for 100,000 loads.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from benchmarks.workbooks import make_workbook  # noqa: E402
from leakbudget.checking import CheckResult
from leakbudget.estimate import estimate, evaluate  # noqa: E402
from leakbudget.risk import assess  # noqa: E402
from leakbudget.workbook.read import read_project  # noqa: E402


def main(n_loads: int) -> None:
    with tempfile.TemporaryDirectory() as folder:
        path = make_workbook(Path(folder) / "bench.xlsx", n_loads)
        t0 = time.perf_counter()
        project = read_project(path)
        t1 = time.perf_counter()
        loads = estimate(project)
        result = CheckResult(project, evaluate(project, loads), loads)
        t2 = time.perf_counter()
        risk = assess(result)
        t3 = time.perf_counter()
    print(f"{n_loads:,} loads, {len(project.circuits):,} circuits, {risk.samples:,} samples")
    print(f"read {t1 - t0:.2f} s, estimate and evaluate {t2 - t1:.2f} s, trip likelihood {t3 - t2:.2f} s")
    print(f"trip likelihood / (read + estimate) = {(t3 - t2) / (t2 - t0):.2f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100_000)
