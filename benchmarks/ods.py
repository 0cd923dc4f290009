"""What an .ods costs against the same workbook as .xlsx: `python benchmarks/ods.py [N_LOADS ...] [--runs R]`.

For each size (default 1,000 and 10,000 loads) it writes an invented workbook (benchmarks/workbooks.py), has
LibreOffice convert it to .ods (``soffice --headless --convert-to ods``), and measures in fresh processes, best of R
runs (default 3), for both files: `leakbudget check --no-write` (read and check), `leakbudget check --out OUT`
(results written into a copy), and `leakbudget check --out OUT` once more on that copy (its result sheets replaced).
It prints the seconds, the peak memory of each process and the ratio .ods / .xlsx of each. Needs LibreOffice.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from benchmarks.scale import best  # noqa: E402
from benchmarks.workbooks import make_workbook  # noqa: E402


def to_ods(path: Path, folder: Path) -> Path:
    subprocess.run(
        [
            "soffice",
            "--headless",
            f"-env:UserInstallation={(folder / 'profile').as_uri()}",
            "--convert-to",
            "ods",
            "--outdir",
            str(folder),
            str(path),
        ],
        check=True,
        capture_output=True,
        timeout=600,
    )
    return path.with_suffix(".ods")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("sizes", nargs="*", type=int, default=[1_000, 10_000])
    parser.add_argument("--runs", type=int, default=3)
    args = parser.parse_args()
    leakbudget = [sys.executable, "-m", "leakbudget"]
    with tempfile.TemporaryDirectory(prefix="leakbudget-ods-") as tmp_name:
        tmp = Path(tmp_name)
        for n_loads in args.sizes:
            xlsx = make_workbook(tmp / f"loads-{n_loads}.xlsx", n_loads)
            ods = to_ods(xlsx, tmp)
            figures: dict[str, dict[str, tuple[float, float]]] = {}
            for path in (xlsx, ods):
                out = tmp / f"out-{n_loads}{path.suffix}"
                again = tmp / f"again-{n_loads}{path.suffix}"
                figures[path.suffix] = {
                    "read and check": best([*leakbudget, "check", str(path), "--no-write"], args.runs),
                    "write into a copy": best(
                        [*leakbudget, "check", str(path), "--out", str(out), "--force"], args.runs
                    ),
                    "replace its results": best(
                        [*leakbudget, "check", str(out), "--out", str(again), "--force"], args.runs
                    ),
                }
                shutil.copyfile(out, tmp / f"kept-{n_loads}{path.suffix}")
            size_mb = {p.suffix: p.stat().st_size / 1e6 for p in (xlsx, ods)}
            print(f"{n_loads:,} loads (.xlsx {size_mb['.xlsx']:.1f} MB, .ods {size_mb['.ods']:.1f} MB):")
            for stage in figures[".xlsx"]:
                (x_s, x_mb), (o_s, o_mb) = figures[".xlsx"][stage], figures[".ods"][stage]
                print(
                    f"  {stage:<20} .xlsx {x_s:6.2f} s {x_mb:6.0f} MB   .ods {o_s:6.2f} s {o_mb:6.0f} MB   "
                    f"ratio {o_s / x_s:4.2f}"
                )


if __name__ == "__main__":
    main()
