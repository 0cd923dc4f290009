"""How many bad inputs leakbudget handles: the named bad files of tests/robustness_cases.py plus random damage.

Run from the worktree root:  python benchmarks/robustness.py [--random 1000] [--workers 2]

Each input goes through ``leakbudget check`` the way a user runs it (tests.robustness_cases.judge): handled means
exit code 0, 1 or 2, no traceback, the input's bytes unchanged, an error that is one sentence naming the file
(and the expected one for a named case), and on 0 or 1 every sheet of the input reading the same in the output.
Inputs run in worker processes, so one that kills its process (an abort inside a native library) is counted as
not handled and the run goes on. Then the number reader is timed on the adversarial cells (every parse from cold
caches; the worst must stay well under a millisecond), and two big inputs run alone to show time and peak memory.
"""

from __future__ import annotations

import argparse
import gc
import json
import subprocess
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def jobs(n_random: int, first_seed: int) -> list[dict]:
    from tests.robustness_cases import BAD_INPUTS

    named = [{"kind": "named", "id": case.id} for case in BAD_INPUTS]
    damaged = [
        {"kind": "random", "id": f"seed {seed}", "seed": seed, "cell": seed % 4, "package": (seed // 4) % 3}
        for seed in range(first_seed, first_seed + n_random)
    ]
    return named + damaged


def run_one(job: dict) -> dict:
    """Build the job's input in a fresh folder and judge the check's answer."""
    from tests.robustness_cases import BAD_INPUTS, damaged_workbook, judge

    with tempfile.TemporaryDirectory(prefix="leakbudget-robustness-") as tmp:
        folder = Path(tmp)
        start = time.perf_counter()
        if job["kind"] == "named":
            case = next(c for c in BAD_INPUTS if c.id == job["id"])
            verdict = judge(case.build(folder), expected=case.message)
        else:
            path = damaged_workbook(folder, job["seed"], job["cell"], job["package"])
            verdict = judge(path, folder / "out.xlsx")
        return {
            "id": job["id"],
            "kind": job["kind"],
            "exit": verdict.exit_code,
            "problems": verdict.problems,
            "seconds": time.perf_counter() - start,
        }


def worker(job_file: Path, start: int, stop: int) -> None:
    """Run jobs[start:stop] of ``job_file`` and print one JSON line per job as it finishes."""
    todo = json.loads(job_file.read_text())[start:stop]
    for job in todo:
        print(json.dumps(run_one(job)), flush=True)


def run_share(job_file: Path, todo: list[dict], start: int, stop: int) -> list[dict]:
    """Run jobs[start:stop] in worker processes, restarting after a job that kills its worker."""
    results: list[dict] = []
    position = start
    while position < stop:
        child = subprocess.Popen(
            [sys.executable, __file__, "--worker", str(job_file), str(position), str(stop)],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
            cwd=ROOT,
        )
        assert child.stdout is not None
        for line in child.stdout:
            results.append(json.loads(line))
            position += 1
        child.wait()
        if position < stop:  # the worker died on jobs[position]
            job = todo[position]
            results.append(
                {
                    "id": job["id"],
                    "kind": job["kind"],
                    "exit": child.returncode,
                    "seconds": 0.0,
                    "problems": [
                        f"the process died (exit {child.returncode}): "
                        f"{(child.stderr.read() if child.stderr else '')[-300:]!r}"
                    ],
                }
            )
            position += 1
    return results


def parse_times(repeats: int = 200) -> list[str]:
    """The number reader's time on each adversarial cell (tests.robustness_cases.ADVERSARIAL_CELLS), every parse
    from cold caches: the worst cell's median and slowest single parse, against a plain '0.75 mA' and against the
    1 ms a cell may take at most."""
    from leakbudget.input import units
    from tests.robustness_cases import ADVERSARIAL_CELLS

    def timings(text: str, unit: str) -> list[float]:
        out = []
        gc.disable()  # as timeit does: the collector's pauses belong to no one cell
        try:
            for _ in range(repeats):
                for cache in (units._read_text, units._resolve, units.unit_factor):
                    cache.cache_clear()
                start = time.perf_counter()
                try:
                    units.to_unit(text, unit)
                except units.UnitProblem:
                    pass
                out.append(time.perf_counter() - start)
        finally:
            gc.enable()
        return sorted(out)

    units.to_unit("1 megaohm", "Mohm")  # pint imported and its registry built once, outside the timings
    plain = timings("0.75 mA", "mA")[repeats // 2]
    measured = {text: timings(text, unit) for text, unit in ADVERSARIAL_CELLS}
    worst = max(measured, key=lambda t: measured[t][repeats // 2])
    slowest = max(measured, key=lambda t: measured[t][-1])
    shown = lambda t: repr(t if len(t) <= 24 else t[:20] + f"... ({len(t)} chars)")  # noqa: E731
    return [
        f"  number reader, {len(ADVERSARIAL_CELLS)} adversarial cells x {repeats} cold parses: worst median "
        f"{1e6 * measured[worst][repeats // 2]:.1f} us for {shown(worst)} "
        f"({measured[worst][repeats // 2] / plain:.1f} x a plain '0.75 mA', {1e6 * plain:.1f} us; "
        f"{1e-3 / measured[worst][repeats // 2]:.0f} x under 1 ms)",
        f"  slowest single parse of all {len(ADVERSARIAL_CELLS) * repeats}: {1e6 * measured[slowest][-1]:.1f} us for "
        f"{shown(slowest)} (a single parse includes the machine's scheduling pauses; the plain cell's slowest: "
        f"{1e6 * max(timings('0.75 mA', 'mA')):.1f} us)",
    ]


def big_inputs() -> list[str]:
    """Time and peak memory of two big inputs, each in its own process."""
    from tests.robustness_cases import far_cell, million_formatted_rows, run_child, with_part

    lines = []
    with tempfile.TemporaryDirectory(prefix="leakbudget-robustness-") as tmp:
        folder = Path(tmp)
        for label, build, args in (
            ("1,000,000 formatted empty rows", million_formatted_rows, ["--no-write"]),
            ("one value at XFD1048576 (6 kB file)", with_part(far_cell()), ["--no-write"]),
        ):
            path = build(folder)
            start = time.perf_counter()
            code, _out, err, peak_kb = run_child("check", str(path), *args)
            seconds = time.perf_counter() - start
            answer = "checked" if code in (0, 1) else err.strip().splitlines()[0][:110]
            lines.append(
                f"  {label}: exit {code} in {seconds:.1f} s, peak memory {peak_kb / 1024:.0f} MB "
                f"({path.stat().st_size / 1024:,.0f} kB file); {answer}"
            )
        lines.append(f"  the same 6 kB file read by python-calamine alone: {_calamine_alone(path)}")
    return lines


def _calamine_alone(path: Path) -> str:
    """What happens without the guard: calamine reads the sheet in a child limited to 4 GB of address space."""
    import resource

    def limit() -> None:
        resource.setrlimit(resource.RLIMIT_AS, (4 << 30, 4 << 30))

    code = (
        "import python_calamine as c, sys; "
        "c.CalamineWorkbook.from_path(sys.argv[1]).get_sheet_by_name('Loads').to_python()"
    )
    done = subprocess.run(
        [sys.executable, "-c", code, str(path)], capture_output=True, text=True, preexec_fn=limit, timeout=120
    )
    first = next((line for line in done.stderr.splitlines() if "memory allocation" in line), "")
    return f"exit {done.returncode} ({first.strip() or 'no message'})"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--random", type=int, default=1000, help="random damaged workbooks to try (default 1000)")
    parser.add_argument("--seed", type=int, default=0, help="first random seed (default 0)")
    parser.add_argument("--workers", type=int, default=2, help="worker processes (default 2)")
    parser.add_argument("--parse-only", action="store_true", help="only time the number reader on adversarial cells")
    parser.add_argument("--worker", nargs=3, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.worker:
        worker(Path(args.worker[0]), int(args.worker[1]), int(args.worker[2]))
        return
    if args.parse_only:
        print("\n".join(parse_times()))
        return

    from concurrent.futures import ThreadPoolExecutor

    todo = jobs(args.random, args.seed)
    started = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        job_file = Path(tmp) / "jobs.json"
        job_file.write_text(json.dumps(todo))
        bounds = [(len(todo) * i // args.workers, len(todo) * (i + 1) // args.workers) for i in range(args.workers)]
        with ThreadPoolExecutor(args.workers) as pool:
            shares = list(pool.map(lambda b: run_share(job_file, todo, *b), bounds))
    results = [r for share in shares for r in share]
    elapsed = time.perf_counter() - started

    handled = [r for r in results if not r["problems"]]
    print(
        f"leakbudget robustness: {len(results)} bad inputs tried, {len(handled)} handled "
        f"({100 * len(handled) / len(results):.1f} %) in {elapsed:.0f} s on {args.workers} workers"
    )
    for kind, label in (
        ("named", "named bad files (tests/robustness_cases.py)"),
        ("random", f"random damage (seeds {args.seed}-{args.seed + args.random - 1})"),
    ):
        mine = [r for r in results if r["kind"] == kind]
        if not mine:
            continue
        codes = Counter(r["exit"] for r in mine)
        ok = sum(1 for r in mine if not r["problems"])
        times = sorted(r["seconds"] for r in mine)
        print(
            f"  {label}: {len(mine)} tried, {ok} handled; exit codes "
            + ", ".join(f"{code}: {n}" for code, n in sorted(codes.items(), key=lambda kv: str(kv[0])))
            + f"; median {1000 * times[len(times) // 2]:.0f} ms per input, slowest "
            + max(mine, key=lambda r: r["seconds"])["id"]
            + f" ({times[-1]:.1f} s)"
        )
    for line in parse_times() + big_inputs():
        print(line)
    failed = [r for r in results if r["problems"]]
    for r in failed[:20]:
        print(f"NOT HANDLED {r['id']}: {r['problems'][0][:200]}")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
