"""Many workbooks in one command: finding them, one process per worker, the summary, the exit code, the Dask path.

The references: each workbook's part of a portfolio must equal what the single-workbook command gives for it (its
JSON document and its error sentence, both tested on their own elsewhere); the summary's figures are recomputed
here from the budget rule (BS 7671:2018 reg. 531.3.2: 30 % of IΔn, 9 mA for a 30 mA RCD) and the leakage physics
(I = 2πfCV); the summary workbook is read back with openpyxl, a reader independent of XlsxWriter that wrote it.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import pytest
from typer.testing import CliRunner

import leakbudget
from benchmarks.workbooks import make_workbook
from leakbudget import portfolio
from leakbudget.cli.app import app
from leakbudget.errors import LeakbudgetError
from tests.conftest import basic_sheets, write_workbook

runner = CliRunner()

BUDGET_30MA = 0.30 * 30.0  # BS 7671:2018 reg. 531.3.2: 30 % of IΔn [mA]
BUDGET_GFCI_A = 0.30 * 6.0  # the same rule on a UL 943 Class A GFCI (6 mA trip level) [mA]


def over_sheets() -> dict:
    """The basic workbook with 2 × 5 mA on the 30 mA RCD: 10 mA, above the 9 mA budget, below the 15 mA no-trip
    level (0.5 IΔn, IEC 61008-1): over budget."""
    sheets = basic_sheets()
    sheets["Loads"][2][4] = "5 mA"
    return sheets


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    """A folder of three invented flats: one within budget, one over budget, one that is not a workbook."""
    flats = tmp_path / "flats"
    flats.mkdir()
    write_workbook(flats / "flat-1.xlsx", basic_sheets())
    write_workbook(flats / "flat-2.xlsx", over_sheets())
    (flats / "flat-3.xlsx").write_text("a note, not a workbook", encoding="utf-8")
    return flats


def said(result) -> str:  # noqa: ANN001
    """What a command printed, with the terminal's line breaks undone."""
    return " ".join(result.output.split())


def single_error(path: Path) -> str:
    """The sentence the single-workbook command prints for ``path`` (after 'Error: ')."""
    result = runner.invoke(app, ["check", str(path), "--no-write"])
    assert result.exit_code == 2
    return result.output.strip().removeprefix("Error: ")


def test_folders_give_their_workbooks_in_name_order_once(tmp_path: Path):
    write_workbook(tmp_path / "b.xlsx", basic_sheets())
    write_workbook(tmp_path / "A.xlsx", basic_sheets())
    (tmp_path / "sub").mkdir()
    write_workbook(tmp_path / "sub" / "c.xlsx", basic_sheets())
    for other in ("~$b.xlsx", "b.before-leakbudget.xlsx", "b.before-leakbudget-3.xlsx", "notes.txt", ".hidden.xlsx"):
        (tmp_path / other).write_text("not the user's workbook", encoding="utf-8")
    found = portfolio.find_workbooks([tmp_path, tmp_path / "b.xlsx"])
    assert [f.path.name for f in found] == ["A.xlsx", "b.xlsx"]  # the file named again is checked once
    deep = portfolio.find_workbooks([tmp_path], recursive=True)
    assert [str(f.relative) for f in deep] == ["A.xlsx", "b.xlsx", str(Path("sub") / "c.xlsx")]
    assert portfolio.find_workbooks([tmp_path / "no-such.xlsx"])[0].shown.endswith("no-such.xlsx")
    with pytest.raises(LeakbudgetError, match=r"sub2: this folder holds no workbook .*--recursive"):
        (tmp_path / "sub2").mkdir()
        portfolio.find_workbooks([tmp_path / "sub2"])


def test_one_workbook_alone_is_checked_exactly_as_before(make_workbook):
    path = make_workbook()
    result = runner.invoke(app, ["check", str(path), "--no-write"])
    assert result.stdout.startswith("Standing leakage per circuit (mA): plan.xlsx")
    doc = json.loads(runner.invoke(app, ["check", str(path), "--no-write", "--json"]).stdout)
    assert doc == leakbudget.check(path).document()  # the single document, not a portfolio's


