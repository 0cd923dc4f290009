"""The command line: parse, call one library function, render, translate errors (exit 2) in one place."""

from __future__ import annotations

import atexit
import os
import sys
import threading
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any, NoReturn

import typer
from rich import box
from rich.table import Table
from typer.core import TyperGroup

from leakbudget.about import __version__
from leakbudget.cli.options import named_file
from leakbudget.cli.portfolio import (
    ClusterOpt,
    JobsOpt,
    OutDirOpt,
    PathsArg,
    RecursiveOpt,
    SummaryOpt,
    refuse_summary,
    run_portfolio,
    single_out,
    wants_portfolio,
    write_single_summary,
)
from leakbudget.cli.render import (
    caution,
    err_console,
    out_console,
    print_json,
    print_json_chunks,
    progress_bar,
    render_applied,
    render_check,
    render_review,
    render_split,
)
from leakbudget.errors import LeakbudgetError
from leakbudget.locations import LOCATION_KINDS

if TYPE_CHECKING:
    # typer 0.27 carries its own copy of click; TyperGroup.invoke takes that copy's Context
    from typer._click import Context as ClickContext


class _Group(TyperGroup):
    """Turns every LeakbudgetError into ``Error: …`` on stderr and exit code 2: the one place errors are converted.

    One problem is one line; a workbook with several (:class:`~leakbudget.errors.WorkbookProblems`) gives a heading
    line and one sentence a line below it. Nothing goes to stdout, so a `--json` reader sees no document at all."""

    def invoke(self, ctx: ClickContext) -> Any:
        try:
            return super().invoke(ctx)
        except LeakbudgetError as exc:
            err_console.print(f"Error: {exc}", highlight=False, markup=False, soft_wrap=True)
            raise typer.Exit(2) from None
        except KeyboardInterrupt:
            err_console.print("Interrupted; nothing was written.", highlight=False)
            raise typer.Exit(130) from None


