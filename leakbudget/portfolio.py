"""Many workbooks in one go: check or review a portfolio (a building's units, a landlord's homes) and summarise it.

:func:`check_many` and :func:`review_many` find the workbooks (files named, and the workbooks in folders named),
run the single-workbook job of :mod:`leakbudget.api` on each in a worker process, and gather one
:class:`WorkbookResult` per workbook, in the order found: its job (or its document, or only its summary record), or
the one sentence saying why it could not be checked. A bad workbook never stops the others.

Workers are local processes (``jobs``; default the machine's cores) or, with ``cluster``, the workers of a Dask
distributed scheduler, which run the very same per-workbook function :func:`run_task` (a few workbooks to a Dask
task, :func:`run_tasks`). The files must then be on storage every worker reads at the same path.

Local processes are forked from this process on Linux when it runs no other thread, with the library already
imported (:func:`_can_fork`); otherwise, and on macOS, they start by ``forkserver``, else ``spawn``, never by plain
``fork`` beside other threads: a forked child copies the caller's threads' locks (a progress bar's refresh thread,
a notebook's or a Dask client's threads) in whatever state they were, and can hang on one. The fork server is a
clean process that imports the library once (:data:`WORKER_MODULES`) and forks each worker from itself. This
process is one of the ``jobs`` workers: it checks workbooks beside a pool of ``jobs - 1`` (with ``jobs=1``,
alone), starting at once while the pool's processes start.
"""

from __future__ import annotations

import math
import os
import stat
import sys
import threading
from collections import deque
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from leakbudget.about import CAUTION, __version__
from leakbudget.errors import LeakbudgetError, WriteBackError
from leakbudget.output.portfolio import EXIT_OK, record, summary_row
from leakbudget.progress import Progress
from leakbudget.xlsx.files import is_backup

if TYPE_CHECKING:
    import pandas as pd

    from leakbudget.api import CheckJob, ReviewJob

__all__ = ["Portfolio", "WorkbookResult", "check_many", "find_workbooks", "review_many", "run_task"]

Command = Literal["check", "review"]
# What a worker sends back: the whole job (the Python API's default), its JSON document (`--json`), or only the
# summary record (the terminal table; the cheapest to send).
Keep = Literal["jobs", "documents", "summary"]

# glibc's malloc in a process that checks workbook after workbook (a pool worker; the command line's own
# process): blocks up to MMAP_THRESHOLD_BYTES come from the heap, and up to TRIM_THRESHOLD_BYTES freed at its top
# stay there, instead of each large numpy temporary being a fresh mmap whose pages the kernel zeroes on first touch.
# Measured on 200 workbooks of 25 loads, --jobs 1 on the 2-core machine: page faults 274,000 -> 12,000, system CPU
# 1.1 -> 0.4 s, wall 6.9 -> 5.6 s, peak memory 61 -> 62 MB (modelling choice; 32 MiB is glibc's largest
# M_MMAP_THRESHOLD on 64-bit systems, mallopt(3)).
MMAP_THRESHOLD_BYTES = 32 * 1024 * 1024
TRIM_THRESHOLD_BYTES = 128 * 1024 * 1024
# Workbooks handed to each pool worker ahead of time, so that it never waits for the next: this process tops the
# pool up only between its own workbooks, which take as long as the worker's. Measured with --jobs 2 on 200 small
# workbooks: with 2 ahead the worker waited 13 to 19 times a run, 4 to 28 ms each (about 0.1 s in all); with 4, never
# more than 1.7 ms (modelling choice). Near the end of the list fewer, so that this process does not wait while
# the pool works through the last ones: with 4 to the end, the pool finished 55 to 180 ms after this process.
POOL_AHEAD = 4
POOL_AHEAD_AT_THE_END = 2
# Imported once before the pool's workers are forked (or by the fork server, or by each spawned worker): every
# module a check or a review runs, those it imports on first use included (about 50 ms in each worker).
WORKER_MODULES = (
    "leakbudget.api",
    "leakbudget.output.check",
    "leakbudget.output.review",
    "leakbudget.output.portfolio",
    "leakbudget.compliance.rules",
    "leakbudget.xlsx.package",
    "leakbudget.workbook.read",
    "python_calamine",
    "xlsxwriter",
    "numpy.random",  # the trip likelihood's draws
    "numpy.ma",  # numpy.unique imports it on first use
)