def test_a_portfolio_document_holds_each_workbooks_own_document(folder: Path):
    result = runner.invoke(app, ["check", str(folder), "--no-write", "--json", "--jobs", "2"])
    assert result.exit_code == 2  # one workbook could not be read
    doc = json.loads(result.stdout)
    names = [Path(d["file"]).name for d in doc["workbooks"]]
    assert names == ["flat-1.xlsx", "flat-2.xlsx"]
    for d in doc["workbooks"]:
        assert d == leakbudget.check(d["file"]).document()  # the single-workbook document, unchanged
    assert doc["errors"] == [
        {
            "workbook": str(folder / "flat-3.xlsx"),
            "path": str((folder / "flat-3.xlsx").absolute()),
            "error": single_error(folder / "flat-3.xlsx"),  # the single command's sentence, word for word
        }
    ]
    rows = {Path(r["path"]).name: r for r in doc["summary"]}
    ok, over, bad = rows["flat-1.xlsx"], rows["flat-2.xlsx"], rows["flat-3.xlsx"]
    # flat-1: 2 × 0.75 mA on the 30 mA RCD is the largest share: 1.5 / 9 mA; the kitchen filter leaks
    # 2π·60 Hz·4.7 nF·120 V = 0.2126 mA of its 1.8 mA budget, a smaller share
    assert 2 * math.pi * 60 * 4.7e-9 * 120 * 1e3 / BUDGET_GFCI_A < 1.5 / BUDGET_30MA
    assert ok["highest_share_used"] == pytest.approx(1.5 / BUDGET_30MA, abs=1e-4)
    assert (ok["highest_share_at"], ok["worst_status"], ok["over_budget"], ok["exit_code"]) == ("E1", "ok", 0, 0)
    assert over["highest_share_used"] == pytest.approx(10.0 / BUDGET_30MA, abs=1e-4)
    assert (over["worst_status"], over["over_budget"], over["exit_code"], over["circuits"]) == ("over-budget", 1, 1, 2)
    assert bad["exit_code"] == 2 and bad["circuits"] is None and bad["error"] == doc["errors"][0]["error"]
    assert list(ok) == list(bad)  # every record has the same keys, in the same order


def test_exit_code_is_2_for_an_unreadable_workbook_else_1_for_one_over_budget(folder: Path, tmp_path: Path):
    flat_1, flat_2 = folder / "flat-1.xlsx", folder / "flat-2.xlsx"
    assert (
        runner.invoke(app, ["check", str(flat_1), str(flat_1.with_name("flat-1b.xlsx")), "--no-write"]).exit_code == 2
    )
    write_workbook(tmp_path / "flat-4.xlsx", basic_sheets())
    assert runner.invoke(app, ["check", str(flat_1), str(tmp_path / "flat-4.xlsx"), "--no-write"]).exit_code == 0
    result = runner.invoke(app, ["check", str(flat_1), str(flat_2), "--no-write"])
    assert result.exit_code == 1, result.output
    assert "2 workbook(s): 1 within budget, 1 not, 0 could not be checked." in said(result)
    missing = runner.invoke(app, ["check", str(flat_1), str(tmp_path / "nope.xlsx"), "--no-write"])
    assert missing.exit_code == 2
    assert "Error: nope.xlsx: the file does not exist; check the path." in said(missing)  # the others went on
    assert "1 within budget" in said(missing)


def test_results_are_written_into_each_workbook_or_into_copies(folder: Path, tmp_path: Path):
    import openpyxl

    before = {p.name: p.read_bytes() for p in folder.iterdir()}
    copies = tmp_path / "checked"
    result = runner.invoke(app, ["check", str(folder), "--out-dir", str(copies), "--jobs", "2"])
    assert result.exit_code == 2 and f"Copies with the result sheets written to {copies}." in said(result)
    assert {p.name: p.read_bytes() for p in folder.iterdir()} == before  # the originals untouched
    assert sorted(p.name for p in copies.iterdir()) == ["flat-1.xlsx", "flat-2.xlsx"]
    for copy in copies.iterdir():
        assert {"Circuits", "Loads", "Circuit results", "Load results"} <= set(openpyxl.load_workbook(copy).sheetnames)

    result = runner.invoke(app, ["check", str(folder / "flat-1.xlsx"), str(folder / "flat-2.xlsx"), "--jobs", "2"])
    assert result.exit_code == 1
    for name in ("flat-1.xlsx", "flat-2.xlsx"):
        assert "Circuit results" in openpyxl.load_workbook(folder / name).sheetnames
        assert (folder / name.replace(".xlsx", ".before-leakbudget.xlsx")).read_bytes() == before[name]
    # a rerun over the folder does not take the kept previous versions for workbooks, the numbered ones included
    result = runner.invoke(app, ["check", str(folder / "flat-1.xlsx"), "--jobs", "1"])
    assert result.exit_code == 0 and (folder / "flat-1.before-leakbudget-2.xlsx").exists()
    assert [f.path.name for f in portfolio.find_workbooks([folder])] == ["flat-1.xlsx", "flat-2.xlsx", "flat-3.xlsx"]


