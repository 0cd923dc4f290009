"""The command line: parse, call one library function, render, translate errors (exit 2) in one place."""

from __future__ import annotations

import json
import math
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any, Optional

import typer
from typer.core import TyperGroup
from rich import box
from rich.console import Console
from rich.padding import Padding
from rich.table import Table

from leakbudget.about import CAUTION, __version__
from leakbudget.errors import LeakbudgetError
from leakbudget.locations import LOCATION_KINDS
from leakbudget.input.schema import REVIEW_FINDINGS, SPLIT_PLAN

if TYPE_CHECKING:
    from leakbudget.progress import Progress

out_console = Console()
err_console = Console(stderr=True)



class _Group(TyperGroup):
    """Turns every LeakbudgetError into one line on stderr and exit code 2: the one place errors are converted."""

    def invoke(self, ctx: typer.Context) -> Any:
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
        "per circuit, check it against the device's levels, and write the results back into the workbook.\n\n"
        "A planning aid, not a substitute for measurement, the local code and licensed practice; test every "
        "protective device after installation and never remove protection to cure nuisance trips."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)

# Circuits the terminal table shows at most (rich needs about 2 ms a row; a campus has tens of thousands). Every
# circuit is in the 'Circuit results' sheet and in --json.
TERMINAL_TABLE_ROWS = 40
STATUS_STYLE = {"ok": "green", "over-budget": "yellow", "trip-risk": "bold red", "unprotected": "magenta"}

PathArg = Annotated[Path, typer.Argument(help="The workbook (.xlsx).", show_default=False, metavar="PATH")]
OutOpt = Annotated[
    Optional[Path],
    typer.Option("--out", "-o", help="Write the results into this new file and leave PATH untouched."),
]
JsonOpt = Annotated[bool, typer.Option("--json", help="Print one JSON document to stdout instead of tables.")]


def _fmt(value: float | None, digits: int = 3) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    return f"{value:.{digits}f}"