# Seconds to wait for a Dask scheduler to answer before saying it cannot be reached (modelling choice: long
# enough for a scheduler across a network, short enough that a wrong address is told at once).
CLUSTER_CONNECT_TIMEOUT_S = 10

# Dask tasks per worker a portfolio is cut into (modelling choice): enough pieces that a worker finishing early
# takes another while the others finish theirs, few enough that the scheduler's per-task cost stays small.
CLUSTER_PIECES_PER_WORKER = 8

NEW_FILE_MODE = 0o644  # owner writes, everyone reads (common practice), when no workbook is there to copy from
SUMMARY_TITLE = "leakbudget portfolio summary"  # the title of a summary workbook, by which a rerun recognises it


# ---------------------------------------------------------------------------------------------- finding workbooks


@dataclass(frozen=True)
class Found:
    """A workbook to check: its absolute path, its name as the user sees it, and its copy's place in --out-dir."""

    path: Path
    shown: str
    relative: Path


def _skipped(name: str) -> bool:
    """Files in a folder that are not the user's workbooks: a spreadsheet program's lock files (``~$…``), hidden
    files (``._…`` from macOS), and the previous versions leakbudget keeps (``….before-leakbudget.xlsx``, and the
    numbered ones, ``….before-leakbudget-2.xlsx`` …)."""
    return name.startswith(("~$", ".")) or is_backup(name)


def find_workbooks(items: Iterable[str | Path], recursive: bool = False, skip: Iterable[Path] = ()) -> list[Found]:
    """The workbooks to check: each file named (as named, whatever it is; the reader judges it) and, for each
    folder, the workbooks in it (files ending in .xlsx or .xlsm, in name order; subfolders only when ``recursive``).

    A workbook reached twice is checked once; files and folders in ``skip`` (the summary workbook, the --out-dir
    folder) are left out of folder searches. A folder holding no workbook is an error (nothing is checked).
    """
    from leakbudget.workbook.read import WORKBOOK_SUFFIXES

    skipped = {os.path.normcase(Path(p).resolve()) for p in skip}
    found: list[Found] = []
    seen: set[str] = set()

    def add(path: Path, shown: str, relative: Path) -> None:
        key = os.path.normcase(path.resolve())  # the same file, however reached (a link, another spelling)
        if key not in seen:
            seen.add(key)
            found.append(Found(path.absolute(), shown, relative))

    for item in items:
        item = Path(item)
        if not item.is_dir():
            add(item, str(item), Path(item.name))
            continue
        candidates = item.rglob("*") if recursive else item.iterdir()
        inside = []
        for candidate in candidates:
            relative = candidate.relative_to(item)
            if any(part.startswith(".") for part in relative.parts[:-1]) or _skipped(candidate.name):
                continue
            if candidate.suffix.lower() not in WORKBOOK_SUFFIXES or not candidate.is_file():
                continue
            resolved = candidate.resolve()
            if any(os.path.normcase(p) in skipped for p in (resolved, *resolved.parents)):
                continue
            inside.append((relative, candidate))
        if not inside:
            deeper = "" if recursive else " (subfolders are searched only when asked: --recursive)"
            raise LeakbudgetError(
                f"{item}: this folder holds no workbook ({', '.join(WORKBOOK_SUFFIXES)}){deeper}; name workbooks or "
                "another folder."
            )
        for relative, candidate in sorted(inside, key=lambda x: [p.lower() for p in x[0].parts]):
            add(candidate, str(candidate), relative)
    return found


# ------------------------------------------------------------------------------------------- one workbook's job


@dataclass(frozen=True)
class Task:
    """One workbook's job as sent to a worker (plain data, so any worker process or machine can run it)."""

    command: Command
    path: Path  # absolute: a worker may start in another folder, or on another machine
    workbook: str  # the name the user sees in the summary
    write: bool
    out: Path | None
    code: str | None = None
    keep: Keep = "jobs"
    remote: bool = False  # run by a Dask worker: a missing file may be missing only there