def test_out_dir_keeps_the_subfolders_of_a_folder_searched_recursively(tmp_path: Path):
    for block in ("block-a", "block-b"):
        (tmp_path / "estate" / block).mkdir(parents=True)
        write_workbook(tmp_path / "estate" / block / "board.xlsx", basic_sheets())
    copies = tmp_path / "checked"
    result = runner.invoke(app, ["check", str(tmp_path / "estate"), "-r", "--out-dir", str(copies), "-j", "1"])
    assert result.exit_code == 0, result.output
    assert sorted(str(p.relative_to(copies)) for p in copies.rglob("*.xlsx")) == [
        str(Path("block-a") / "board.xlsx"),
        str(Path("block-b") / "board.xlsx"),
    ]
    named = [str(tmp_path / "estate" / b / "board.xlsx") for b in ("block-a", "block-b")]
    clash = runner.invoke(app, ["check", *named, "--out-dir", str(copies)])
    assert clash.exit_code == 2 and "would both be copied to" in said(clash)


def test_out_names_one_file_only(folder: Path, tmp_path: Path):
    result = runner.invoke(app, ["check", str(folder), "--out", str(tmp_path / "x.xlsx")])
    assert result.exit_code == 2
    assert said(result).startswith("Error: --out names one new workbook; for several workbooks give --out-dir DIR")


def test_the_summary_workbook_has_one_plain_row_per_workbook(folder: Path, tmp_path: Path):
    import openpyxl

    summary = tmp_path / "portfolio.xlsx"
    result = runner.invoke(app, ["check", str(folder), "--no-write", "--json", "--summary", str(summary)])
    doc = json.loads(result.stdout)
    assert doc["summary_written_to"] == str(summary)
    book = openpyxl.load_workbook(summary)
    assert book.sheetnames == ["Portfolio summary", "Notes"]
    sheet = book["Portfolio summary"]
    rows = list(sheet.iter_rows(values_only=True))
    header = rows[0]
    assert header[:3] == ("Workbook", "Path", "Exit code") and len(rows) == 1 + 3
    paths = [row[header.index("Path")] for row in rows[1:]]
    assert paths == [r["path"] for r in doc["summary"]]
    assert all(cell.hyperlink is None and cell.data_type == "s" for cell in sheet["B"][1:])  # plain text
    share = header.index("Highest share used")
    assert rows[2][share] == pytest.approx(10.0 / BUDGET_30MA, abs=1e-4)
    assert sheet.cell(3, share + 1).number_format == "0%"

    # a later run replaces its own earlier summary, never another file
    assert runner.invoke(app, ["check", str(folder), "--no-write", "--summary", str(summary)]).exit_code == 2
    other = tmp_path / "someone-else.xlsx"
    write_workbook(other, basic_sheets())
    before = other.read_bytes()
    refused = runner.invoke(app, ["check", str(folder), "--no-write", "--summary", str(other)])
    assert refused.exit_code == 2 and other.read_bytes() == before
    assert "the file exists and is not a leakbudget summary, so it is not replaced" in said(refused)


def test_a_single_workbook_can_write_a_one_row_summary(make_workbook, tmp_path: Path):
    import openpyxl

    path = make_workbook(over_sheets())
    result = runner.invoke(app, ["check", str(path), "--no-write", "--summary", str(tmp_path / "one.xlsx")])
    assert result.exit_code == 1 and result.stdout.startswith("Standing leakage per circuit")  # as before
    rows = list(openpyxl.load_workbook(tmp_path / "one.xlsx")["Portfolio summary"].iter_rows(values_only=True))
    assert len(rows) == 2 and rows[1][rows[0].index("Worst status")] == "over-budget"


