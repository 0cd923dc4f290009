"""`check` and `review` over several workbooks and folders: the options, one library call, the summary, the exit.

One workbook named alone is checked as always (the command's own code in :mod:`leakbudget.cli.app`); several
workbooks, a folder, or ``--cluster`` make a portfolio run of :func:`leakbudget.portfolio.check_many` /
:func:`~leakbudget.portfolio.review_many`, shown as one summary row per workbook.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any, NoReturn

import typer

from leakbudget.cli.options import named_file
from leakbudget.cli.render import err_console, out_console, print_json, progress_bar, render_portfolio
from leakbudget.errors import LeakbudgetError

if TYPE_CHECKING:
    from leakbudget.portfolio import Command

PathsArg = Annotated[
    list[Path],
    typer.Argument(
        help="The workbook (.xlsx), or several workbooks and folders of them (a portfolio: one summary row each).",
        show_default=False,
        metavar="PATH...",
    ),
]
JobsOpt = Annotated[
    int | None,
    typer.Option(
        "--jobs", "-j", min=1, help="Workbooks checked at once, one process each (default: the machine's cores)."
    ),
]
RecursiveOpt = Annotated[
    bool, typer.Option("--recursive", "-r", help="Also take the workbooks in the subfolders of a folder named.")
]
OutDirOpt = Annotated[
    Path | None,
    typer.Option(
        "--out-dir",
        help="Write the results into copies in this folder (same file names) and leave the workbooks untouched.",
        callback=named_file,
    ),
]
SummaryOpt = Annotated[
    Path | None,
    typer.Option(
        "--summary", help="Also write a new summary workbook (.xlsx): one row per workbook.", callback=named_file
    ),
]
ClusterOpt = Annotated[
    str | None,
    typer.Option(
        "--cluster",
        metavar="ADDRESS",
        help="Run the workbooks on this Dask scheduler's workers (e.g. tcp://10.0.0.5:8786) instead of local "
        "processes; the files must be on storage every worker reads at the same path. Needs "
        "pip install 'leakbudget[cluster]'.",
    ),
]


def wants_portfolio(paths: list[Path], cluster: str | None) -> bool:
    """Several workbooks, a folder or a cluster make a portfolio; one workbook alone is checked as always."""
    return len(paths) != 1 or paths[0].is_dir() or cluster is not None


def single_out(path: Path, out: Path | None, out_dir: Path | None, no_write: bool) -> Path | None:
    """Where a single workbook's results go: ``--out``, or its copy in ``--out-dir`` (None with ``--no-write``)."""
    if out is not None and out_dir is not None:
        raise LeakbudgetError("give --out (one new file) or --out-dir (a folder for copies), not both.")
    if no_write or out_dir is None:
        return None if no_write else out
    out_dir.mkdir(parents=True, exist_ok=True)
    return out_dir / path.name


def refuse_summary(summary: Path | None, path: Path) -> None:
    """Before a single workbook's job: refuse a summary path that cannot be written (nothing is done then)."""
    if summary is not None:
        from leakbudget.portfolio import refuse_summary_path

        refuse_summary_path(summary, [path.resolve()])


def write_single_summary(summary: Path | None, job: Any, path: Path, as_json: bool) -> None:
    """The one-row summary workbook of a single workbook's job, when ``--summary`` asks for it."""
    if summary is None:
        return
    from leakbudget.portfolio import result_of, write_summary

    result = result_of(job, path)
    written = write_summary(summary, "review" if hasattr(job, "review") else "check", [result])
    if not as_json:
        out_console.print(f"Summary written to {written} (1 workbook).", highlight=False)


def run_portfolio(
    command: Command,
    paths: list[Path],
    *,
    code: str | None = None,
    out: Path | None,
    out_dir: Path | None,
    no_write: bool,
    as_json: bool,
    jobs: int | None,
    recursive: bool,
    summary: Path | None,
    cluster: str | None,
) -> NoReturn:
    """Check or review a portfolio, print its summary (or one JSON document), exit with its code."""
    from leakbudget import portfolio

    if out is not None:
        raise LeakbudgetError(
            "--out names one new workbook; for several workbooks give --out-dir DIR (copies with the same file "
            "names) instead."
        )
    out_dir = None if no_write else out_dir
    options: dict[str, Any] = {
        "jobs": jobs,
        "write": not no_write and out_dir is None,
        "out_dir": out_dir,
        "recursive": recursive,
        "cluster": cluster,
        "summary": summary,
        "keep": "documents" if as_json else "summary",
    }
    portfolio.keep_freed_memory()  # this process checks workbooks too
    try:
        with progress_bar(as_json, refresh_thread=False) as progress:
            if command == "review":
                result = portfolio.review_many(paths, code, progress=progress, **options)
            else:
                result = portfolio.check_many(paths, progress=progress, **options)
    except portfolio.PortfolioInterrupted as stop:
        done = "their results written" if not no_write else "nothing written"
        rest = (
            "those the cluster's workers had begun may still be finished, the others are not touched"
            if stop.on_cluster
            else "the others were not touched"
        )
        err_console.print(
            f"Interrupted: {stop.done} of {stop.total} workbooks were done ({done}); {rest}.", highlight=False
        )
        raise typer.Exit(130) from None
    if as_json:
        print_json(result.document())
    else:
        render_portfolio(result, out_dir, written=not no_write)
    raise typer.Exit(result.exit_code)