@dataclass
class WorkbookResult:
    """One workbook of a portfolio: its summary record, and its job or the sentence saying why it has none.

    ``job`` is the :class:`~leakbudget.api.CheckJob` or :class:`~leakbudget.api.ReviewJob` of
    :func:`leakbudget.check` / :func:`leakbudget.review` (when the run kept jobs), ``error`` the one sentence the
    single-workbook command prints for it (None when it was checked).
    """

    workbook: str
    path: Path
    summary: dict[str, Any]
    job: CheckJob | ReviewJob | None = None
    doc: dict[str, Any] | None = field(default=None, repr=False)
    error: str | None = None

    @property
    def exit_code(self) -> int:
        """0 all is well, 1 a problem found, 2 not checked: what the single-workbook command would exit with."""
        return int(self.summary["exit_code"])

    def document(self) -> dict[str, Any] | None:
        """The document the single-workbook command's ``--json`` prints for it (None when it was not checked)."""
        if self.doc is not None:
            return self.doc
        return self.job.document() if self.job is not None else None


def _failed(task: Task, error: str) -> WorkbookResult:
    return WorkbookResult(
        task.workbook, task.path, record(task.command, task.workbook, str(task.path), None, None, error), error=error
    )


def run_task(task: Task) -> WorkbookResult:
    """Check or review one workbook as the single-workbook command does, in whichever process runs this.

    A user's error (a bad workbook, a file open elsewhere) becomes the result's ``error``, in the words the command
    prints for it; so does a failure of leakbudget itself, so that one workbook never stops the others.
    """
    from leakbudget import api

    if task.remote and not task.path.exists():
        import socket

        return _failed(
            task,
            f"{task.path}: the Dask worker on {socket.gethostname()} cannot see this file; put the workbooks on "
            "storage every worker reads at the same path (a shared folder) and run again.",
        )
    job: CheckJob | ReviewJob
    try:
        if task.command == "review":
            job = api.review(task.path, task.code, write=task.write, out=task.out)
            figures = summary_row(job.review.check, job.review)
        else:
            job = api.check(task.path, write=task.write, out=task.out)
            figures = summary_row(job.result)
        doc = job.document() if task.keep != "summary" else None  # made here, in parallel (a kept job caches it)
    except LeakbudgetError as exc:
        return _failed(task, str(exc))
    except Exception as exc:  # a bug of leakbudget's, not the user's: say so, and go on with the other workbooks
        return _failed(
            task,
            f"{task.path.name}: leakbudget failed on this workbook ({type(exc).__name__}: {exc}); this is a fault of "
            f"leakbudget's: run `leakbudget {task.command} {task.path.name}` alone to see it, and please report it.",
        )
    written = str(job.written.path) if job.written is not None else None
    summary = record(task.command, task.workbook, str(task.path), figures, written, None)
    return WorkbookResult(
        task.workbook,
        task.path,
        summary,
        job=job if task.keep == "jobs" else None,
        doc=doc if task.keep == "documents" else None,
    )


def run_tasks(tasks: list[Task]) -> list[WorkbookResult]:
    """:func:`run_task` on each of a few workbooks: one Dask task, so that the scheduler's cost per task (a few
    milliseconds) is paid once for several workbooks. The worker keeps freed memory for its next workbook
    (:func:`keep_freed_memory`; measured in a Dask worker: 1,300 page faults a small workbook to 2, about a fifth
    less CPU)."""
    keep_freed_memory()
    return [run_task(task) for task in tasks]


# ------------------------------------------------------------------------------------------------- the portfolio