def test_review_many_counts_each_workbooks_error_findings(folder: Path):
    result = runner.invoke(app, ["review", str(folder), "--no-write", "--json"])
    doc = json.loads(result.stdout)
    for d, row in zip(doc["workbooks"], doc["summary"][:2]):
        single = leakbudget.review(d["file"]).document()
        assert d == single
        assert (row["error_findings"], row["warning_findings"]) == (
            single["counts"]["error"],
            single["counts"]["warning"],
        )
    has_errors = any(row["error_findings"] for row in doc["summary"][:2])
    assert (
        result.exit_code == 2
        and doc["exit_code"] == 2
        and has_errors == any(r["exit_code"] == 1 for r in doc["summary"])
    )
    text = runner.invoke(app, ["review", str(folder / "flat-1.xlsx"), str(folder / "flat-2.xlsx"), "--no-write"])
    assert text.exit_code == (1 if has_errors else 0) and "Errors" in text.stdout


def test_the_python_api_returns_jobs_and_a_summary_frame(folder: Path):
    many = leakbudget.check_many([folder], jobs=2)
    assert [type(r.job).__name__ if r.job else r.error[:11] for r in many.results] == [
        "CheckJob",
        "CheckJob",
        "flat-3.xlsx",
    ]
    frame = many.summary_frame()
    assert list(frame.columns) == list(many.results[0].summary) and len(frame) == 3
    assert frame.loc[1, "over_budget"] == 1 and many.exit_code == 2
    single = leakbudget.check(folder / "flat-2.xlsx")
    job = many.results[1].job
    assert job is not None and job.circuits_frame().equals(single.circuits_frame())
    one_by_one = leakbudget.check_many([folder], jobs=1, keep="summary")
    assert one_by_one.summary_records() == many.summary_records()  # one process or two: the same results
    assert set(leakbudget.__all__) >= {"check_many", "review_many"}


def test_ctrl_c_stops_after_the_workbooks_in_hand_and_says_how_many(tmp_path: Path):
    # the first is small, so that it is done while the others (about 0.2 s each) are still in the workers' hands
    paths = [make_workbook(tmp_path / f"flat-{i}.xlsx", 600 if i else 20, seed=i) for i in range(10)]
    before = [p.read_bytes() for p in paths]

    def interrupt(stage: str, done: int, total: int) -> None:
        if done == 1:
            raise KeyboardInterrupt

    with pytest.raises(portfolio.PortfolioInterrupted) as stop:
        leakbudget.check_many(paths, jobs=2, write=True, progress=interrupt)
    written = sum(p.read_bytes() != b for p, b in zip(paths, before))
    assert (stop.value.done, stop.value.total) == (written, 10)  # the count says what happened to the files
    # done: the one finished, the two in the workers' hands and the three the pool had queued for them at most
    # (concurrent.futures queues max_workers + 1 calls); the other four were never started
    assert 1 <= written <= 6


def test_a_cluster_address_nobody_answers_is_one_sentence(folder: Path, monkeypatch):
    monkeypatch.setattr(portfolio, "CLUSTER_CONNECT_TIMEOUT_S", 1)
    result = runner.invoke(app, ["check", str(folder), "--no-write", "--cluster", "tcp://127.0.0.1:9"])
    assert result.exit_code == 2
    assert said(result).startswith("Error: could not reach the Dask scheduler at tcp://127.0.0.1:9 (")
    assert "Traceback" not in result.output


@pytest.mark.slow
def test_a_dask_cluster_gives_the_same_results_as_local_processes(folder: Path, tmp_path: Path):
    """The same per-workbook job on a dask.distributed LocalCluster (two worker processes, started here)."""
    from distributed import LocalCluster

    local = json.loads(runner.invoke(app, ["check", str(folder), "--no-write", "--json", "--jobs", "2"]).stdout)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        result = runner.invoke(
            app, ["check", str(folder), "--no-write", "--json", "--cluster", cluster.scheduler_address]
        )
        assert result.exit_code == 2, result.output
        on_cluster = json.loads(result.stdout)
        copies = tmp_path / "cluster-copies"
        written = leakbudget.check_many([folder], out_dir=copies, cluster=cluster.scheduler_address, keep="summary")
    assert on_cluster == local
    assert written.workers == 2 and written.cluster == cluster.scheduler_address
    assert sorted(p.name for p in copies.iterdir()) == ["flat-1.xlsx", "flat-2.xlsx"]  # written by the workers