def _print_json(doc: Any) -> None:
    sys.stdout.write(json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n")


def _with_written(doc: dict[str, Any], written: Any) -> dict[str, Any]:
    """Add where the results were written (and the backup kept) to a command's JSON document."""
    doc["written_to"] = str(written.path) if written else None
    doc["backup"] = str(written.backup) if written and written.backup else None
    return doc


def _interactive() -> bool:
    """True when someone watches: stdout and stderr are both terminals (neither piped nor redirected)."""
    return all(stream is not None and stream.isatty() for stream in (sys.stdout, sys.stderr))


@contextmanager
def progress_bar(as_json: bool = False) -> Iterator[Progress | None]:
    """A progress callback for a job (:mod:`leakbudget.progress`) drawing one rich bar per stage on stderr,
    gone when the job ends; None (no bar) with ``--json`` or when output is piped."""
    if as_json or not _interactive():
        yield None
        return
    from rich.progress import BarColumn, Progress as Bars, TaskProgressColumn, TextColumn, TimeElapsedColumn

    bars = Bars(TextColumn("{task.description}"), BarColumn(), TaskProgressColumn(), TimeElapsedColumn(),
                console=err_console, transient=True)
    tasks: dict[str, Any] = {}

    def report(stage: str, done: int, total: int) -> None:
        if stage not in tasks:
            tasks[stage] = bars.add_task(stage, total=total)
        bars.update(tasks[stage], completed=done, total=total)

    with bars:
        yield report


def _report_written(written: Any, message: str) -> None:
    """Say where a command wrote (``message`` with ``{path}``) and where the previous version was kept."""
    if written is None:
        return
    out_console.print(message.format(path=written.path), highlight=False)
    if written.backup is not None:
        out_console.print(f"Previous version kept as {written.backup}.", highlight=False)


def _caution() -> None:
    err_console.print(f"[dim]Caution: {CAUTION}[/dim]", highlight=False)


def render_readings(result: Any) -> None:
    """The Readings sheet beside the estimate, and the calibrated figures where asked."""
    from leakbudget.readings import THRESHOLDS
    from leakbudget.output.check import readings_list

    rows = readings_list(result)
    if not rows:
        return
    table = Table(title="Readings against the estimate (mA)", title_justify="left", box=box.SIMPLE_HEAD,
                  pad_edge=False, padding=(0, 1, 0, 0))
    for header in ("Circuit", "Reading", "Conditions", "Estimate (95% range)", "Flag", "Calibrated"):
        table.add_column(header, justify="right" if header == "Reading" else "left", overflow="fold")
    for d in rows:
        estimate = (f"{_fmt(d['estimate_median_ma'], 2)} ({_fmt(d['estimate_low_ma'], 2)}-"
                    f"{_fmt(d['estimate_high_ma'], 2)})")
        flag_style = {"far above": "bold red", "far below": "yellow"}.get(d["flag"], "green")
        calibrated = "-"
        if d["calibration_factor"] is not None:
            calibrated = (f"×{d['calibration_factor']:.2f}: sum {_fmt(d['estimate_gate_ma'], 2)} → "
                          f"{_fmt(d['calibrated_gate_ma'], 2)}, {d['estimate_status']} → {d['calibrated_status']}, "
                          f"P(trip) {d['estimate_trip_probability_text']} → {d['calibrated_trip_probability_text']}")
        elif d["calibration"]:
            calibrated = d["calibration"]
        table.add_row(d["circuit"], _fmt(d["reading_ma"], 2), d["conditions"] + (f", {d['date']}" if d["date"] else ""),
                      estimate, f"[{flag_style}]{d['flag']}[/]", calibrated)
    out_console.print(table)
    for d in rows:
        if d["flag"] != "consistent":
            out_console.print(f"{d['circuit']} (Readings row {d['row']}): {d['message']}.", highlight=False)
    out_console.print(f"Thresholds: {THRESHOLDS}", highlight=False)


def _short_probability(text: str | None, probability: float | None, wide: bool) -> str:
    """'1.55% ±0.10' on a wide terminal, '1.6%' (two significant digits) on a narrow one; the ± stays in --json
    and the sheet."""
    if not text:
        return "-"
    if wide or probability is None or text.startswith("<"):
        return text if wide else text.split(" ")[0]
    return f"{100 * probability:.2g}%"


def _circuits_to_show(circuits: list[Any]) -> list[Any]:
    """All circuits when they fit the terminal table, else the ``TERMINAL_TABLE_ROWS`` using most of their budget
    (trip risk first, then over budget), in sheet order."""
    if len(circuits) <= TERMINAL_TABLE_ROWS:
        return circuits
    severity = {"trip-risk": 0, "over-budget": 1}

    def rank(i: int) -> tuple[int, float]:
        used = circuits[i].headroom_used
        return severity.get(circuits[i].status.value, 2), -(used if used == used else -1.0)  # NaN: unprotected

    return [circuits[i] for i in sorted(sorted(range(len(circuits)), key=rank)[:TERMINAL_TABLE_ROWS])]


def render_check(job: Any) -> None:
    from leakbudget.output.check import circuit_dict

    result = job.result
    project = result.project
    gate = "phasor" if project.settings.sum_rule == "phasor" else "arithmetic"
    wide = out_console.width >= 110
    table = Table(title=f"Standing leakage per circuit (mA): {project.path.name}", title_justify="left",
                  box=box.SIMPLE_HEAD, pad_edge=False, padding=(0, 1, 0, 0))
    table.add_column("Circuit", overflow="fold", min_width=6)
    levels = ("Budget", "No-trip") if wide else ("Budget/ no-trip",)
    for header in ("Device", "Sum", "Phasor", *levels, "Used", "Status", "P(trip)", "Switch-on"):
        table.add_column(header, justify="left" if header in ("Device", "Status") else "right",
                         no_wrap=header != "Budget/ no-trip", min_width=9 if header == "Budget/ no-trip" else None)
    if wide:
        table.add_column("Largest contributor", overflow="fold")
    shown = _circuits_to_show(result.circuits)
    for c in shown:
        d = circuit_dict(c)
        used = "-" if d["headroom_used"] is None else f"{100 * d['headroom_used']:.0f}%"
        budget, no_trip = _fmt(d["budget_ma"], 2), _fmt(d["no_trip_ma"], 2)
        cells = [
            d["circuit"], d["device"], _fmt(d["leakage_ma"], 2), _fmt(d["phasor_ma"], 2),
            *((budget, no_trip) if wide else (f"{budget}/{no_trip}" if d["budget_ma"] is not None else "-",)),
            used, f"[{STATUS_STYLE[d['status']]}]{d['status']}[/]",
            _short_probability(d["trip_probability_text"], d["trip_probability"], wide),
            _short_probability(d["trip_probability_switch_on_text"], d["trip_probability_switch_on"], wide),
        ]
        if wide:
            cells.append(f"{d['largest_contributor']} ({_fmt(d['largest_contributor_ma'], 2)})"
                         if d["largest_contributor"] else "-")
        table.add_row(*cells)
    out_console.print(table)
    if len(shown) < len(result.circuits):
        out_console.print(f"Showing {len(shown)} of {len(result.circuits):,} circuits: those using most of their budget; "
                          "every circuit is in the 'Circuit results' sheet (and in --json).", highlight=False)
    s = project.settings
    out_console.print(
        f"Budget = {s.budget_fraction:g} × trip level ({s.sources['Budget fraction']}); gated by the {gate} sum; "
        f"catalogue basis: {s.basis}.", highlight=False,
    )
    if result.risk is not None:
        for line in result.risk.method:
            out_console.print(f"Trip likelihood: {line}", highlight=False)
    for r in result.loads:
        if r.measured_on:
            out_console.print(f"Identical unit: '{r.name}' takes the Leakage measured on {r.measured_on}: same "
                              "appliance and model.", highlight=False)
    render_readings(result)
    for line in project.defaults_used:
        out_console.print(f"Default used: {line}", highlight=False)
    for line in project.warnings:
        err_console.print(f"[yellow]Warning:[/] {line}", highlight=False)
    if result.unplaced:
        out_console.print(f"{len(result.unplaced)} load(s) have no circuit yet; `leakbudget split` can place them.")
    bad = [c for c in result.circuits if c.status.value in ("over-budget", "trip-risk")]
    for c in bad[:TERMINAL_TABLE_ROWS]:
        out_console.print(f"{c.circuit.circuit_id} is {c.status.value}: largest contributor {c.largest} "
                          f"({c.largest_ma:.2f} mA).", highlight=False)
    if len(bad) > TERMINAL_TABLE_ROWS:
        out_console.print(f"… and {len(bad) - TERMINAL_TABLE_ROWS:,} more circuits over budget, each with its largest "
                          "contributor in the 'Circuit results' sheet.", highlight=False)
    if not result.circuits:
        out_console.print("The Circuits sheet has no circuits yet: add one row per circuit.")
    elif bad:
        out_console.print(
            f"[bold]{len(bad)} circuit(s) over budget.[/] Split loads across circuits (`leakbudget split`), measure "
            "the largest contributors, and repair appliances that leak far above their typical value; never remove "
            "or up-rate protection."
        )
    else:
        out_console.print("Every protected circuit is within its budget.")
    if job.written is not None:
        out_console.print(f"Results written to {job.written.path} (sheets: "
                          f"{', '.join(job.written.replaced + job.written.added)}).", highlight=False)
        if job.written.backup is not None:
            out_console.print(f"Previous version kept as {job.written.backup}.", highlight=False)
    _caution()


@app.command()
def check(
    path: PathArg,
    out: OutOpt = None,
    as_json: JsonOpt = False,
    no_write: Annotated[bool, typer.Option("--no-write", help="Check only; write nothing.")] = False,
) -> None:
    """Estimate standing leakage per protected circuit and write 'Circuit results' and 'Load results'.

    Exit code 0 when every protected circuit is within budget, 1 when any is not, 2 on bad input.
    """
    from leakbudget.api import check_workbook

    with progress_bar(as_json) as progress:
        job = check_workbook(path, out, write=not no_write, progress=progress)
    if as_json:
        from leakbudget.output.check import to_json

        _print_json(_with_written(to_json(job.result), job.written))
    else:
        render_check(job)
    raise typer.Exit(0 if job.result.all_ok else 1)


SEVERITY_STYLE = {"error": "bold red", "warning": "yellow", "info": "cyan"}


def render_review(job: Any) -> None:
    from leakbudget.review.rules import Severity

    rv = job.review
    project = rv.check.project
    out_console.print(f"Review of {project.path.name} against {rv.code.label}.", highlight=False)
    out_console.print(f"Code: {rv.code_source}.", highlight=False)
    for f in rv.findings:
        where = " / ".join(x for x in (f.circuit, f.load) if x)
        out_console.print(f"\n[{SEVERITY_STYLE[f.severity.value]}]{f.severity.value}[/] {f.rule}"
                          f"{' · ' + where if where else ''}", highlight=False)
        out_console.print(Padding(f"{f.message}\n[dim]Source: {f.source}[/dim]", (0, 0, 0, 2)), highlight=False)
    out_console.print()
    counts = {s: rv.count(s) for s in Severity}
    out_console.print(f"{counts[Severity.ERROR]} error(s), {counts[Severity.WARNING]} warning(s), "
                      f"{counts[Severity.INFO]} info.", highlight=False)
    if rv.check.unplaced:
        out_console.print(f"{len(rv.check.unplaced)} load(s) have no circuit yet; their circuit rules apply once "
                          "they are placed.", highlight=False)
    for line in project.warnings:
        err_console.print(f"[yellow]Warning:[/] {line}", highlight=False)
    _report_written(job.written, f"Findings written to {{path}} (sheet '{REVIEW_FINDINGS}').")
    _caution()


REVIEW_HELP = (
    "Check the plan, then review it against a wiring code and write a 'Review findings' sheet.\n\n"
    "Each finding has a severity (error, warning, info), a rule, the circuit and load it concerns, and the rule's "
    "source. Rooms are classified from their names; for a name the built-in table does not know, add a Locations "
    f"sheet with Room name and Location kind ({', '.join(LOCATION_KINDS)}).\n\n"
    "Exit code 0 when there is no error finding, 1 when there is, 2 on bad input."
)


CodeOpt = Annotated[Optional[str], typer.Option(
    "--code", help="Code to review against: nec-2020, nec-2023, iec-60364 or bs-7671. Default: the Code "
                   "setting, else nec-2023 for a 60 Hz plan and iec-60364 for a 50 Hz plan.")]


@app.command(help=REVIEW_HELP)
def review(
    path: PathArg,
    code: CodeOpt = None,
    out: OutOpt = None,
    as_json: JsonOpt = False,
    no_write: Annotated[bool, typer.Option("--no-write", help="Review only; write nothing.")] = False,
) -> None:
    from leakbudget.api import review_workbook
    from leakbudget.output.review import to_json

    job = review_workbook(path, code, out, write=not no_write)
    if as_json:
        _print_json(_with_written(to_json(job.review), job.written))
    else:
        render_review(job)
    raise typer.Exit(1 if job.review.errors else 0)


def render_split(job: Any) -> None:
    from leakbudget.output.split import circuits_list, likelihood_line, summary

    plan = job.plan
    project = plan.before.project
    out_console.print(f"Split plan for {project.path.name}: {summary(plan)}", highlight=False)
    changed = [a for a in plan.assignments if a.moved or a.placed]
    if changed:
        moves = Table(title="Moves", title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False,
                      padding=(0, 1, 0, 0))
        moves.add_column("Load", overflow="fold")
        for header in ("From", "To", "mA", "A"):
            moves.add_column(header, justify="right" if header in ("mA", "A") else "left", no_wrap=True)
        for a in changed:
            moves.add_row(a.load.name, a.from_id or "(unplaced)", a.to_id or "-", _fmt(a.leakage_ma, 2),
                          _fmt(a.current_a, 1))
        out_console.print(moves)
    table = Table(title="Circuits before → after", title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False,
                  padding=(0, 1, 0, 0))
    table.add_column("Circuit", overflow="fold", min_width=6)
    for header in ("Loads", "Sum mA", "Used", "Current A", "Status"):
        table.add_column(header, justify="left" if header == "Status" else "right", no_wrap=header != "Status")
    for d in circuits_list(plan):
        if not d["new"] and d["before_load_count"] == d["load_count"] and d["before_leakage_ma"] == d["leakage_ma"]:
            loads = str(d["load_count"])
            total = _fmt(d["leakage_ma"], 2)
        else:
            loads = f"{'-' if d['new'] else d['before_load_count']}→{d['load_count']}"
            total = f"{'-' if d['new'] else _fmt(d['before_leakage_ma'], 2)}→{_fmt(d['leakage_ma'], 2)}"
        used = "-" if d["headroom_used"] is None else f"{100 * d['headroom_used']:.0f}%"
        limit = "" if d["current_limit_a"] is None else f"/{d['current_limit_a']:.0f}"
        status = f"[{STATUS_STYLE[d['status']]}]{d['status']}[/]"
        if d["before_status"] not in (None, d["status"]):
            status = f"{d['before_status']}→{status}"
        current = f"{_fmt(d['current_a'], 1)}{limit}"
        if d["current_limit_a"] is not None and d["current_a"] is not None and d["current_a"] > d["current_limit_a"]:
            current = f"[bold red]{current}[/]"
            status += ", [bold red]over current[/]"
        table.add_row(d["circuit"] + (" (new)" if d["new"] else ""), loads, total, used, current, status)
    out_console.print(table)
    for n in plan.new_circuits:
        rating = f"{n.circuit.rating_a:g} A" if n.circuit.rating_a else "no rating"
        out_console.print(f"{n.circuit.circuit_id} serves {', '.join(n.circuit.rooms) or 'any room'}: "
                          f"{n.circuit.device.key}, {rating}, {n.template}.", highlight=False)
    gate = "phasor" if project.settings.sum_rule == "phasor" else "arithmetic"
    out_console.print(f"Limits: budget = {project.settings.budget_fraction:g} × trip level on the arithmetic sum "
                      f"(check gates on the {gate} sum); current ≤ {plan.load_factor:g} × rating, from "
                      f"{project.settings.sources['Load factor']}.", highlight=False)
    if plan.likelihood_cap is not None:
        out_console.print(f"Trip likelihood: {likelihood_line(plan)}", highlight=False)
    for b in plan.blockers:
        out_console.print(f"[bold red]Cannot fix:[/] {b.message}.", highlight=False)
    for line in plan.notes:
        out_console.print(f"Note: {line}", highlight=False)
    for line in project.warnings:
        err_console.print(f"[yellow]Warning:[/] {line}", highlight=False)
    if plan.blockers:
        out_console.print(f"[bold]No plan meets every limit.[/] The plan above fixes everything else; the "
                          f"{len(plan.blockers)} problem(s) named need your decision.")
    _report_written(job.written, f"Plan written to {{path}} (sheet '{SPLIT_PLAN}'); the Loads sheet is unchanged: "
                                 "move the loads there yourself, then check again.")
    _caution()


SPLIT_HELP = (
    "Plan the fewest changes that bring every protected circuit within its leakage budget and current limit, "
    "and write a 'Split plan' sheet (the Loads sheet is not changed).\n\n"
    "Loads go only on protected circuits that serve their room (when both say); Fixed loads stay; unplaced loads "
    "are placed. The plan has the fewest new circuits (NEW-1, ...), then the fewest moved loads, then the most "
    "headroom on the tightest circuit; the current limit is rating × the Load factor setting (default 0.8). "
    "Small plans are solved exactly (a MILP, HiGHS), large ones by a heuristic with a lower bound and gap.\n\n"
    "With --max-trip-likelihood (or the Max trip likelihood setting) every protected circuit's switch-on trip "
    "likelihood must also stay within that cap: circuits above it get tighter budgets and the plan is made "
    "again.\n\n"
    "Exit code 0 when a plan within every limit was found, 1 when none exists (the circuits and loads that "
    "prevent it are named), 2 on bad input."
)


TimeLimitOpt = Annotated[float, typer.Option("--time-limit", help="Seconds to spend at most on proving and "
                                                                  "improving the plan.", min=0.1)]
NewDeviceOpt = Annotated[Optional[str], typer.Option(
    "--new-device", help="Device key for new circuits (default: that of the circuits serving the room).")]
NewRatingOpt = Annotated[Optional[float], typer.Option(
    "--new-rating", help="Rating of new circuits in A (default: that of the circuits serving the room).")]
MaxLikelihoodOpt = Annotated[Optional[str], typer.Option(
    "--max-trip-likelihood", metavar="P", help="Highest switch-on trip likelihood a protected circuit may keep, "
    "e.g. '1 %' or 0.01 (default: the Max trip likelihood setting; none).")]


def _split_options(time_limit: float, new_device: str | None, new_rating: float | None,
                   max_likelihood: str | None) -> Any:
    from leakbudget.planner.plan import SplitOptions
    from leakbudget.planner.split import likelihood_cap_option

    cap = likelihood_cap_option(max_likelihood) if max_likelihood is not None else None
    return SplitOptions(time_limit_s=time_limit, new_device=new_device, new_rating_a=new_rating,
                        max_trip_likelihood=cap)


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
) -> None:
    from leakbudget.api import split_workbook

    options = _split_options(time_limit, new_device, new_rating, max_likelihood)
    with progress_bar(as_json) as progress:
        job = split_workbook(path, out, write=not no_write, options=options, progress=progress)
    if as_json:
        from leakbudget.output.split import to_json

        _print_json(_with_written(to_json(job.plan), job.written))
    else:
        render_split(job)
    raise typer.Exit(0 if job.plan.feasible else 1)