@dataclass
class Portfolio:
    """What :func:`check_many` and :func:`review_many` give: one result per workbook, in the order found."""

    command: Command
    results: list[WorkbookResult]
    workers: int  # worker processes used (local) or the Dask workers the scheduler had
    cluster: str | None = None  # the Dask scheduler's address, when one ran the jobs
    summary_written: Path | None = None

    @property
    def errors(self) -> list[WorkbookResult]:
        """The workbooks that could not be checked (each with its sentence in ``error``)."""
        return [r for r in self.results if r.error is not None]

    @property
    def exit_code(self) -> int:
        """2 when any workbook could not be checked, else 1 when any has a problem (a circuit or shared device not
        within budget; for a review, an error finding), else 0."""
        return max((r.exit_code for r in self.results), default=EXIT_OK)

    def summary_records(self) -> list[dict[str, Any]]:
        """One record per workbook (keys as in :data:`leakbudget.output.portfolio.CHECK_COLUMNS`)."""
        return [r.summary for r in self.results]

    def summary_frame(self) -> pd.DataFrame:
        """One row per workbook: the ``summary`` records of :meth:`document`, as a pandas DataFrame."""
        import pandas as pd

        return pd.DataFrame.from_records(self.summary_records())

    def document(self) -> dict[str, Any]:
        """The document ``leakbudget check --json`` prints for several workbooks: each checked workbook's own
        document (as the single-workbook command prints it), the summary records and the errors."""
        documents = [r.document() for r in self.results if r.error is None]
        if any(d is None for d in documents):
            raise ValueError("this portfolio kept only its summary records (keep='summary'); run it with keep='jobs'")
        return {
            "tool": f"leakbudget {__version__}",
            "command": self.command,
            "exit_code": self.exit_code,
            "workbooks": documents,
            "summary": self.summary_records(),
            "errors": [{"workbook": r.workbook, "path": str(r.path), "error": r.error} for r in self.errors],
            "summary_written_to": str(self.summary_written) if self.summary_written is not None else None,
            "caution": CAUTION,
        }


def machine_cores() -> int:
    """The cores this process may run on (the default number of workers)."""
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        return os.cpu_count() or 1


def check_many(
    paths: str | Path | Sequence[str | Path],
    jobs: int | None = None,
    *,
    write: bool = False,
    out_dir: str | Path | None = None,
    recursive: bool = False,
    cluster: Any = None,
    summary: str | Path | None = None,
    progress: Progress | None = None,
    keep: Keep = "jobs",
) -> Portfolio:
    """Check many workbooks: :func:`leakbudget.check` on each, ``jobs`` at a time (default: the machine's cores).

    ``paths`` are workbooks and folders of workbooks (see :func:`find_workbooks`; ``recursive`` searches
    subfolders). Writes nothing unless ``write`` is True (result sheets into each workbook) or ``out_dir`` names a
    folder for copies with the same file names (and subfolders, as found under a folder named). ``summary`` names
    a new summary workbook, one row per workbook. ``cluster`` is a Dask scheduler's address (or a
    ``distributed.Client``) whose workers run the jobs instead of local processes. ``progress`` hears of each
    workbook done (stage "Checking workbooks"). ``keep`` says what comes back per workbook: "jobs", "documents"
    or only the "summary" records.
    """
    return _many("check", paths, jobs, None, write, out_dir, recursive, cluster, summary, progress, keep)


def review_many(
    paths: str | Path | Sequence[str | Path],
    code: str | None = None,
    jobs: int | None = None,
    *,
    write: bool = False,
    out_dir: str | Path | None = None,
    recursive: bool = False,
    cluster: Any = None,
    summary: str | Path | None = None,
    progress: Progress | None = None,
    keep: Keep = "jobs",
) -> Portfolio:
    """Review many workbooks against ``code`` (as :func:`leakbudget.review`; default: each workbook's Code setting,
    else by supply frequency); the other arguments as for :func:`check_many` (stage "Reviewing workbooks")."""
    return _many("review", paths, jobs, code, write, out_dir, recursive, cluster, summary, progress, keep)


class PortfolioInterrupted(KeyboardInterrupt):
    """Ctrl-C during a portfolio: ``done`` of ``total`` workbooks were finished (their results written, if asked),
    those the workers held when it came included; the others were not touched. On a cluster (``on_cluster``) the
    workbooks a worker had already begun may still be finished after the count."""

    def __init__(self, done: int, total: int, on_cluster: bool = False) -> None:
        super().__init__(done, total)
        self.done = done
        self.total = total
        self.on_cluster = on_cluster