def test_a_terminal_gets_one_bar_across_the_workbooks_and_json_none(folder: Path):
    from tests.test_progress import run_on_terminal

    code, shown = run_on_terminal(["check", str(folder), "--no-write"])
    assert code == 2, shown
    assert "Checking workbooks" in shown and "━" in shown and "100%" in shown  # rich's bar across workbooks
    assert "Reading flat-1.xlsx" not in shown  # no bar per stage of each workbook
    code, shown = run_on_terminal(["check", str(folder), "--no-write", "--json"])
    assert code == 2 and "Checking workbooks" not in shown and "━" not in shown
    assert json.loads(shown[: shown.rindex("}") + 1])["command"] == "check"
    piped = runner.invoke(app, ["check", str(folder), "--no-write"])
    assert "Checking workbooks" not in piped.output and "━" not in piped.output


def test_a_dask_worker_that_cannot_see_a_file_says_so(tmp_path: Path):
    task = portfolio.Task("check", tmp_path / "elsewhere.xlsx", "elsewhere.xlsx", False, None, remote=True)
    result = portfolio.run_task(task)  # as a worker runs it
    assert result.exit_code == 2 and result.job is None
    assert "cannot see this file; put the workbooks on storage every worker reads at the same path" in result.error
    local = portfolio.run_task(portfolio.Task("check", tmp_path / "elsewhere.xlsx", "elsewhere.xlsx", False, None))
    assert local.error == "elsewhere.xlsx: the file does not exist; check the path."  # the single command's words


FAULTS = """
import resource, sys
import numpy as np
from leakbudget import portfolio
kept = portfolio.keep_freed_memory() if sys.argv[1] == "kept" else False
before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
for i in range(200):  # temporaries of 256 KiB to 1.75 MiB, four at a time, as one workbook after another makes
    arrays = [np.ones(((i % 7) + 1) * 256 * 1024 // 8) for _ in range(4)]
    del arrays
print(kept, resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
"""


def test_a_process_that_checks_many_workbooks_keeps_freed_memory_for_the_next():
    """With keep_freed_memory (glibc), temporaries of changing sizes reuse the same pages; without it most are
    fresh mappings the kernel zeroes page by page. Reference: the kernel's own count of minor page faults
    (getrusage)."""
    import subprocess
    import sys

    def faults(how: str) -> tuple[bool, int]:
        done = subprocess.run([sys.executable, "-c", FAULTS, how], capture_output=True, text=True, check=True)
        kept, count = done.stdout.split()
        return kept == "True", int(count)

    kept, with_it = faults("kept")
    _, without = faults("plain")
    if not sys.platform.startswith("linux"):
        assert not kept  # only glibc's malloc is tuned
        return
    pages = sum(4 * ((i % 7) + 1) * 256 * 1024 for i in range(200)) // 4096  # touched in all
    assert kept and without > pages / 4 and with_it < pages / 20, (with_it, without)


@pytest.mark.parametrize("fork", [True, False], ids=["forked from this process", "from the fork server"])
def test_workers_forked_here_or_by_the_fork_server_give_the_one_process_results(tmp_path: Path, fork: bool):
    """Four workbooks on two processes, the pool forked from this process (Linux, no other thread) or started by the
    fork server: every workbook's summary as one process gives it (the reference: each run alone), in order, and
    the progress is told in this process only."""
    import os
    import threading

    paths = []
    for i in range(4):
        paths.append(tmp_path / f"flat-{i}.xlsx")
        write_workbook(paths[-1], over_sheets() if i % 2 else basic_sheets())
    tasks = [portfolio.Task("check", p, p.name, False, None, None, "summary") for p in paths]
    alone = [portfolio.run_task(t).summary for t in tasks]
    workers: set[int] = set()

    assert portfolio._can_fork() == (sys.platform.startswith("linux") and threading.active_count() == 1)
    results = portfolio._run_locally(tasks, 2, lambda *a: workers.add(os.getpid()), "Checking", fork=fork)
    assert [r.summary for r in results] == alone
    assert workers == {os.getpid()}


def test_a_dask_task_keeps_the_workers_freed_memory_too(monkeypatch, tmp_path: Path):
    """run_tasks (what a Dask worker runs) sets the worker's malloc as a pool worker's before its workbooks."""
    calls = []
    monkeypatch.setattr(portfolio, "keep_freed_memory", lambda: calls.append("kept") or True)
    path = tmp_path / "flat.xlsx"
    write_workbook(path, basic_sheets())
    results = portfolio.run_tasks([portfolio.Task("check", path, path.name, False, None, None, "summary")])
    assert calls == ["kept"] and results[0].error is None
