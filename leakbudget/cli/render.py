"""What the commands show on the terminal (rich): tables, verdicts, where results went, the caution, progress bars.

Each ``render_*`` prints one job's result; nothing here reads, computes or decides an exit code.
"""

from __future__ import annotations

import json
import math
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from typing import TYPE_CHECKING, Any

from rich import box
from rich.console import Console
from rich.padding import Padding
from rich.table import Table

from leakbudget.about import CAUTION
from leakbudget.input.schema import REVIEW_FINDINGS, SPLIT_PLAN
from leakbudget.output.portfolio import OVER

if TYPE_CHECKING:
    from leakbudget.progress import Progress


out_console = Console()


err_console = Console(stderr=True)


# Circuits the terminal table shows at most (rich needs about 2 ms a row; a campus has tens of thousands). Every
# circuit is in the 'Circuit results' sheet and in --json.
TERMINAL_TABLE_ROWS = 40


STATUS_STYLE = {
    "ok": "green",
    "marginal": "dark_khaki",
    "over-budget": "yellow",
    "trip-risk": "bold red",
    "unprotected": "magenta",
}


def fmt(value: float | None, digits: int = 3) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    return f"{value:.{digits}f}"


def print_json(doc: Any) -> None:
    sys.stdout.write(json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n")


def print_json_chunks(chunks: Any) -> None:
    """A JSON document made a piece at a time (the same text :func:`print_json` prints for it)."""
    for chunk in chunks:
        sys.stdout.write(chunk)
    sys.stdout.write("\n")


def with_written(doc: dict[str, Any], written: Any) -> dict[str, Any]:
    """Add where the results were written (and the backup kept) to a command's JSON document."""
    doc["written_to"] = str(written.path) if written else None
    doc["backup"] = str(written.backup) if written and written.backup else None
    return doc


def interactive() -> bool:
    """True when someone watches: stdout and stderr are both terminals (neither piped nor redirected)."""
    return all(stream is not None and stream.isatty() for stream in (sys.stdout, sys.stderr))


@contextmanager
def progress_bar(as_json: bool = False, refresh_thread: bool = True) -> Iterator[Progress | None]:
    """A progress callback for a job (:mod:`leakbudget.progress`) drawing one rich bar per stage on stderr,
    gone when the job ends; None (no bar) with ``--json`` or when output is piped.

    Without ``refresh_thread`` the bars are redrawn at each report, not by a thread of their own (a portfolio
    reports at every workbook, and a process with no other thread can fork its workers)."""
    if as_json or not interactive():
        yield None
        return
    from rich.progress import BarColumn, TaskProgressColumn, TextColumn, TimeElapsedColumn
    from rich.progress import Progress as Bars

    bars = Bars(
        TextColumn("{task.description}"),
        BarColumn(),
        TaskProgressColumn(),
        TimeElapsedColumn(),
        console=err_console,
        transient=True,
        auto_refresh=refresh_thread,
    )
    tasks: dict[str, Any] = {}

    def report(stage: str, done: int, total: int) -> None:
        if stage not in tasks:
            tasks[stage] = bars.add_task(stage, total=total)
        bars.update(tasks[stage], completed=done, total=total, refresh=not refresh_thread)

    with bars:
        yield report


def report_written(written: Any, message: str) -> None:
    """Say where a command wrote (``message`` with ``{path}``) and where the previous version was kept."""
    if written is None:
        return
    out_console.print(message.format(path=written.path), highlight=False)
    if written.backup is not None:
        out_console.print(f"Previous version kept as {written.backup}.", highlight=False)


def caution() -> None:
    err_console.print(f"[dim]Caution: {CAUTION}[/dim]", highlight=False)


def render_readings(result: Any) -> None:
    """The Readings sheet beside the estimate, and the calibrated figures where asked."""
    from leakbudget.output.check import readings_list
    from leakbudget.readings import THRESHOLDS

    rows = readings_list(result)
    if not rows:
        return
    table = Table(
        title="Readings against the estimate (mA)",
        title_justify="left",
        box=box.SIMPLE_HEAD,
        pad_edge=False,
        padding=(0, 1, 0, 0),
    )
    for header in ("Circuit", "Reading", "Conditions", "Estimate (95% range)", "Flag", "Calibrated"):
        table.add_column(header, justify="right" if header == "Reading" else "left", overflow="fold")
    for d in rows:
        estimate = f"{fmt(d['estimate_median_ma'], 2)} ({fmt(d['estimate_low_ma'], 2)}-{fmt(d['estimate_high_ma'], 2)})"
        flag_style = {"far above": "bold red", "far below": "yellow"}.get(d["flag"], "green")
        calibrated = "-"
        if d["calibration_factor"] is not None:
            calibrated = (
                f"×{d['calibration_factor']:.2f}: sum {fmt(d['estimate_gate_ma'], 2)} → "
                f"{fmt(d['calibrated_gate_ma'], 2)}, {d['estimate_status']} → {d['calibrated_status']}, "
                f"P(trip) {d['estimate_trip_probability_text']} → {d['calibrated_trip_probability_text']}"
            )
        elif d["calibration"]:
            calibrated = d["calibration"]
        table.add_row(
            d["circuit"],
            fmt(d["reading_ma"], 2),
            d["conditions"] + (f", {d['date']}" if d["date"] else ""),
            estimate,
            f"[{flag_style}]{d['flag']}[/]",
            calibrated,
        )
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


MARGINAL_LISTED = 10  # marginal circuits named in the terminal's one sentence about them, the likeliest first
SWITCH_ON = "Switch-\non"  # a narrow table's header for the switch-on likelihood, as wide as its figures
# A narrow table's one column for the budget and the no-trip level, its header on two lines (a pair such as
# 9.00/15.00 never wraps, and the header takes no more room than the pair).
BUDGET_PAIR = "Budget/\nno-trip"


def render_board(result: Any, wide: bool) -> None:
    """The protection tree: each shared device with what hangs under it, indented, and its accumulated total."""
    from leakbudget.output.check import device_dict

    table = Table(
        title="Shared devices: everything below each one (mA)",
        title_justify="left",
        box=box.SIMPLE_HEAD,
        show_edge=False,
        pad_edge=False,
        padding=(0, 1, 0, 0),
    )
    headers = ("Device", "Key", "Sum", "Phasor", BUDGET_PAIR, "Used", "Status", "P(trip)", "Switch-on")
    for header in headers if wide else tuple(h for h in headers if h != "Key"):
        table.add_column(
            header, justify="left" if header in ("Device", "Key", "Status") else "right", no_wrap=header != "Device"
        )
    devices = {d.device_id: d for d in result.devices}
    circuits = {c.circuit.circuit_id: c for c in result.circuits}

    def add(device_id: str, depth: int) -> None:
        node = devices[device_id]
        d = device_dict(node)
        used = "-" if d["headroom_used"] is None else f"{100 * d['headroom_used']:.0f}%"
        table.add_row(
            "  " * depth + d["id"],
            *((d["device"],) if wide else ()),
            fmt(node.leakage_ma, 2),  # from the result itself: the document's figures are rounded already
            fmt(node.phasor_ma, 2),
            f"{fmt(node.budget_ma, 2)}/{fmt(node.shared.device.no_trip_ma, 2)}",
            used,
            f"[{STATUS_STYLE[d['status']]}]{d['status']}[/]",
            _short_probability(d["trip_probability_text"], d["trip_probability"], wide),
            _short_probability(d["trip_probability_switch_on_text"], d["trip_probability_switch_on"], wide),
        )
        for below in node.below:
            add(below, depth + 1)
        direct = [cid for cid in node.circuits if circuits[cid].circuit.protected_by == device_id]
        for cid in direct:
            c = circuits[cid]
            key = (c.circuit.device.key,) if wide else ()
            table.add_row("  " * (depth + 1) + cid, *key, fmt(c.leakage_ma, 2), fmt(c.phasor_ma, 2))
        inside = [x for x in result.devices if x.shared.circuit_id is not None and x.shared.circuit_id in direct]
        for x in inside:
            add(x.device_id, depth + 2)

    roots = [d.device_id for d in result.devices if d.shared.upstream_id is None and d.shared.circuit_id is None]
    for root in roots:
        add(root, 0)
    for x in result.devices:  # devices inside circuits that hang under no shared device
        if x.shared.circuit_id is not None and circuits[x.shared.circuit_id].circuit.protected_by is None:
            add(x.device_id, 0)
    out_console.print(table)
    for x in result.devices:
        if x.status.value in ("over-budget", "trip-risk", "marginal"):
            out_console.print(
                f"{x.device_id} is {x.status.value}: {fmt(x.gate_ma, 2)} mA from everything below it against its "
                f"{fmt(x.budget_ma, 2)} mA budget ({x.budget_source}); largest contributor {x.largest} "
                f"({x.largest_ma:.2f} mA).",
                highlight=False,
            )


def _judged_above(c: Any) -> bool:
    """The circuit has no device of its own: the shared device above it judges it (its status is that device's)."""
    return c.guarding_device is not None and c.protected_by is not None


def _budget_sources(result: Any) -> str:
    """Where the budgets come from: the Settings cell when the user set the fraction or what it is of, else what
    the devices' budgets cite (BS 7671 for an RCD, a modelling choice by analogy for a UL device), each once."""
    s = result.project.settings
    if "Budget fraction" in s.from_user or "Budget of" in s.from_user:
        return str(s.sources["Budget fraction" if "Budget fraction" in s.from_user else "Budget of"])
    own = [c.budget_source for c in result.circuits if c.guarding_device is None and c.circuit.device.protected]
    cited = dict.fromkeys(str(x) for x in [*own, *(d.budget_source for d in result.devices)] if x is not None)
    return "; ".join(cited) or str(s.sources["Budget fraction"])


def _counts(statuses: list[str]) -> str:
    """'11 ok, 2 marginal, 1 over-budget': how many of each status, in the order of severity."""
    order = ("ok", "marginal", "over-budget", "trip-risk", "unprotected")
    return ", ".join(f"{statuses.count(s)} {s}" for s in order if statuses.count(s))


def _written_lines(written: Any) -> None:
    if written is not None:
        out_console.print(
            f"Results written to {written.path} (sheets: {', '.join(written.replaced + written.added)}).",
            highlight=False,
        )
        if written.backup is not None:
            out_console.print(f"Previous version kept as {written.backup}.", highlight=False)


def render_check(job: Any, quiet: bool = False) -> None:
    from leakbudget.output.check import circuit_dict

    result = job.result
    project = result.project
    if quiet:
        devices = [d.status.value for d in result.devices]
        out_console.print(
            f"{project.path.name}: {len(result.circuits)} circuit(s) ({_counts([c.status.value for c in result.circuits]) or 'none'})"
            + (f", {len(devices)} shared device(s) ({_counts(devices)})" if devices else "")
            + f"; {'every one within its budget' if result.all_ok else 'not all within budget: see `leakbudget check` without --quiet'}.",
            highlight=False,
        )
        for line in project.warnings:
            err_console.print(f"[yellow]Warning:[/] {line}", highlight=False)
        _written_lines(job.written)
        caution()
        return
    gate = "phasor" if project.settings.sum_rule == "phasor" else "arithmetic"
    wide = out_console.width >= 110
    table = Table(
        title=f"Standing leakage per circuit (mA): {project.path.name}",
        title_justify="left",
        box=box.SIMPLE_HEAD,
        show_edge=False,
        pad_edge=False,
        padding=(0, 1, 0, 0),
    )
    table.add_column("Circuit", overflow="fold", min_width=6)
    levels = ("Budget", "No-trip") if wide else (BUDGET_PAIR,)
    for header in ("Device", "Sum", "Phasor", *levels, "Used", "Status", "P(trip)", "Switch-on" if wide else SWITCH_ON):
        table.add_column(header, justify="left" if header in ("Device", "Status") else "right", no_wrap=True)
    if wide:
        table.add_column("Largest contributor", overflow="fold")
    shown = _circuits_to_show(result.circuits)
    inside = {d.shared.circuit_id: d.device_id for d in result.devices if d.shared.circuit_id is not None}
    for c in shown:
        d = circuit_dict(c)  # its figures rounded for the JSON document; milliamperes shown from the result itself
        used = "-" if d["headroom_used"] is None else f"{100 * d['headroom_used']:.0f}%"
        levels = c.guarding_device or c.circuit.device
        budget, no_trip = fmt(c.budget_ma, 2), fmt(levels.no_trip_ma if d["no_trip_ma"] is not None else None, 2)
        own = d["device"] if c.circuit.device.protected or c.protected_by is None else f"↳{c.protected_by}"
        if own == "none" and c.circuit.circuit_id in inside:
            own = f"in:{inside[c.circuit.circuit_id]}"  # a device inside the circuit (a GFCI receptacle)
        cells = [
            d["circuit"],
            own,
            fmt(c.leakage_ma, 2),
            fmt(c.phasor_ma, 2),
            *((budget, no_trip) if wide else (f"{budget}/{no_trip}" if d["budget_ma"] is not None else "-",)),
            used,
            f"[{STATUS_STYLE[d['status']]}]{d['status']}[/]",
            _short_probability(d["trip_probability_text"], d["trip_probability"], wide),
            _short_probability(d["trip_probability_switch_on_text"], d["trip_probability_switch_on"], wide),
        ]
        if wide:
            cells.append(f"{d['largest_contributor']} ({fmt(c.largest_ma, 2)})" if d["largest_contributor"] else "-")
        table.add_row(*cells)
    out_console.print(table)
    if len(shown) < len(result.circuits):
        out_console.print(
            f"Showing {len(shown)} of {len(result.circuits):,} circuits: those using most of their budget; "
            "every circuit is in the 'Circuit results' sheet (and in --json).",
            highlight=False,
        )
    if any(c.guarding_device is not None for c in shown):
        out_console.print(
            "↳ no device of its own: the shared device named judges the circuit (budget, status, likelihood), and "
            "Used is the circuit's share of that device's budget.",
            highlight=False,
        )
    if result.devices:
        out_console.print()
        render_board(result, wide)
    out_console.print()
    s = project.settings
    out_console.print(
        f"Budget = {s.budget_fraction:g} × {s.budget_of} ({_budget_sources(result)}); gated by the {gate} sum; "
        f"catalogue basis: {s.basis}.",
        highlight=False,
    )
    if result.risk is not None and result.risk.method:
        out_console.print(
            f"Trip likelihood: {result.risk.method[0]} The model and its sources are written in full in the "
            "'Circuit results' sheet, the report and README 'How the likelihood is computed'.",
            highlight=False,
        )
    for r in result.loads:
        if r.measured_on:
            out_console.print(
                f"Identical unit: '{r.name}' takes the Leakage measured on {r.measured_on}: same appliance and model.",
                highlight=False,
            )
    render_readings(result)
    for line in project.defaults_used:
        out_console.print(f"Default used: {line}", highlight=False)
    for line in project.warnings:
        err_console.print(f"[yellow]Warning:[/] {line}", highlight=False)
    if result.unplaced:
        out_console.print(f"{len(result.unplaced)} load(s) have no circuit yet; `leakbudget split` can place them.")
    bad = [c for c in result.circuits if c.status in OVER]
    # A circuit with no device of its own takes the status of the shared device above it: say so, once per device.
    judged_above: dict[str, list[str]] = {}
    for c in bad[:TERMINAL_TABLE_ROWS]:
        if _judged_above(c):
            judged_above.setdefault(c.protected_by, []).append(c.circuit.circuit_id)
            continue
        out_console.print(
            f"{c.circuit.circuit_id} is {c.status.value}: largest contributor {c.largest} ({c.largest_ma:.2f} mA).",
            highlight=False,
        )
    by_device = {d.device_id: d for d in result.devices}
    for device_id, ids in judged_above.items():
        x = by_device[device_id]
        names = ids[0] if len(ids) == 1 else f"{', '.join(ids[:-1])} and {ids[-1]}"
        are, them, they_have, their = (
            ("is", "it", "it has", "its") if len(ids) == 1 else ("are", "them", "they have", "their")
        )
        out_console.print(
            f"{names} {are} {x.status.value} because {device_id} above {them} is: {they_have} no device of {their} "
            f"own, and {device_id} carries {fmt(x.gate_ma, 2)} mA against its {fmt(x.budget_ma, 2)} mA budget.",
            highlight=False,
        )
    if len(bad) > TERMINAL_TABLE_ROWS:
        out_console.print(
            f"… and {len(bad) - TERMINAL_TABLE_ROWS:,} more circuits over budget, each with its largest "
            "contributor in the 'Circuit results' sheet.",
            highlight=False,
        )
    from leakbudget.risk import likelihood_text

    marginal = [c for c in result.circuits if c.status.value == "marginal"]
    limit = float(project.settings["Switch-on limit"])
    if len(marginal) == 1:
        c = marginal[0]
        out_console.print(
            f"{c.circuit.circuit_id} is marginal: within its budget, but its switch-on trip likelihood "
            f"{likelihood_text(c.risk, switch_on=True)} is above the Switch-on limit of {100 * limit:g} %.",
            highlight=False,
        )
    elif marginal:
        highest = sorted(marginal, key=lambda c: -c.risk.switch_on)[:MARGINAL_LISTED]
        listed = "; ".join(f"{c.circuit.circuit_id} {likelihood_text(c.risk, switch_on=True)}" for c in highest)
        more = len(marginal) - len(highest)
        out_console.print(
            f"{len(marginal):,} circuits are marginal: within their budget, but their switch-on trip likelihood is "
            f"above the Switch-on limit of {100 * limit:g} %"
            + (f"; the highest: {listed}; {more:,} more in the 'Circuit results' sheet." if more else f": {listed}."),
            highlight=False,
        )
    for c in result.circuits:
        if c.dc_blinded:
            out_console.print(
                f"[bold red]{c.circuit.circuit_id}: {c.smooth_dc_ma:.1f} mA of smooth DC leakage under a Type "
                f"{c.circuit.rcd_type} RCD, more than it operates with (BS 7671:2018 reg. 531.3.3 notes): it may "
                "not trip on a fault.[/] Fit a Type B device, or a DC-detecting device (IEC 62955) ahead of it.",
                highlight=False,
            )
    if not result.circuits:
        out_console.print("The Circuits sheet has no circuits yet: add one row per circuit.")
    elif bad:
        shared = [d.device_id for d in result.devices if d.status in OVER]
        board = (
            f" Move circuits from {' and '.join(shared)} to another device of the board, or give the largest a "
            "device of its own (an RCBO); `leakbudget split` plans the board."
            if shared
            else ""
        )
        if all(map(_judged_above, bad)):
            out_console.print(  # every one through its shared device: splitting a circuit's loads changes nothing
                f"[bold]{len(bad)} circuit(s) over budget, through {' and '.join(shared)}.[/]{board} Measure the "
                "largest contributors, and repair appliances that leak far above their typical value; never remove "
                "or up-rate protection."
            )
        else:
            out_console.print(
                f"[bold]{len(bad)} circuit(s) over budget.[/]{board} Split loads across circuits (`leakbudget "
                "split`), measure the largest contributors, and repair appliances that leak far above their typical "
                "value; never remove or up-rate protection."
            )
    elif marginal:
        out_console.print(
            f"Every protected circuit is within its budget, but {len(marginal)} "
            f"{'is' if len(marginal) == 1 else 'are'} marginal (likely to trip when "
            f"cold heating elements switch on): measure {'it' if len(marginal) == 1 else 'them'}, or give the heating "
            "loads circuits of their own."
        )
    else:
        out_console.print("Every protected circuit is within its budget.")
    _written_lines(job.written)
    caution()


SEVERITY_STYLE = {"error": "bold red", "warning": "yellow", "info": "cyan"}
# Findings the terminal lists at most, the most severe first (printing one takes about 0.3 ms; a campus review has
# tens of thousands). Every finding is in the 'Review findings' sheet, in --json and in the report.
TERMINAL_FINDINGS = 40


def render_review(job: Any, quiet: bool = False) -> None:
    from leakbudget.compliance.rules import Severity

    rv = job.review
    project = rv.check.project
    if quiet:
        out_console.print(
            f"Review of {project.path.name} against {rv.label}: {rv.count(Severity.ERROR)} error(s), "
            f"{rv.count(Severity.WARNING)} warning(s), {rv.count(Severity.INFO)} info.",
            highlight=False,
        )
        report_written(job.written, f"Findings written to {{path}} (sheet '{REVIEW_FINDINGS}').")
        caution()
        return
    out_console.print(f"Review of {project.path.name} against {rv.label}.", highlight=False)
    out_console.print(f"Code: {rv.code_source}.", highlight=False)
    shown = rv.findings[:TERMINAL_FINDINGS]  # the review sorts them most severe first, then in circuit order
    for f in shown:
        where = " / ".join(x for x in (f.circuit, f.load) if x)
        out_console.print(
            f"\n[{SEVERITY_STYLE[f.severity.value]}]{f.severity.value}[/] {f.rule}{' · ' + where if where else ''}",
            highlight=False,
        )
        out_console.print(Padding(f"{f.message}\n[dim]Source: {f.source}[/dim]", (0, 0, 0, 2)), highlight=False)
    out_console.print()
    counts = {s: rv.count(s) for s in Severity}
    out_console.print(
        f"{counts[Severity.ERROR]} error(s), {counts[Severity.WARNING]} warning(s), {counts[Severity.INFO]} info.",
        highlight=False,
    )
    if len(shown) < len(rv.findings):
        hidden = {s: sum(f.severity is s for f in rv.findings[len(shown) :]) for s in Severity}
        words = {Severity.ERROR: "error(s)", Severity.WARNING: "warning(s)", Severity.INFO: "info"}
        more = ", ".join(f"{n:,} {words[s]}" for s, n in hidden.items() if n)
        sheet = f"the '{REVIEW_FINDINGS}' sheet, " if job.written is not None else ""
        out_console.print(
            f"Showing {len(shown)} of {len(rv.findings):,} findings, the most severe first; not shown: {more}. "
            f"Every finding is in {sheet}--json and the report (`leakbudget report`).",
            highlight=False,
        )
    if rv.check.unplaced:
        out_console.print(
            f"{len(rv.check.unplaced)} load(s) have no circuit yet; their circuit rules apply once they are placed.",
            highlight=False,
        )
    for line in project.warnings:
        err_console.print(f"[yellow]Warning:[/] {line}", highlight=False)
    report_written(job.written, f"Findings written to {{path}} (sheet '{REVIEW_FINDINGS}').")
    caution()


def render_split(job: Any, quiet: bool = False) -> None:
    from leakbudget.output.split import circuits_list, likelihood_line, summary

    plan = job.plan
    project = plan.before.project
    out_console.print(f"Split plan for {project.path.name}: {summary(plan)}", highlight=False)
    if quiet:
        if plan.blockers:
            out_console.print(f"{len(plan.blockers)} problem(s) no plan can fix; see them without --quiet.")
        if plan.current_warnings:
            out_console.print(f"Current warnings on {', '.join(plan.current_warnings)}.", highlight=False)
        report_written(job.written, f"Plan written to {{path}} (sheet '{SPLIT_PLAN}').")
        caution()
        return
    changed = [a for a in plan.assignments if a.moved or a.placed]
    if changed:
        moves = Table(title="Moves", title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False, padding=(0, 1, 0, 0))
        moves.add_column("Load", overflow="fold")
        for header in ("From", "To", "mA", "A"):
            moves.add_column(header, justify="right" if header in ("mA", "A") else "left", no_wrap=True)
        for a in changed:
            moves.add_row(
                a.load.name, a.from_id or "(unplaced)", a.to_id or "-", fmt(a.leakage_ma, 2), fmt(a.current_a, 1)
            )
        out_console.print(moves)
    if plan.board is not None and plan.board.circuit_moves:
        title = "Circuit moves between shared devices (board plan)"
        board = Table(
            title=title,
            title_justify="left",
            box=box.SIMPLE_HEAD,
            pad_edge=False,
            padding=(0, 1, 0, 0),
            min_width=len(title),  # the title on one line, however narrow the columns
        )
        for header in ("Circuit", "From", "To"):
            board.add_column(header, overflow="fold")
        for m in plan.board.moves:
            if m.moved:
                to = f"an RCBO of its own ({m.own_device})" if m.own_device else (m.to_id or "-")
                board.add_row(m.circuit, m.from_id or "-", to)
        out_console.print(board)
        before = {d.device_id: d for d in plan.before.devices}
        for d in plan.after.devices:
            if d.shared.circuit_id is None and d.device_id in before:
                b = before[d.device_id]
                out_console.print(
                    f"{d.device_id}: {fmt(b.gate_ma, 2)} → {fmt(d.gate_ma, 2)} mA of its {fmt(d.budget_ma, 2)} mA "
                    f"budget, {b.status.value} → {d.status.value}.",
                    highlight=False,
                )
    table = Table(
        title="Circuits before → after", title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False, padding=(0, 1, 0, 0)
    )
    table.add_column("Circuit", overflow="fold", min_width=6)
    for header in ("Loads", "Sum mA", "Used", "Current A", "Status"):
        table.add_column(header, justify="left" if header == "Status" else "right", no_wrap=header != "Status")
    for d in circuits_list(plan):
        if not d["new"] and d["before_load_count"] == d["load_count"] and d["before_leakage_ma"] == d["leakage_ma"]:
            loads = str(d["load_count"])
            total = fmt(d["leakage_ma"], 2)
        else:
            loads = f"{'-' if d['new'] else d['before_load_count']}→{d['load_count']}"
            total = f"{'-' if d['new'] else fmt(d['before_leakage_ma'], 2)}→{fmt(d['leakage_ma'], 2)}"
        used = "-" if d["headroom_used"] is None else f"{100 * d['headroom_used']:.0f}%"
        limit = "" if d["current_limit_a"] is None else f"/{d['current_limit_a']:.0f}"
        status = f"[{STATUS_STYLE[d['status']]}]{d['status']}[/]"
        if d["before_status"] not in (None, d["status"]):
            status = f"{d['before_status']}→{status}"
        current = f"{fmt(d['current_a'], 1)}{limit}"
        if d["current_warnings"]:
            style = "bold red" if plan.current_rule.strict else "yellow"
            current = f"[{style}]{current}[/]"
            status += f", [{style}]current[/]"
        table.add_row(d["circuit"] + (" (new)" if d["new"] else ""), loads, total, used, current, status)
    out_console.print(table)
    for n in plan.new_circuits:
        rating = f"{n.circuit.rating_a:g} A" if n.circuit.rating_a else "no rating"
        out_console.print(
            f"{n.circuit.circuit_id} serves {', '.join(n.circuit.rooms) or 'any room'}: "
            f"{n.circuit.device.key}, {rating}, {n.template}.",
            highlight=False,
        )
    gate = "phasor" if project.settings.sum_rule == "phasor" else "arithmetic"
    out_console.print(
        f"Limits: budget = {project.settings.budget_fraction:g} × {project.settings.budget_of} on the arithmetic sum "
        f"(check gates on the {gate} sum). {plan.current_rule.describe()}",
        highlight=False,
    )
    for texts in plan.current_warnings.values():
        for text in texts:
            label = "[bold red]Current:[/]" if plan.current_rule.strict else "[yellow]Current (warning):[/]"
            out_console.print(f"{label} {text}.", highlight=False)
    if plan.likelihood_cap is not None:
        out_console.print(f"Trip likelihood: {likelihood_line(plan)}", highlight=False)
    for b in plan.blockers:
        out_console.print(f"[bold red]Cannot fix:[/] {b.message}.", highlight=False)
    for line in plan.notes:
        out_console.print(f"Note: {line}", highlight=False)
    for line in project.warnings:
        err_console.print(f"[yellow]Warning:[/] {line}", highlight=False)
    if plan.blockers:
        out_console.print(
            f"[bold]No plan meets every limit.[/] The plan above fixes everything else; the "
            f"{len(plan.blockers)} problem(s) named need your decision."
        )
    report_written(
        job.written,
        f"Plan written to {{path}} (sheet '{SPLIT_PLAN}'); the Loads sheet is unchanged: "
        "move the loads there yourself, then check again.",
    )
    caution()


def render_applied(job: Any, quiet: bool = False) -> None:
    """``split --apply``: the plan in one line, the rows written into the copy, the check of the copy, and that the
    source was not changed."""
    from leakbudget.output.split import summary

    plan, applied = job.plan, job.applied
    cells, result = applied.cells, applied.check.result
    name = applied.path.name
    out_console.print(f"Split plan for {applied.source.name}: {summary(plan)}", highlight=False)
    if quiet:
        render_check(applied.check, quiet=True)
        out_console.print(f"{applied.source.name} was not changed: --apply writes only the new file.", highlight=False)
        return
    changed = [a for a in plan.assignments if a.load.row in cells.load_cells]
    if changed:
        column = cells.load_cells[changed[0].load.row].column
        out_console.print(f"Written into {name}, sheet '{cells.loads_sheet}', column '{column}':", highlight=False)
        rows = Table(box=box.SIMPLE_HEAD, pad_edge=False, padding=(0, 1, 0, 0))
        for header in ("Row", "Cell", "Load", "Circuit"):
            rows.add_column(header, justify="right" if header == "Row" else "left", overflow="fold")
        for a in changed:
            cell = cells.load_cells[a.load.row]
            rows.add_row(str(a.load.row), cell.cell, a.load.name, f"{a.from_id or '(unplaced)'} → {a.to_id or '-'}")
        out_console.print(rows)
    else:
        out_console.print(f"No load moves: the Loads sheet of {name} is as in {applied.source.name}.", highlight=False)
    new = {n.circuit.circuit_id: n for n in plan.new_circuits}
    for cid, row in cells.new_circuit_rows.items():
        template = f", {new[cid].template}" if cid in new else ""
        out_console.print(
            f"{cid} appended to sheet '{cells.circuits_sheet}' as row {row}{template}; its Note marks it proposed.",
            highlight=False,
        )
    for m in plan.board.moves if plan.board is not None else []:
        written = cells.updated_cells.get(m.circuit)
        if written:
            to = f"an RCBO of its own ({m.own_device})" if m.own_device else (m.to_id or "-")
            what = ", ".join(f"{c.column} {c.value or '(blank)'} in {c.cell}" for c in written)
            out_console.print(
                f"{m.circuit} moves from {m.from_id or '-'} to {to} (board plan): sheet '{cells.circuits_sheet}', "
                f"row {written[0].row}, {what}.",
                highlight=False,
            )
    for cell in cells.added_columns:
        out_console.print(f"Column '{cell.value}' added to sheet '{cell.sheet}' (cell {cell.cell}).", highlight=False)
    for b in plan.blockers:
        out_console.print(f"[bold red]Cannot fix:[/] {b.message}.", highlight=False)
    if plan.blockers:
        out_console.print(
            "[bold]The plan does not meet every limit.[/] The copy holds the changes it could make; its check "
            "below shows what is left for your decision."
        )
    table = Table(
        title=f"Check of {name}", title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False, padding=(0, 1, 0, 0)
    )
    table.add_column("Circuit", overflow="fold", min_width=6)
    for header in ("Loads", "Sum mA", "Budget", "Used", "Status"):
        table.add_column(header, justify="left" if header == "Status" else "right", no_wrap=header != "Status")
    from leakbudget.output.check import circuit_dict

    shown = _circuits_to_show(result.circuits)
    for c in shown:
        d = circuit_dict(c)
        used = "-" if d["headroom_used"] is None else f"{100 * d['headroom_used']:.0f}%"
        status = f"[{STATUS_STYLE[d['status']]}]{d['status']}[/]"
        cid = d["circuit"] + (" (new)" if d["circuit"] in new else "")
        table.add_row(cid, str(d["load_count"]), fmt(d["leakage_ma"], 2), fmt(d["budget_ma"], 2), used, status)
    out_console.print(table)
    if len(shown) < len(result.circuits):
        out_console.print(
            f"Showing {len(shown)} of {len(result.circuits):,} circuits; every circuit is in its 'Circuit results' "
            "sheet.",
            highlight=False,
        )
    for d in result.devices:
        if d.shared.circuit_id is None:
            out_console.print(
                f"{d.device_id}: {fmt(d.gate_ma, 2)} mA of its {fmt(d.budget_ma, 2)} mA budget, {d.status.value}.",
                highlight=False,
            )
    for line in result.project.warnings:
        err_console.print(f"[yellow]Warning:[/] {line}", highlight=False)
    bad = [c.circuit.circuit_id for c in result.circuits if c.status in OVER]
    bad += [d.device_id for d in result.devices if d.status in OVER]
    marginal = [c.circuit.circuit_id for c in result.circuits if c.status.value == "marginal"]
    marginal += [d.device_id for d in result.devices if d.status.value == "marginal"]
    if applied.all_ok:
        verdict = "every protected circuit and shared device is within its budget"
    else:
        parts = [f"{len(bad)} over budget ({', '.join(bad)})"] if bad else []
        parts += [f"{len(marginal)} marginal ({', '.join(marginal)})"] if marginal else []
        verdict = " and ".join(parts) + f"; `leakbudget check {name}` shows why"
        if marginal:
            verdict += " (marginal: within budget, but its switch-on trip likelihood is above the Switch-on limit)"
    out_console.print(f"Check of {name}: {verdict}.", highlight=False)
    written = applied.check.written
    if written is not None:
        out_console.print(
            f"Results written to {written.path} (sheets: {', '.join(written.replaced + written.added)}).",
            highlight=False,
        )
    out_console.print(
        f"{applied.source.name} was not changed: --apply writes only the new file, no result sheets either.",
        highlight=False,
    )


def _workbooks_to_show(results: list[Any]) -> list[Any]:
    """All workbooks when they fit the terminal table, else the ``TERMINAL_TABLE_ROWS`` in most need of a look
    (not checked, then a problem found, then the highest share used), in the order found."""
    if len(results) <= TERMINAL_TABLE_ROWS:
        return results

    def rank(i: int) -> tuple[int, float]:
        share = results[i].summary.get("highest_share_used")
        return -results[i].exit_code, -(share if share is not None else -1.0)

    return [results[i] for i in sorted(sorted(range(len(results)), key=rank)[:TERMINAL_TABLE_ROWS])]


def _common_folder(shown: list[str]) -> tuple[str, Any]:
    """The folder every workbook shown is in (said once, in the title), and how to name a workbook inside it."""
    import os
    from pathlib import Path

    try:
        common = os.path.commonpath([str(Path(w).parent) for w in shown])
    except ValueError:  # absolute and relative paths mixed, or different drives
        common = ""
    if common in ("", "."):
        return "", lambda w: w
    return common, lambda w: os.path.relpath(w, common)


def render_portfolio(portfolio: Any, out_dir: Any, written: bool) -> None:
    """A portfolio's summary: one row per workbook, the sentence of each that could not be checked, the counts,
    where the results went."""
    results = portfolio.results
    review = portfolio.command == "review"
    if portfolio.cluster is not None:
        how = f"on the Dask cluster at {portfolio.cluster} ({portfolio.workers} workers)"
    else:
        how = f"with {portfolio.workers} worker process{'es' if portfolio.workers != 1 else ''}"
    folder, name = _common_folder([r.workbook for r in results])
    where = f" in {folder}" if folder else ""
    table = Table(
        title=f"Portfolio: {len(results):,} workbook(s){where} {'reviewed' if review else 'checked'} {how}",
        title_justify="left",
        box=box.SIMPLE_HEAD,
        pad_edge=False,
        padding=(0, 1, 0, 0),
    )
    table.add_column("Workbook", overflow="fold", min_width=12)
    at = not review and out_console.width >= 100  # which circuit or device used most: on a wide terminal
    headers = ["Circuits", "Devices", "Worst", "Over", "Used"] + (["Errors"] if review else [])
    headers += ["At"] if at else []
    for header in headers:
        table.add_column(header, justify="left" if header in ("Worst", "At") else "right", no_wrap=True)
    shown = _workbooks_to_show(results)
    for r in shown:
        s = r.summary
        if r.error is not None:
            table.add_row(name(r.workbook), "-", "-", "[bold red]not checked[/]", *["-"] * (len(headers) - 3))
            continue
        worst = s["worst_status"]
        share = s["highest_share_used"]
        cells = [
            name(r.workbook),
            f"{s['circuits']:,}",
            f"{s['shared_devices']:,}",
            f"[{STATUS_STYLE[worst]}]{worst}[/]" if worst else "-",
            f"{s['over_budget']:,}",
            f"{100 * share:.0f}%" if share is not None else "-",
        ]
        if review:
            cells.append(f"{s['error_findings']:,}")
        if at:
            cells.append(s["highest_share_at"] or "-")
        table.add_row(*cells)
    out_console.print(table)
    out_console.print(
        "Devices: shared devices (Protection sheet). Worst: the worst status of any circuit or shared device; Over: "
        "how many are over budget; Used: the highest share of a budget used"
        + (", At: by which" if at else "")
        + ("; Errors: error findings of the review (warnings too in --json and --summary)." if review else "."),
        highlight=False,
    )
    if len(shown) < len(results):
        out_console.print(
            f"Showing {len(shown)} of {len(results):,} workbooks: those in most need of a look; every workbook is in "
            "--summary (and in --json).",
            highlight=False,
        )
    for r in portfolio.errors[:TERMINAL_TABLE_ROWS]:
        out_console.print(f"[bold red]Error:[/] {r.error}", highlight=False)
    if len(portfolio.errors) > TERMINAL_TABLE_ROWS:
        out_console.print(f"… and {len(portfolio.errors) - TERMINAL_TABLE_ROWS:,} more not checked.", highlight=False)
    warned = [r for r in results if r.summary.get("warnings")]
    for r in warned[:TERMINAL_TABLE_ROWS]:
        err_console.print(f"[yellow]Warning:[/] {r.workbook}: {r.summary['warnings']}", highlight=False)
    if len(warned) > TERMINAL_TABLE_ROWS:
        err_console.print(f"… and warnings on {len(warned) - TERMINAL_TABLE_ROWS:,} more workbooks.", highlight=False)
    counts = [sum(r.exit_code == code for r in results) for code in (0, 1, 2)]
    fine, problem = ("without error findings", "with error findings") if review else ("within budget", "not")
    out_console.print(
        f"[bold]{len(results):,} workbook(s): {counts[0]:,} {fine}, {counts[1]:,} {problem}, {counts[2]:,} could not "
        "be checked.[/]",
        highlight=False,
    )
    if counts[1]:
        nxt = "leakbudget review WORKBOOK" if review else "leakbudget check WORKBOOK"
        out_console.print(
            f"`{nxt}` shows one of them in full; `leakbudget split WORKBOOK` plans the changes."
            if not review
            else f"`{nxt}` shows one of them with every finding.",
            highlight=False,
        )
    checked = len(results) - counts[2]
    sheets = f"'{REVIEW_FINDINGS}'" if review else "result sheets"
    if written and out_dir is not None and checked:
        out_console.print(f"Copies with the {sheets} written to {out_dir}.", highlight=False)
    elif written and checked:
        out_console.print(
            f"The {sheets} written into each workbook checked (previous versions kept beside them, "
            "*.before-leakbudget.xlsx).",
            highlight=False,
        )
    if portfolio.summary_written is not None:
        out_console.print(f"Summary written to {portfolio.summary_written}.", highlight=False)
    caution()