def _many(
    command: Command,
    paths: str | Path | Sequence[str | Path],
    jobs: int | None,
    code: str | None,
    write: bool,
    out_dir: str | Path | None,
    recursive: bool,
    cluster: Any,
    summary: str | Path | None,
    progress: Progress | None,
    keep: Keep,
) -> Portfolio:
    fork = _can_fork()
    if cluster is None and (jobs or machine_cores()) > 1 and not fork:
        _start_fork_server()  # it imports the library while this process finds the workbooks
    items = [paths] if isinstance(paths, (str, Path)) else list(paths)
    out_folder = Path(out_dir).resolve() if out_dir is not None else None
    summary_path = Path(summary) if summary is not None else None
    skip = [p for p in (out_folder, summary_path) if p is not None]
    found = find_workbooks(items, recursive, skip)
    if summary_path is not None:
        refuse_summary_path(summary_path, [f.path for f in found])
    if out_folder is not None:
        _refuse_clashing_copies(found, out_folder)
    tasks = []
    for f in found:
        out = out_folder / f.relative if out_folder is not None else None
        if out is not None:
            out.parent.mkdir(parents=True, exist_ok=True)
        tasks.append(Task(command, f.path, f.shown, write, out, code, keep, remote=cluster is not None))
    stage = "Reviewing workbooks" if command == "review" else "Checking workbooks"
    if cluster is not None:
        results, workers, address = _run_on_cluster(tasks, cluster, progress, stage)
    else:
        workers = max(1, min(jobs or machine_cores(), len(tasks)))
        results, address = _run_locally(tasks, workers, progress, stage, fork), None
    portfolio = Portfolio(command, results, workers, address)
    if summary_path is not None:
        portfolio.summary_written = write_summary(summary_path, command, results)
    return portfolio


def _refuse_clashing_copies(found: list[Found], out_folder: Path) -> None:
    """Two workbooks whose copies would land on one file in --out-dir (same name, from different places)."""
    first: dict[str, Found] = {}
    for f in found:
        key = os.path.normcase(out_folder / f.relative)
        if key in first:
            raise LeakbudgetError(
                f"{first[key].shown} and {f.shown} would both be copied to {out_folder / f.relative}; check them in "
                "separate runs, or name their folders instead of the files (copies then keep their subfolders)."
            )
        first[key] = f


def _tell(progress: Progress | None, stage: str, done: int, total: int) -> None:
    if progress is not None:
        progress(stage, done, total)


def _run_locally(
    tasks: list[Task], workers: int, progress: Progress | None, stage: str, fork: bool = False
) -> list[WorkbookResult]:
    """Run the tasks on ``workers`` processes: this one and a pool of ``workers - 1``, forked from this process
    when ``fork`` (:func:`_can_fork`), else from the fork server.

    This process has the library loaded already, so it starts on the last workbooks at once while the pool's
    processes start (a thread waits for them: the pool's first submit blocks until the fork server has imported
    the library); the pool is then fed from the front, a few workbooks ahead (:data:`POOL_AHEAD` each, fewer near
    the end), so its workers never wait for this process to hand out work. If the pool dies (a worker killed, out
    of memory), the workbooks it held are reported as not checked and this process checks the rest itself.
    """
    results: list[WorkbookResult | None] = [None] * len(tasks)
    done = 0

    def finished(i: int, result: WorkbookResult) -> None:
        nonlocal done
        results[i] = result
        done += 1
        _tell(progress, stage, done, len(tasks))

    _tell(progress, stage, 0, len(tasks))
    if workers <= 1 or len(tasks) <= 1:
        try:
            for i, task in enumerate(tasks):
                finished(i, run_task(task))
        except KeyboardInterrupt:
            raise PortfolioInterrupted(done, len(tasks)) from None
        return [r for r in results if r is not None]

    from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    def lost(i: int) -> WorkbookResult:
        return _failed(
            tasks[i],
            f"{tasks[i].path.name}: a worker process stopped unexpectedly (out of memory?) and this workbook was not "
            f"checked; nothing was written to it; check it alone with `leakbudget {tasks[i].command} "
            f"{tasks[i].path.name}`.",
        )

    queue = deque(range(len(tasks)))
    futures: dict[Future[WorkbookResult], int] = {}
    broken = False
    starting: threading.Thread | None = None
    if fork:  # the workers get the library, imported once here, as this process has it
        _import_library()
    pool = ProcessPoolExecutor(max_workers=workers - 1, mp_context=_context(fork), initializer=_start_worker)
    if fork:
        _start_pool(pool)  # forks the workers now, from this thread, the only one
    else:
        # The pool's first submit starts its processes and waits for the fork server to be ready (its imports,
        # about 0.3 s): a thread waits for that with a trivial task while this process checks its first workbooks.
        starting = threading.Thread(target=_start_pool, args=(pool,), name="leakbudget-pool-start", daemon=True)
        starting.start()

    def collect(ready: Iterable[Future[WorkbookResult]]) -> None:
        nonlocal broken
        for future in ready:
            i = futures.pop(future)
            try:
                result = future.result()
            except BrokenProcessPool:
                broken, result = True, lost(i)
            finished(i, result)

    try:
        while queue or futures or (starting is not None and starting.is_alive()):
            if not queue and starting is not None:
                starting.join()
            started = starting is None or not starting.is_alive()
            ahead = POOL_AHEAD if len(queue) > 2 * POOL_AHEAD * (workers - 1) else POOL_AHEAD_AT_THE_END
            while queue and not broken and started and len(futures) < ahead * (workers - 1):
                try:
                    future = pool.submit(run_task, tasks[queue[0]])
                except BrokenProcessPool:
                    broken = True
                else:
                    futures[future] = queue.popleft()
            if queue:
                i = queue.pop()  # this process works from the back
                finished(i, run_task(tasks[i]))
                collect([f for f in futures if f.done()])
            elif futures:
                collect(wait(futures, return_when=FIRST_COMPLETED).done)
    except KeyboardInterrupt:
        pool.shutdown(wait=True, cancel_futures=True)  # the workers ignore Ctrl-C and finish what they hold
        held = sum(f.done() and not f.cancelled() and f.exception() is None for f in futures)
        raise PortfolioInterrupted(done + held, len(tasks)) from None
    finally:
        pool.shutdown(wait=True)
    return [r for r in results if r is not None]