@app.command()
def report(
    path: PathArg,
    html: Annotated[Optional[Path], typer.Option("--html", help="Write the report as one self-contained HTML "
                                                 "file (charts embedded, no external links).")] = None,
    pdf: Annotated[Optional[Path], typer.Option("--pdf", help="Write the report as a PDF (A4 pages).")] = None,
    code: CodeOpt = None,
    split: Annotated[bool, typer.Option("--split", help="Also plan a split (as `leakbudget split`) and put the "
                                                        "plan in the report.")] = False,
    time_limit: TimeLimitOpt = 20.0,
    new_device: NewDeviceOpt = None,
    new_rating: NewRatingOpt = None,
    max_likelihood: MaxLikelihoodOpt = None,
) -> None:
    """Write a hand-over report: job, cautions, settings, a chart per circuit, tables with sources, findings.

    Runs the check and the review (against --code), with --split the split planner too (--time-limit,
    --new-device, --new-rating and --max-trip-likelihood apply to it), and lays them out; the workbook is only read. Exit code 0 when
    the report was written (whatever the circuits' status), 2 on bad input.
    """
    from leakbudget.api import report_workbook
    from leakbudget.review.rules import Severity

    options = _split_options(time_limit, new_device, new_rating, max_likelihood) if split else None
    job = report_workbook(path, html, pdf, code, options)
    rv = job.review
    counts = job.report.status_counts
    over = counts.get("over-budget", 0) + counts.get("trip-risk", 0)
    for written in job.written:
        out_console.print(f"Report written to {written} ({written.stat().st_size // 1024 or 1} KB).",
                          highlight=False)
    out_console.print(f"{len(rv.check.circuits)} circuit(s), {over} over budget. {job.report.verdict.text}",
                      highlight=False)
    out_console.print(f"Reviewed against {rv.code.label}: {rv.count(Severity.ERROR)} error(s), "
                      f"{rv.count(Severity.WARNING)} warning(s), {rv.count(Severity.INFO)} info.", highlight=False)
    if job.plan is not None:
        from leakbudget.output.split import summary

        out_console.print(f"Split plan: {summary(job.plan)}", highlight=False)
    _caution()