app = typer.Typer(
    cls=_Group,
    name="leakbudget",
    help=(
        "Standing earth-leakage budgets for GFCI/RCD-protected circuits: estimate each load's leakage, sum it "
        "per circuit and per shared device, check it against the device's levels, and write the results back into "
        "the workbook.\n\n"
        "A planning aid, not a substitute for measurement, the local code and licensed practice; test every "
        "protective device after installation and never remove protection to cure nuisance trips."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)


PathArg = Annotated[Path, typer.Argument(help="The workbook (.xlsx or .ods).", show_default=False, metavar="PATH")]
OutOpt = Annotated[
    Path | None,
    typer.Option(
        "--out", "-o", help="Write the results into this new file and leave PATH untouched.", callback=named_file
    ),
]
JsonOpt = Annotated[bool, typer.Option("--json", help="Print one JSON document to stdout instead of tables.")]
QuietOpt = Annotated[
    bool,
    typer.Option("--quiet", "-q", help="Print only the verdict, the counts, where results went and the caution."),
]
ForceOpt = Annotated[
    bool,
    typer.Option(
        "--force", help="Let --out replace a file that exists (its current version is kept as a backup beside it)."
    ),
]


@app.command()
def check(
    paths: PathsArg,
    out: OutOpt = None,
    as_json: JsonOpt = False,
    no_write: Annotated[bool, typer.Option("--no-write", help="Check only; write nothing.")] = False,
    force: ForceOpt = False,
    quiet: QuietOpt = False,
    out_dir: OutDirOpt = None,
    jobs: JobsOpt = None,
    recursive: RecursiveOpt = False,
    summary: SummaryOpt = None,
    cluster: ClusterOpt = None,
) -> None:
    """Estimate standing leakage per protected circuit and shared device; write 'Circuit results', 'Load results'
    and, with a Protection sheet, 'Device results'.

    Several workbooks or folders (their .xlsx files; subfolders with --recursive) are checked --jobs at a time, one
    process each, and summarised one row per workbook (--summary writes that as a workbook); a workbook that
    cannot be read is reported in one sentence and the others go on.

    Exit code 0 when every protected circuit and shared device is within budget and none is marginal, 1 when
    any is not, 2 on bad input (for several workbooks: 2 when any could not be read, else 1 when any is not within
    budget).
    """
    from leakbudget import api

    if wants_portfolio(paths, cluster):
        run_portfolio(
            "check",
            paths,
            out=out,
            out_dir=out_dir,
            no_write=no_write,
            as_json=as_json,
            jobs=jobs,
            recursive=recursive,
            summary=summary,
            cluster=cluster,
        )
    path, out = paths[0], single_out(paths[0], out, out_dir, no_write)
    refuse_summary(summary, path)
    with progress_bar(as_json) as progress:
        job = api.check(path, write=not no_write, out=None if no_write else out, progress=progress, force=force)
    if as_json:
        print_json_chunks(job.document_chunks())
    else:
        render_check(job, quiet)
    write_single_summary(summary, job, path, as_json)
    raise typer.Exit(0 if job.result.all_ok else 1)


REVIEW_HELP = (
    "Check the plan, then review it against a wiring code and write a 'Review findings' sheet.\n\n"
    "Each finding has a severity (error, warning, info), a rule, the circuit and load it concerns, and the rule's "
    "source. Rooms are classified from their names; for a name the built-in table does not know, add a Locations "
    f"sheet with Room name and Location kind ({', '.join(LOCATION_KINDS)}).\n\n"
    "Several workbooks or folders are reviewed --jobs at a time and summarised one row per workbook, as for "
    "check.\n\n"
    "Exit code 0 when there is no error finding, 1 when there is, 2 on bad input (for several workbooks: 2 when any "
    "could not be read, else 1 when any has an error finding)."
)


CodeOpt = Annotated[
    str | None,
    typer.Option(
        "--code",
        help="Code to review against: nec-2020, nec-2023, iec-60364 or bs-7671. Default: the Code "
        "setting, else nec-2023 for a 60 Hz plan and iec-60364 for a 50 Hz plan.",
    ),
]


@app.command(help=REVIEW_HELP)
def review(
    paths: PathsArg,
    code: CodeOpt = None,
    out: OutOpt = None,
    as_json: JsonOpt = False,
    no_write: Annotated[bool, typer.Option("--no-write", help="Review only; write nothing.")] = False,
    force: ForceOpt = False,
    quiet: QuietOpt = False,
    out_dir: OutDirOpt = None,
    jobs: JobsOpt = None,
    recursive: RecursiveOpt = False,
    summary: SummaryOpt = None,
    cluster: ClusterOpt = None,
) -> None:
    from leakbudget import api

    if wants_portfolio(paths, cluster):
        run_portfolio(
            "review",
            paths,
            code=code,
            out=out,
            out_dir=out_dir,
            no_write=no_write,
            as_json=as_json,
            jobs=jobs,
            recursive=recursive,
            summary=summary,
            cluster=cluster,
        )
    path, out = paths[0], single_out(paths[0], out, out_dir, no_write)
    refuse_summary(summary, path)
    job = api.review(path, code, write=not no_write, out=None if no_write else out, force=force)
    if as_json:
        print_json(job.document())
    else:
        render_review(job, quiet)
    write_single_summary(summary, job, path, as_json)
    raise typer.Exit(1 if job.review.errors else 0)


SPLIT_HELP = (
    "Plan the fewest changes that bring every protected circuit within its leakage budget and current limit, "
    "and write a 'Split plan' sheet (the Loads sheet is not changed).\n\n"
    "Loads go only on protected circuits that serve their room (when both say) and take their kind of load (a "
    "circuit's Purpose: plug loads on sockets or mixed circuits, luminaires on lighting or mixed, nothing onto a "
    "dedicated circuit); loads of one Group move together; loads marked Stays (or named in --keep) stay; unplaced "
    "loads are placed. The plan has the fewest new circuits (NEW-1, ...), then the fewest moved loads, then the most "
    "headroom on the tightest circuit. Current is judged by the Current rule setting: diversity (default: the "
    "largest load in full, 40 % of the others, within the rating), all-on, or strict; a single plug load at most "
    "80 % of the rating. "
    "Small plans are solved exactly (a MILP, HiGHS), large ones by a heuristic with a lower bound and gap.\n\n"
    "With --max-trip-likelihood (or the Max trip likelihood setting) every protected circuit's switch-on trip "
    "likelihood must also stay within that cap: circuits above it get tighter budgets and the plan is made "
    "again.\n\n"
    "Exit code 0 when a plan within every leakage limit was found (a current limit broken by loads that must stay "
    "is a warning, a failure only under the strict rule), 1 when none exists (the circuits and loads that prevent "
    "it are named), 2 on bad input.\n\n"
    "With --apply --out NEW.xlsx the plan is written into a copy: each moved or placed load's Circuit cell, the new "
    "circuits as rows appended to Circuits (marked proposed in their Note), the circuits the board plan moves with "
    "their new Protected by; then the copy is checked and its result sheets written into it. PATH is never "
    "changed. A plan that cannot meet every limit is applied as far as it goes. Exit code 0 when the plan meets "
    "every limit and the copy passes check, 1 otherwise."
)


TimeLimitOpt = Annotated[
    float, typer.Option("--time-limit", help="Seconds to spend at most on proving and improving the plan.", min=0.1)
]
NewDeviceOpt = Annotated[
    str | None,
    typer.Option("--new-device", help="Device key for new circuits (default: that of the circuits serving the room)."),
]
NewRatingOpt = Annotated[
    float | None,
    typer.Option("--new-rating", help="Rating of new circuits in A (default: that of the circuits serving the room)."),
]
MaxLikelihoodOpt = Annotated[
    str | None,
    typer.Option(
        "--max-trip-likelihood",
        metavar="P",
        help="Highest switch-on trip likelihood a protected circuit may keep, "
        "e.g. '1 %' or 0.01 (default: the Max trip likelihood setting; none).",
    ),
]


KeepOpt = Annotated[
    str | None,
    typer.Option(
        "--keep",
        metavar="LOAD,...",
        help="Loads that stay where they are for this plan (names as in the Load column, comma-separated); the "
        "workbook is not changed.",
    ),
]
AvoidOpt = Annotated[
    str | None,
    typer.Option(
        "--avoid",
        metavar="CIRCUIT,...",
        help="Circuits that take no new load in this plan (ids as in the Circuit column, comma-separated).",
    ),
]


def _names(text: str | None) -> tuple[str, ...]:
    return tuple(n.strip() for n in (text or "").split(",") if n.strip())


def _split_options(
    time_limit: float,
    new_device: str | None,
    new_rating: float | None,
    max_likelihood: str | None,
    keep: str | None = None,
    avoid: str | None = None,
) -> Any:
    from leakbudget.planner.plan import SplitOptions
    from leakbudget.planner.split import likelihood_cap_option

    cap = likelihood_cap_option(max_likelihood) if max_likelihood is not None else None
    return SplitOptions(
        time_limit_s=time_limit,
        new_device=new_device,
        new_rating_a=new_rating,
        max_trip_likelihood=cap,
        keep=_names(keep),
        avoid=_names(avoid),
    )


@app.command(help=SPLIT_HELP)
def split(
    path: PathArg,
    out: OutOpt = None,
    as_json: JsonOpt = False,
    no_write: Annotated[bool, typer.Option("--no-write", help="Plan only; write nothing.")] = False,
    time_limit: TimeLimitOpt = 20.0,
    new_device: NewDeviceOpt = None,
    new_rating: NewRatingOpt = None,
    max_likelihood: MaxLikelihoodOpt = None,
    keep: KeepOpt = None,
    avoid: AvoidOpt = None,
    apply: Annotated[
        bool,
        typer.Option(
            "--apply",
            help="Write the plan into a copy of the workbook (--out NEW.xlsx) and check that copy; PATH is not "
            "changed.",
        ),
    ] = False,
    force: ForceOpt = False,
    quiet: QuietOpt = False,
) -> None:
    from leakbudget import api

    if apply:
        _refuse_apply_options(path, out, no_write)
    options = _split_options(time_limit, new_device, new_rating, max_likelihood, keep, avoid)
    plan_only = no_write or apply  # with --apply, --out names the copy: nothing goes into PATH
    with progress_bar(as_json) as progress:
        job = api.split(
            path,
            options,
            write=not plan_only,
            out=None if plan_only else out,
            progress=progress,
            apply_to=out if apply else None,
            force=force,
        )
    if as_json:
        print_json(job.document())
    elif job.applied is not None:
        render_applied(job, quiet)
    else:
        render_split(job, quiet)
    raise typer.Exit(0 if job.plan.feasible and (job.applied is None or job.applied.all_ok) else 1)


def _refuse_apply_options(path: Path, out: Path | None, no_write: bool) -> None:
    if no_write:
        raise LeakbudgetError(
            f"{path.name}: --apply writes a planned copy and --no-write writes nothing; give one of them, not both."
        )
    if out is None:
        raise LeakbudgetError(
            f"{path.name}: --apply writes the plan into a new copy and never into {path.name}; name the copy with "
            f"--out, e.g. --out {path.stem}-planned{path.suffix}."
        )


@app.command()
def report(
    path: PathArg,
    html: Annotated[
        Path | None,
        typer.Option(
            "--html",
            help="Write the report as one self-contained HTML file (charts inline, no external links).",
            callback=named_file,
        ),
    ] = None,
    pdf: Annotated[
        Path | None, typer.Option("--pdf", help="Write the report as a PDF (A4 pages).", callback=named_file)
    ] = None,
    code: CodeOpt = None,
    split: Annotated[
        bool, typer.Option("--split", help="Also plan a split (as `leakbudget split`) and put the plan in the report.")
    ] = False,
    time_limit: TimeLimitOpt = 20.0,
    new_device: NewDeviceOpt = None,
    new_rating: NewRatingOpt = None,
    max_likelihood: MaxLikelihoodOpt = None,
    keep: KeepOpt = None,
    avoid: AvoidOpt = None,
    all_circuits: Annotated[
        bool,
        typer.Option(
            "--all-circuits", help="A detail page (chart and load table) for every circuit, not only those not ok."
        ),
    ] = False,
    quiet: QuietOpt = False,
) -> None:
    """Write a hand-over report: a one-page summary, then job, cautions, settings, tables with sources, a chart and
    load table per circuit that is not ok (every circuit with --all-circuits), findings.

    Runs the check and the review (against --code), with --split the split planner too (--time-limit,
    --new-device, --new-rating, --max-trip-likelihood, --keep and --avoid apply to it), and lays them out; the workbook is only read. Exit code 0 when
    the report was written (whatever the circuits' status), 2 on bad input.
    """
    from leakbudget import api
    from leakbudget.compliance.rules import Severity

    options = _split_options(time_limit, new_device, new_rating, max_likelihood, keep, avoid) if split else None
    job = api.report(path, html, pdf, code, options, all_circuits=all_circuits)
    rv = job.review
    counts = job.report.status_counts
    over = counts.get("over-budget", 0) + counts.get("trip-risk", 0)
    for written in job.written:
        out_console.print(f"Report written to {written} ({written.stat().st_size // 1024 or 1} KB).", highlight=False)
    out_console.print(
        f"{len(rv.check.circuits)} circuit(s), {over} over budget. {job.report.verdict.text}", highlight=False
    )
    out_console.print(
        f"Reviewed against {rv.label}: {rv.count(Severity.ERROR)} error(s), "
        f"{rv.count(Severity.WARNING)} warning(s), {rv.count(Severity.INFO)} info.",
        highlight=False,
    )
    if job.plan is not None and not quiet:
        from leakbudget.output.split import summary

        out_console.print(f"Split plan: {summary(job.plan)}", highlight=False)
    caution()


EXAMPLES = ("alder-quay-remodel", "tanners-row-flat")


@app.command()
def demo(
    folder: Annotated[
        Path, typer.Option("--folder", help="Where to put the example workbook.", callback=named_file)
    ] = Path("."),
    example: Annotated[
        str,
        typer.Option(
            "--example",
            help="Which invented example: alder-quay-remodel (a US remodel, the default) or tanners-row-flat (a UK "
            "flat on a dual-RCD board).",
        ),
    ] = EXAMPLES[0],
    quiet: QuietOpt = False,
) -> None:
    """Copy a shipped example (an invented job) into FOLDER and check it there."""
    from leakbudget import api
    from leakbudget.errors import LeakbudgetError

    if example not in EXAMPLES:
        raise LeakbudgetError(f"--example '{example}' is not a shipped example; use one of {', '.join(EXAMPLES)}.")
    if folder.exists() and not folder.is_dir():
        raise LeakbudgetError(f"--folder {folder}: this is a file, not a folder; give a folder for the example.")
    if not folder.exists():
        try:
            folder.mkdir(parents=True)
        except OSError as exc:
            raise LeakbudgetError(
                f"--folder {folder}: cannot create the folder ({exc.strerror}); give another."
            ) from None
        out_console.print(f"Created the folder {folder}.", highlight=False)
    dest = api.copy_example(folder, f"{example}.xlsx")
    out_console.print(f"Copied the example workbook to {dest}.", highlight=False)
    job = api.check(dest, write=True)
    render_check(job, quiet)
    if not quiet:
        out_console.print(f"Open {dest} to see the 'Circuit results' and 'Load results' sheets.", highlight=False)


@app.command()
def template(
    path: Annotated[
        Path, typer.Argument(help="The new workbook to create (.xlsx).", show_default=False, metavar="PATH")
    ],
) -> None:
    """Create a blank workbook with the sheets, headers, instructions and drop-down lists."""
    from leakbudget.workbook.template import write_template

    write_template(path)
    out_console.print(f"Created {path}. Fill in Circuits and Loads, then run: leakbudget check {path}", highlight=False)


@app.command()
def appliances(
    word: Annotated[
        str | None, typer.Argument(help="Show only rows whose key, description or category contain this word.")
    ] = None,
    as_json: JsonOpt = False,
) -> None:
    """List or search the built-in appliance catalogue, with the source of every value."""
    from leakbudget.catalogue import built_in

    rows = built_in().search(word)
    if as_json:
        print_json(
            [
                {
                    "key": a.key,
                    "description": a.description,
                    "category": a.category,
                    "class": a.insulation_class,
                    "connection": a.connection,
                    "nature": a.nature,
                    "waveform": a.waveform,
                    "heating": a.heating,
                    "typical_ma": a.typical_ma,
                    "upper_ma": a.upper_ma,
                    "reference_voltage_v": a.reference_voltage_v,
                    "reference_frequency_hz": a.reference_frequency_hz,
                    "typical_power_w": a.typical_power_w,
                    "typical_source": str(a.typical_source),
                    "upper_source": str(a.upper_source),
                }
                for a in rows
            ]
        )
        return
    table = Table(
        title=f"Appliance catalogue ({len(rows)} row{'' if len(rows) == 1 else 's'})",
        title_justify="left",
        show_lines=True,
        box=box.SIMPLE_HEAD,
    )
    table.add_column("Key", no_wrap=True)
    table.add_column("Typical / upper mA", no_wrap=True)
    table.add_column("What, and where the figures come from", overflow="fold")
    for a in rows:
        table.add_row(
            a.key,
            f"{a.typical_ma:g} / {a.upper_ma:g}\nat {a.reference_voltage_v:g} V {a.reference_frequency_hz:g} Hz",
            f"{a.description} ({a.nature}, {a.waveform})\ntypical: {_said_once('typical', a.typical_source)}"
            f"\nupper: {_said_once('upper', a.upper_source)}",
        )
    out_console.print(table)
    if not rows:
        out_console.print(f"No catalogue row matches '{word}'.", highlight=False)


def _said_once(label: str, source: object) -> str:
    """A catalogue figure's source after its label, without saying the label twice ("typical: from memory" for the
    source "typical, from memory")."""
    text = str(source)
    return text.removeprefix(f"{label}, ")


@app.command()
def cables(as_json: JsonOpt = False) -> None:
    """List the cable catalogue (capacitance of one line conductor to earth per metre)."""
    from leakbudget.catalogue import built_in

    rows = list(built_in().cables.values())
    if as_json:
        print_json(
            [
                {
                    "key": c.key,
                    "description": c.description,
                    "capacitance_pf_per_m": c.capacitance_pf_per_m,
                    "source": str(c.source),
                }
                for c in rows
            ]
        )
        return
    table = Table(title="Cable catalogue", title_justify="left", show_lines=True, box=box.SIMPLE_HEAD)
    table.add_column("Key", no_wrap=True)
    table.add_column("pF/m to earth", no_wrap=True, justify="right")
    table.add_column("Cable, and where the figure comes from", overflow="fold")
    for c in rows:
        table.add_row(c.key, f"{c.capacitance_pf_per_m:g}", f"{c.description}\n{c.source}")
    out_console.print(table)


@app.command()
def devices(as_json: JsonOpt = False) -> None:
    """List the protective device keys with their trip and no-trip levels and sources."""
    from leakbudget.devices import DEVICES

    rows = [d for d in DEVICES.values() if d.protected]
    if as_json:
        print_json(
            [
                {
                    "key": d.key,
                    "label": d.label,
                    "trip_ma": d.trip_ma,
                    "no_trip_ma": d.no_trip_ma,
                    "trip_source": str(d.trip_source),
                    "no_trip_source": str(d.no_trip_source),
                }
                for d in rows
            ]
            + [
                {
                    "key": "none",
                    "label": DEVICES["none"].label,
                    "trip_ma": None,
                    "no_trip_ma": None,
                    "trip_source": None,
                    "no_trip_source": None,
                }
            ]
        )
        return
    table = Table(title="Protective devices", title_justify="left", show_lines=True, box=box.SIMPLE_HEAD)
    table.add_column("Key", no_wrap=True)
    table.add_column("Trip / no-trip mA", no_wrap=True)
    table.add_column("Device, and where the levels come from", overflow="fold")
    for d in rows:
        table.add_row(
            d.key, f"{d.trip_ma:g} / {d.no_trip_ma:g}", f"{d.label}\ntrip: {d.trip_source}\nno-trip: {d.no_trip_source}"
        )
    table.add_row("none", "-", DEVICES["none"].label)
    out_console.print(table)


def version_callback(value: bool) -> None:
    if value:
        out_console.print(f"leakbudget {__version__}")
        raise typer.Exit()


@app.callback()
def root(
    version: Annotated[
        bool, typer.Option("--version", callback=version_callback, is_eager=True, help="Show the version and exit.")
    ] = False,
) -> None:
    """Standing earth-leakage budgets for GFCI/RCD-protected circuits."""


def main() -> None:
    """Run the command line on ``sys.argv``; ends by raising SystemExit with the exit status, as click does (for
    callers that wrap it). The console script and ``python -m leakbudget`` run :func:`script`."""
    app()


def script() -> NoReturn:
    """Entry point of the console script and ``python -m leakbudget``: run the command, then leave at once."""
    try:
        main()
    except SystemExit as stop:
        leave(stop.code)
    leave(0)


def leave(code: object) -> NoReturn:
    """End the process with exit status ``code`` without Python's teardown of every module and object.

    The teardown frees what the operating system frees anyway, and takes 60-100 ms after a portfolio (measured on
    the 2-core machine: 0.06 s after only the imports), time spent on every command's critical path. The exit
    functions still run (multiprocessing's, logging's, any caller's), and standard output and error are flushed;
    when they cannot be (a closed pipe), when the status is not a number, or when another thread is still running,
    Python's usual exit takes over and behaves as it always has.
    """
    if not isinstance(code, int) or threading.active_count() > 1:
        raise SystemExit(code)
    atexit._run_exitfuncs()
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except (OSError, ValueError):  # a reader that went away, or a stream already closed
        raise SystemExit(code) from None
    os._exit(code)