def _start_pool(pool: Any) -> None:
    """Start ``pool``'s processes (a trivial task; a pool that cannot start shows at the next submit)."""
    from concurrent.futures.process import BrokenProcessPool

    try:
        pool.submit(int)
    except (BrokenProcessPool, RuntimeError):
        pass


def _can_fork() -> bool:
    """Whether the pool's workers can be forked from this process: on Linux, with no thread but this one.

    A forked child has only the forking thread, and inherits the locks other threads held in whatever state they
    were (a progress bar's refresh thread, a notebook's or a Dask client's threads), so with any other Python
    thread the fork server is used instead; macOS's system libraries are not safe across fork at all."""
    return sys.platform.startswith("linux") and threading.active_count() == 1


def _context(fork: bool = False) -> Any:
    """The multiprocessing context of the worker pool: fork when asked (:func:`_can_fork`), else forkserver
    preloading the library, else spawn."""
    import multiprocessing

    if fork:
        return multiprocessing.get_context("fork")
    if "forkserver" in multiprocessing.get_all_start_methods():
        context = multiprocessing.get_context("forkserver")
        # Each worker also runs the caller's main script again (as spawn does; the fork server's own '__main__'
        # preload never takes effect, its main_path is not passed); the leakbudget modules the caller has
        # already loaded (the command line's, when it is the caller) make that a lookup in the fork server's cache.
        loaded = sorted(name for name in sys.modules if name.startswith("leakbudget."))
        context.set_forkserver_preload(list(dict.fromkeys([*WORKER_MODULES, *loaded])))
        return context
    return multiprocessing.get_context("spawn")


def _start_fork_server() -> None:
    """Start the fork server now (a fresh interpreter, started as a subprocess is, so safe beside threads), so that
    its imports overlap this process's own work; the pool then forks its workers from it."""
    context = _context()
    if context.get_start_method() == "forkserver":
        from multiprocessing import forkserver

        forkserver.ensure_running()


def keep_freed_memory() -> bool:
    """Where malloc is glibc's, set its thresholds for many workbooks in one process (:data:`MMAP_THRESHOLD_BYTES`,
    :data:`TRIM_THRESHOLD_BYTES`); True when set. Elsewhere (macOS, Windows, musl) nothing changes."""
    import ctypes

    if not sys.platform.startswith("linux"):
        return False
    try:
        mallopt = ctypes.CDLL(None).mallopt  # the C library the interpreter runs on (find_library would run ldconfig)
    except (OSError, AttributeError):  # not glibc (musl has no mallopt)
        return False
    m_trim_threshold, m_mmap_threshold = -1, -3  # <malloc.h>
    return bool(mallopt(m_mmap_threshold, MMAP_THRESHOLD_BYTES) and mallopt(m_trim_threshold, TRIM_THRESHOLD_BYTES))