@app.command()
def demo(
    folder: Annotated[Path, typer.Option("--folder", help="Where to put the example workbook.")] = Path("."),
) -> None:
    """Copy the shipped example (an invented remodel) into FOLDER and check it there."""
    from leakbudget.api import check_workbook, copy_example

    dest = copy_example(folder)
    out_console.print(f"Copied the example workbook to {dest}.", highlight=False)
    job = check_workbook(dest)
    render_check(job)
    out_console.print(f"Open {dest} to see the 'Circuit results' and 'Load results' sheets.", highlight=False)


@app.command()
def template(
    path: Annotated[Path, typer.Argument(help="The new workbook to create (.xlsx).", show_default=False,
                                         metavar="PATH")],
) -> None:
    """Create a blank workbook with the sheets, headers, instructions and drop-down lists."""
    from leakbudget.workbook.template import write_template

    write_template(path)
    out_console.print(f"Created {path}. Fill in Circuits and Loads, then run: leakbudget check {path}",
                      highlight=False)


@app.command()
def appliances(
    word: Annotated[Optional[str], typer.Argument(help="Show only rows whose key, description or category "
                                                       "contain this word.")] = None,
    as_json: JsonOpt = False,
) -> None:
    """List or search the built-in appliance catalogue, with the source of every value."""
    from leakbudget.catalogue import built_in

    rows = built_in().search(word)
    if as_json:
        _print_json([
            {"key": a.key, "description": a.description, "category": a.category, "class": a.insulation_class,
             "connection": a.connection, "nature": a.nature, "waveform": a.waveform, "heating": a.heating,
             "typical_ma": a.typical_ma, "upper_ma": a.upper_ma, "reference_voltage_v": a.reference_voltage_v,
             "reference_frequency_hz": a.reference_frequency_hz, "typical_power_w": a.typical_power_w,
             "typical_source": str(a.typical_source), "upper_source": str(a.upper_source)}
            for a in rows
        ])
        return
    table = Table(title=f"Appliance catalogue ({len(rows)} rows)", title_justify="left", show_lines=True,
                  box=box.SIMPLE_HEAD)
    table.add_column("Key", no_wrap=True)
    table.add_column("Typical / upper mA", no_wrap=True)
    table.add_column("What, and where the figures come from", overflow="fold")
    for a in rows:
        table.add_row(
            a.key,
            f"{a.typical_ma:g} / {a.upper_ma:g}\nat {a.reference_voltage_v:g} V {a.reference_frequency_hz:g} Hz",
            f"{a.description} ({a.nature}, {a.waveform})\ntypical: {a.typical_source}\nupper: {a.upper_source}",
        )
    out_console.print(table)
    if not rows:
        out_console.print(f"No catalogue row matches '{word}'.", highlight=False)