def _start_worker() -> None:
    """In each worker: leave Ctrl-C to the parent (which lets running workbooks finish, and reports), keep freed
    memory for the next workbook (:func:`keep_freed_memory`), and import the library (already there when forked
    from the fork server or from this process)."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    keep_freed_memory()
    _import_library()


def _import_library() -> None:
    """Import every module a check or a review runs (:data:`WORKER_MODULES`)."""
    import importlib

    for module in WORKER_MODULES:
        importlib.import_module(module)


def _run_on_cluster(
    tasks: list[Task], cluster: Any, progress: Progress | None, stage: str
) -> tuple[list[WorkbookResult], int, str]:
    """Run :func:`run_task` on a Dask distributed scheduler's workers; ``cluster`` is its address or a Client."""
    try:
        from distributed import Client, as_completed
    except ImportError:
        raise LeakbudgetError(
            "running on a cluster needs Dask's distributed package, which is not installed here; install it with "
            "pip install 'leakbudget[cluster]' (here and on every worker)."
        ) from None
    own = isinstance(cluster, str)
    if own:
        try:
            client = Client(cluster, timeout=CLUSTER_CONNECT_TIMEOUT_S, set_as_default=False)
        except (OSError, TimeoutError, ValueError) as exc:
            raise LeakbudgetError(
                f"could not reach the Dask scheduler at {cluster} ({exc}); start one (`dask scheduler`) or give its "
                "address as it prints it, e.g. tcp://10.0.0.5:8786."
            ) from None
    else:
        client = cluster
    results: list[WorkbookResult | None] = [None] * len(tasks)
    done = 0
    try:
        info = client.scheduler_info()
        address = str(info.get("address") or cluster)
        if not info.get("workers"):
            try:
                client.wait_for_workers(1, timeout=CLUSTER_CONNECT_TIMEOUT_S)
            except (OSError, TimeoutError):
                raise LeakbudgetError(
                    f"the Dask scheduler at {address} has no workers; start some (`dask worker {address}`) and run "
                    "again."
                ) from None
            info = client.scheduler_info()
        workers = len(info.get("workers", {}))
        _tell(progress, stage, 0, len(tasks))
        size = max(1, math.ceil(len(tasks) / (max(1, workers) * CLUSTER_PIECES_PER_WORKER)))
        pieces = [list(range(start, min(start + size, len(tasks)))) for start in range(0, len(tasks), size)]
        futures = client.map(run_tasks, [[tasks[i] for i in piece] for piece in pieces], pure=False)
        index = {future.key: piece for future, piece in zip(futures, pieces)}
        try:
            for future in as_completed(futures, loop=client.loop):
                piece = index[future.key]
                try:
                    for i, result in zip(piece, future.result()):
                        results[i] = result
                except Exception as exc:  # the worker died, or cannot import leakbudget
                    for i in piece:
                        results[i] = _failed(
                            tasks[i],
                            f"{tasks[i].path.name}: no Dask worker could run its job ({type(exc).__name__}: {exc}); "
                            "install the same leakbudget on every worker and check it alone to see more.",
                        )
                done += len(piece)
                _tell(progress, stage, done, len(tasks))
        except KeyboardInterrupt:
            client.cancel(futures)
            raise PortfolioInterrupted(done, len(tasks), on_cluster=True) from None
    finally:
        if own:
            client.close()
    return [r for r in results if r is not None], workers, address


# -------------------------------------------------------------------------------------------- summary workbook


def _is_summary(path: Path) -> bool:
    """``path`` is a summary workbook an earlier run wrote (its document title says so), which a run may replace."""
    import zipfile

    try:
        with zipfile.ZipFile(path) as book:
            info = book.getinfo("docProps/core.xml")
            if info.file_size > 1 << 16:
                return False
            core = book.read(info).decode("utf-8", "replace")
    except (OSError, KeyError, zipfile.BadZipFile):
        return False
    return f"<dc:title>{SUMMARY_TITLE}</dc:title>" in core


def refuse_summary_path(path: Path, workbooks: Sequence[Path] = ()) -> None:
    """Before any work: refuse a summary path that is not a new .xlsx file (or an earlier summary) in a folder
    that exists, or that a spreadsheet program holds open."""
    from leakbudget.xlsx.files import refuse_if_open

    if path.suffix.lower() != ".xlsx":
        raise WriteBackError(f"{path}: the summary is an .xlsx workbook; give a name ending in .xlsx.")
    if not path.parent.is_dir():
        raise WriteBackError(f"{path}: the folder {path.parent} does not exist; create it or name another one.")
    resolved = path.resolve()
    if any(os.path.normcase(resolved) == os.path.normcase(Path(w).resolve()) for w in workbooks):
        raise WriteBackError(f"{path}: this is one of the workbooks to check; name a new file for the summary.")
    if path.exists() and not _is_summary(path):
        raise WriteBackError(
            f"{path}: the file exists and is not a leakbudget summary, so it is not replaced; name a new file or "
            "move it away."
        )
    refuse_if_open(path)


def write_summary(path: str | Path, command: Command, results: Sequence[WorkbookResult]) -> Path:
    """Write a new summary workbook (XlsxWriter): one row per workbook, the path as plain text, no hyperlinks;
    a sheet of notes says what the columns mean. Replaces only an earlier summary, atomically."""
    import io
    from datetime import datetime

    import xlsxwriter

    from leakbudget.output.portfolio import NOTES_SHEET, SUMMARY_SHEET, notes, summary_columns
    from leakbudget.xlsx.files import replace_atomically

    path = Path(path)
    refuse_summary_path(path, [r.path for r in results])
    columns = summary_columns(command)
    buffer = io.BytesIO()
    # strings stay strings: no path turned into a link, no text read as a formula or a number
    book = xlsxwriter.Workbook(
        buffer, {"strings_to_urls": False, "strings_to_formulas": False, "strings_to_numbers": False}
    )
    book.set_properties({"title": SUMMARY_TITLE, "comments": f"leakbudget {__version__}", "created": datetime.now()})
    bold = book.add_format({"bold": True})
    formats = {key: book.add_format({"num_format": fmt}) for _, key, fmt in columns if fmt}
    sheet = book.add_worksheet(SUMMARY_SHEET)
    sheet.write_row(0, 0, [header for header, _, _ in columns], bold)
    for i, result in enumerate(results, start=1):
        for j, (_, key, _) in enumerate(columns):
            value = result.summary.get(key)
            if value is None:
                continue
            if isinstance(value, str):
                sheet.write_string(i, j, value)
            else:
                sheet.write_number(i, j, value, formats.get(key))
    for j, (header, key, _) in enumerate(columns):
        widest = max([len(header)] + [len(str(r.summary.get(key) or "")) for r in results])
        sheet.set_column(j, j, min(80, max(10, widest + 2)))
    sheet.freeze_panes(1, 0)
    sheet.autofilter(0, 0, len(results), len(columns) - 1)
    about = book.add_worksheet(NOTES_SHEET)
    about.set_column(0, 0, 120)
    for i, line in enumerate(notes(command)):
        about.write_string(i, 0, line)
    book.close()
    data = buffer.getvalue()
    # a summary replacing an earlier one keeps its permissions; a new one gets those of the first workbook
    like = path if path.exists() else next((r.path for r in results if r.path.exists()), None)
    mode = stat.S_IMODE(os.stat(like).st_mode) if like is not None else NEW_FILE_MODE
    replace_atomically(path, mode, lambda handle: handle.write(data))
    return path


def result_of(job: CheckJob | ReviewJob, path: Path) -> WorkbookResult:
    """The portfolio result of one workbook's job (a single-workbook command's one-row summary)."""
    from leakbudget.api import ReviewJob

    command: Command
    if isinstance(job, ReviewJob):
        command, figures = "review", summary_row(job.review.check, job.review)
    else:
        command, figures = "check", summary_row(job.result)
    written = str(job.written.path) if job.written is not None else None
    full = path.absolute()
    return WorkbookResult(str(path), full, record(command, str(path), str(full), figures, written, None), job)