@app.command()
def cables(as_json: JsonOpt = False) -> None:
    """List the cable catalogue (capacitance of one line conductor to earth per metre)."""
    from leakbudget.catalogue import built_in

    rows = list(built_in().cables.values())
    if as_json:
        _print_json([{"key": c.key, "description": c.description, "capacitance_pf_per_m": c.capacitance_pf_per_m,
                      "source": str(c.source)} for c in rows])
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
        _print_json([{"key": d.key, "label": d.label, "trip_ma": d.trip_ma, "no_trip_ma": d.no_trip_ma,
                      "trip_source": str(d.trip_source), "no_trip_source": str(d.no_trip_source)} for d in rows]
                    + [{"key": "none", "label": DEVICES["none"].label, "trip_ma": None, "no_trip_ma": None,
                        "trip_source": None, "no_trip_source": None}])
        return
    table = Table(title="Protective devices", title_justify="left", show_lines=True, box=box.SIMPLE_HEAD)
    table.add_column("Key", no_wrap=True)
    table.add_column("Trip / no-trip mA", no_wrap=True)
    table.add_column("Device, and where the levels come from", overflow="fold")
    for d in rows:
        table.add_row(d.key, f"{d.trip_ma:g} / {d.no_trip_ma:g}",
                      f"{d.label}\ntrip: {d.trip_source}\nno-trip: {d.no_trip_source}")
    table.add_row("none", "-", DEVICES["none"].label)
    out_console.print(table)


def version_callback(value: bool) -> None:
    if value:
        out_console.print(f"leakbudget {__version__}")
        raise typer.Exit()


@app.callback()
def root(
    version: Annotated[bool, typer.Option("--version", callback=version_callback, is_eager=True,
                                          help="Show the version and exit.")] = False,
) -> None:
    """Standing earth-leakage budgets for GFCI/RCD-protected circuits."""


def main() -> None:
    """Entry point of the console script and ``python -m leakbudget``."""
    app()
