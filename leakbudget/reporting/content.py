"""The content of the hand-over report: sections of facts, tables, charts and text, independent of the format.

:func:`build_report` turns a check result (and, when given, the review findings and a split plan) into a
:class:`Report`; :mod:`leakbudget.reporting.html` and :mod:`leakbudget.reporting.pdf` lay it out. Every number is taken
from :func:`leakbudget.output.check.to_json`, the document ``check --json`` prints, so the report and the check agree
to the digit; every value carries its provenance kind (published, measured, computed, typical from memory, common
practice, user setting, default) and its source text.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable, Mapping, Sequence
from typing import Any, Protocol

from leakbudget.about import CAUTION, __version__
from leakbudget.checking import CheckResult
from leakbudget.estimate import COMPUTED, MEASURED, LoadResult
from leakbudget.provenance import Kind, Source
from leakbudget.reporting.document import Block, Cell, Facts, Figure, Paragraph, Report, Section, Table
from leakbudget.settings import JOB_SETTINGS

# Why personnel protection trips at a few milliamperes: IEC 60479-1 effects of current on people.
PEOPLE_NOTE = (
    "Why the levels are low: a person perceives about 0.5 mA and may be unable to let go from about 10 mA; "
    "fibrillation becomes possible from about 50 mA for more than a second (IEC 60479-1). Personnel protection "
    "therefore trips at 4-6 mA (UL 943 Class A) or 30 mA (IEC 61008-1 / IEC 61009-1 additional protection)."
)
METHOD_NOTES = (
    "Each load's standing leakage is taken, in this order, from a measured or datasheet value in the workbook; "
    "else computed from its line-to-earth capacitance and insulation resistance (I = 2πfCV, I = V/R); else the "
    "appliance catalogue's typical or upper value, rescaled from the catalogue's reference supply to the "
    "circuit's (capacitive part with V·f, resistive part with V). Values are multiplied by the quantity.",
    "Each circuit's cable run adds its own computed line: the cable's capacitance of one line conductor to earth "
    "per metre × length, I = 2πfCV, for every line conductor.",
    "Per circuit the report gives the arithmetic sum (the conservative figure) and the phasor sum (leakage on "
    "opposite legs of a split-phase circuit, or on the three phases of a three-phase circuit, partly cancels). "
    "The Sum setting says which one is compared with the budget.",
    "Budget = budget fraction × the device's trip level. BS 7671:2018 reg. 531.3.2 limits the protective "
    "conductor current in normal service to 30 % of IΔn; for UL 943 devices the same fraction is applied by "
    "analogy (common practice). Status: ok (within budget), over-budget (above budget, below the no-trip "
    "level), trip-risk (at or above the no-trip level: nuisance trips likely), unprotected (no ground-fault "
    "device; no budget applies).",
)
SEVERITY_ORDER = ("error", "warning", "info")
OVERVIEW_ROWS = 28  # circuits per overview chart: 0.9 in + 0.3 in each stays within an A4 page


# ---- inputs from the review and the split planner ---------------------------------------------------------------


class FindingLike(Protocol):
    """What the report reads from a review finding (``leakbudget.compliance.rules``); read-only, as the frozen
    Finding's fields are."""

    @property
    def severity(self) -> Any: ...
    @property
    def rule(self) -> str: ...
    @property
    def source(self) -> Any: ...
    @property
    def circuit(self) -> str | None: ...
    @property
    def load(self) -> str | None: ...
    @property
    def message(self) -> str: ...


# ---- helpers ---------------------------------------------------------------------------------------------------


def _ma(value: float | None, key: str | None = None, **kw: Any) -> Cell:
    """A current [mA] shown with three decimals (the JSON keeps four)."""
    return Cell("-" if value is None else f"{value:.3f}", key, value, **kw)


def _share(value: float | None, key: str | None = None) -> Cell:
    return Cell("-" if value is None else f"{100 * value:.0f} %", key, value)


def _text(value: object) -> str:
    if value is None:
        return "-"
    if isinstance(value, float):
        return f"{value:g}"
    return str(value)


def _word(value: object) -> str:
    """An enum's value or the text itself (findings may carry a severity enum or a string)."""
    return str(getattr(value, "value", value))


def _anchor(text: str, used: set[str]) -> str:
    """A section id from free text: no white space (HTML ids cannot hold it), unique among ``used``."""
    base = "_".join(text.split())
    anchor, n = base, 1
    while anchor.lower() in used:
        n += 1
        anchor = f"{base}-{n}"
    used.add(anchor.lower())
    return anchor


def load_kind(r: LoadResult, basis: str) -> Kind:
    """Provenance kind of one load estimate: measured, computed, or the catalogue row's own kind.

    ``basis`` is the catalogue basis the check used (``typical`` or ``upper``, the Basis setting).
    """
    if r.basis == MEASURED:
        return Kind.MEASURED
    if r.basis == COMPUTED or r.appliance is None:
        return Kind.COMPUTED
    src: Source = r.appliance.upper_source if basis == "upper" else r.appliance.typical_source
    return src.kind


def _sourced(value: float | None, key: str, source: Source | None) -> Cell:
    return _ma(value, key, kind=source.kind.value if source else None, note=str(source) if source else None)


# ---- sections --------------------------------------------------------------------------------------------------


SUMMARY_LIST_ITEMS = 8  # changes named one by one in the summary; the rest are counted, with where they are


def _name(x: Mapping[str, Any]) -> str:
    """A shared device's id or a circuit's, from their JSON documents."""
    return str(x["id"] if "id" in x else x["circuit"])


def _used(value: float | None) -> str:
    return "-" if value is None else f"{100 * value:.0f} %"


def _summary_section(
    doc: Mapping[str, Any],
    findings: Sequence[FindingLike] | None,
    plan: Mapping[str, Any] | None,
    detailed: Sequence[str],
    all_circuits: bool,
) -> Section:
    """The page a client or inspector reads first: every protected circuit and shared device with its status and
    share of budget used, what must change before installation, and the caution."""
    protected = [c for c in doc["circuits"] if c["status"] != "unprotected"]
    blocks: list[Block] = []
    if protected:
        blocks.append(
            Table(
                ("Circuit", "Device", "Sum (mA)", "Budget (mA)", "Used", "Status", "Largest contributor"),
                [
                    [
                        Cell(c["circuit"], tone=c["status"]),
                        Cell(f"behind {c['protected_by']}" if c.get("protected_by") else c["device_label"]),
                        _ma(c["gate_ma"], "gate_ma"),
                        _ma(c["budget_ma"], "budget_ma"),
                        _share(c["headroom_used"], "headroom_used"),
                        Cell(c["status"], tone=c["status"]),
                        Cell(
                            f"{c['largest_contributor']} {c['largest_contributor_ma']:.3f} mA"
                            if c["largest_contributor"]
                            else "-"
                        ),
                    ]
                    for c in protected
                ],
                "Every protected circuit: the sum compared with its budget",
                "summary-circuits",
                (0.9, 1.5, 0.7, 0.8, 0.6, 0.9, 1.8),
            )
        )
    if doc["devices"]:
        blocks.append(
            Table(
                ("Shared device", "Device", "Circuits below", "Sum (mA)", "Budget (mA)", "Used", "Status"),
                [
                    [
                        Cell(d["id"], tone=d["status"]),
                        Cell(d["device_label"]),
                        Cell(", ".join(d["circuits"]) or "-"),
                        _ma(d["gate_ma"], "gate_ma"),
                        _ma(d["budget_ma"], "budget_ma"),
                        _share(d["headroom_used"], "headroom_used"),
                        Cell(d["status"], tone=d["status"]),
                    ]
                    for d in doc["devices"]
                ],
                "Every shared device: everything below it against its budget",
                "summary-devices",
                (0.9, 1.2, 1.6, 0.7, 0.8, 0.6, 0.9),
            )
        )
    unprotected = [c["circuit"] for c in doc["circuits"] if c["status"] == "unprotected"]
    if unprotected:
        blocks.append(Paragraph(f"No ground-fault protection (no budget applies): {', '.join(unprotected)}.", "muted"))
    blocks.append(Paragraph("Before installation", "heading"))
    blocks.extend(_changes(doc, findings, plan))
    blocks.append(Paragraph(f"Caution: {CAUTION}", "caution"))
    if all_circuits:
        scope = "Every circuit has a detail page (chart and load table) below."
    elif detailed:
        scope = (
            f"Detail pages (chart and load table) follow for the {len(detailed)} circuit(s) and device(s) that are "
            f"not ok: {', '.join(detailed)}. `leakbudget report --all-circuits` adds one for every circuit."
        )
    else:
        scope = "Every circuit is ok, so no detail pages follow; `leakbudget report --all-circuits` adds them."
    blocks.append(Paragraph(scope, "muted"))
    return Section("summary", "Summary", blocks)


def _changes(
    doc: Mapping[str, Any], findings: Sequence[FindingLike] | None, plan: Mapping[str, Any] | None
) -> list[Paragraph]:
    """What must change before installation, most pressing first: circuits and devices over budget, marginal
    ones, review errors, and the split plan's moves when the report has one."""
    items: list[Paragraph] = []
    over = [x for x in (*doc["devices"], *doc["circuits"]) if x["status"] in ("trip-risk", "over-budget")]
    # a circuit within its own budget is over only through the shared device above it: the device's line names it
    over = [x for x in over if not (x.get("protected_by") and (x["headroom_used"] or 0.0) <= 1.0)]
    over.sort(key=lambda x: (x["status"] != "trip-risk", -(x["headroom_used"] or 0.0)))
    for x in over[:SUMMARY_LIST_ITEMS]:
        level = "at or above its no-trip level" if x["status"] == "trip-risk" else "over budget"
        below = f" Circuits below it: {', '.join(x['circuits'])}." if x.get("circuits") else ""
        items.append(
            Paragraph(
                f"{_name(x)}: {x['gate_ma']:.3f} mA against a {x['budget_ma']:.3f} mA budget "
                f"({_used(x['headroom_used'])}), {level}; largest contributor {x['largest_contributor']} "
                f"{x['largest_contributor_ma']:.3f} mA.{below}",
                x["status"],
            )
        )
    if len(over) > SUMMARY_LIST_ITEMS:
        items.append(
            Paragraph(
                f"… and {len(over) - SUMMARY_LIST_ITEMS} more over budget: see the tables above and 'Circuits'.",
                "over-budget",
            )
        )
    if over:
        board = (
            " For a shared device, move circuits to another device of the board, or give the largest a device of "
            "its own (an RCBO); `leakbudget split` plans the board."
            if any(x.get("circuits") for x in over)
            else ""
        )
        items.append(
            Paragraph(
                "Cure: split loads across circuits, measure the largest contributors, and repair an appliance that "
                f"leaks far above its typical value; never remove or up-rate protection.{board}"
            )
        )
    marginal = [_name(x) for x in (*doc["devices"], *doc["circuits"]) if x["status"] == "marginal"]
    if marginal:
        items.append(
            Paragraph(
                f"Marginal (within budget, likely to trip when cold heating elements switch on): "
                f"{', '.join(marginal)}. Measure them, or give the heating loads circuits of their own.",
                "marginal",
            )
        )
    errors = [f for f in findings or () if _word(f.severity) == "error"]
    for f in errors[:SUMMARY_LIST_ITEMS]:
        where = " / ".join(x for x in (f.circuit, f.load) if x)
        items.append(Paragraph(f"Review error{' on ' + where if where else ''}: {f.message}", "error"))
    if len(errors) > SUMMARY_LIST_ITEMS:
        items.append(
            Paragraph(f"… and {len(errors) - SUMMARY_LIST_ITEMS} more review errors: see 'Review findings'.", "error")
        )
    if plan is not None and over:
        moves = [
            f"{a['load']} {'from ' + a['from'] + ' ' if a.get('from') else ''}to {a['to'] or 'no circuit'}"
            for a in plan.get("assignments", [])
            if a.get("moved") or a.get("placed")
        ]
        moves += [
            f"circuit {m['circuit']} from {m['from']} to "
            + (f"a device of its own ({m['own_device']})" if m.get("own_device") else str(m["to"]))
            for m in plan.get("circuit_assignments", [])
            if m.get("moved")
        ]
        named = "; ".join(moves[:SUMMARY_LIST_ITEMS])
        more = f"; and {len(moves) - SUMMARY_LIST_ITEMS} more" if len(moves) > SUMMARY_LIST_ITEMS else ""
        items.append(
            Paragraph(
                f"The split plan ({plan.get('new_circuits', 0)} new circuit(s)): {named}{more}. "
                "Details under 'Split plan'."
                if moves
                else "The split plan moves nothing: see 'Split plan'."
            )
        )
    if not items:
        items.append(
            Paragraph("Nothing must change: every protected circuit and shared device is within its budget.", "ok")
        )
    return items


def _job_section(result: CheckResult, doc: Mapping[str, Any], generated: str) -> Section:
    settings = result.project.settings
    project = result.project
    items: list[tuple[str, Cell]] = []
    for name in JOB_SETTINGS:
        if settings.values.get(name):
            items.append((name, Cell(str(settings.values[name]))))
    protected = [c for c in project.circuits if c.device.protected]
    placed = [r for r in result.loads if r.load is not None and r.circuit_id is not None]
    items += [
        ("Workbook", Cell(project.path.name)),
        ("Checked with", Cell(str(doc["tool"]))),
        ("Date", Cell(generated)),
        ("Circuits", Cell(f"{len(project.circuits)} ({len(protected)} with ground-fault protection)")),
        ("Loads", Cell(f"{len(project.loads)} ({len(placed)} on a circuit, {len(result.unplaced)} not yet placed)")),
    ]
    scope = (
        "Scope: the standing (normal-service) earth leakage of every load listed in the workbook, summed per "
        "circuit and compared with a budget set by each circuit's protective device. Not in scope: fault "
        "currents, disconnection times, touch voltages, earthing, circuits or loads missing from the workbook, "
        "and anything a measurement on site would show. Compliance with the code in force is for the "
        "designer and the inspector to decide."
    )
    return Section("job", "Job and scope", [Facts(items), Paragraph(scope)])


def _caution_section(result: CheckResult, doc: Mapping[str, Any]) -> Section:
    blocks: list[Block] = [Paragraph(f"Caution: {CAUTION}", "caution"), Paragraph(PEOPLE_NOTE)]
    loads = [r for r in result.loads if r.load is not None]
    memory = [r for r in loads if load_kind(r, doc["basis"]) is Kind.FROM_MEMORY]
    if memory:
        blocks.append(
            Paragraph(
                f"{len(memory)} of {len(loads)} load values are typical catalogue values from memory, not published "
                "or measured figures: measure the largest of them with a leakage clamp before relying on the result."
            )
        )
    bad = [c["circuit"] for c in doc["circuits"] if c["status"] in ("over-budget", "trip-risk")]
    if bad:
        blocks.append(
            Paragraph(
                f"Over budget: {', '.join(bad)}. Cure this by splitting loads across circuits, measuring the largest "
                "contributors, and repairing appliances that leak far above their typical value; never by removing "
                "or up-rating protection.",
                "over-budget",
            )
        )
    marginal = [c["circuit"] for c in doc["circuits"] if c["status"] == "marginal"]
    if marginal:
        blocks.append(
            Paragraph(
                f"Marginal: {', '.join(marginal)}: within budget, but likely to trip when cold heating elements are "
                "switched on (switch-on likelihood above the Switch-on limit setting). Measure them, or give the "
                "heating loads circuits of their own; never remove or up-rate protection.",
                "marginal",
            )
        )
    for d in doc.get("readings") or ():
        if d["flag"] != "consistent":
            blocks.append(
                Paragraph(
                    f"Reading on {d['circuit']} ({d['reading_ma']:g} mA, {d['conditions']}): {d['message']}.", "caution"
                )
            )
    for line in doc["defaults_used"]:
        blocks.append(Paragraph(f"Default used: {line}", "muted"))
    for line in doc["warnings"]:
        blocks.append(Paragraph(f"Warning: {line}", "caution"))
    if result.unplaced:
        blocks.append(
            Paragraph(
                f"{len(result.unplaced)} load(s) have no circuit yet; they are listed under "
                "'Loads not yet placed' and count towards no circuit.",
                "muted",
            )
        )
    return Section("cautions", "Cautions", blocks)


def _settings_section(result: CheckResult, doc: Mapping[str, Any]) -> Section:
    settings = result.project.settings
    rows = [
        [Cell(name), Cell(_text(entry["value"])), Cell(entry["source"], kind=settings.sources[name].kind.value)]
        for name, entry in doc["settings"].items()
        if name not in JOB_SETTINGS
    ]
    supplies: dict[tuple[Any, ...], list[str]] = {}
    for c in doc["circuits"]:
        supplies.setdefault((c["voltage_v"], c["frequency_hz"], c["system"], c["supply_source"]), []).append(
            c["circuit"]
        )
    kinds = {c.circuit_id: c.supply_source.kind.value for c in result.project.circuits}
    supply_rows = [
        [Cell(f"{v:g} V"), Cell(f"{f:g} Hz"), Cell(system), Cell(src, kind=kinds[names[0]]), Cell(", ".join(names))]
        for (v, f, system, src), names in supplies.items()
    ]
    devices: dict[str, list[Cell]] = {}
    for c, obj in zip(doc["circuits"], result.circuits):
        dev = obj.circuit.device
        if dev.protected and dev.key not in devices:
            devices[dev.key] = [
                Cell(dev.key),
                Cell(dev.label),
                _sourced(c["trip_ma"], "trip_ma", dev.trip_source),
                _sourced(c["no_trip_ma"], "no_trip_ma", dev.no_trip_source),
                _sourced(c["budget_ma"], "budget_ma", obj.budget_source),
            ]
    blocks: list[Block] = [
        Table(("Setting", "Value", "Source"), rows, "Settings used", "settings", (1.2, 1, 2.6)),
        Table(
            ("Voltage", "Frequency", "System", "Source", "Circuits"),
            supply_rows,
            "Supplies (line-to-neutral voltage and frequency)",
            "supplies",
            (0.8, 0.8, 0.8, 1.6, 2.6),
        ),
    ]
    if devices:
        blocks.append(
            Table(
                ("Key", "Device", "Trip level (mA)", "No-trip level (mA)", "Budget (mA)"),
                list(devices.values()),
                "Protective devices in this plan: levels and budget",
                "devices",
                (0.8, 1.4, 1.6, 1.6, 1.6),
            )
        )
    return Section("supply", "Supply and settings used", blocks)


def _circuit_row(c: Mapping[str, Any], obj: Any) -> list[Cell]:
    dev = obj.circuit.device
    protected = dev.protected
    return [
        Cell(c["circuit"], tone=c["status"]),
        Cell(c["device_label"], note=", ".join(c["rooms"]) or None),
        Cell(f"{c['voltage_v']:g} V {c['frequency_hz']:g} Hz {c['system']}", kind=obj.circuit.supply_source.kind.value),
        Cell(str(c["load_count"]), "load_count", c["load_count"]),
        _ma(c["cable_leakage_ma"], "cable_leakage_ma"),
        _ma(c["leakage_ma"], "leakage_ma"),
        _ma(c["phasor_ma"], "phasor_ma"),
        _ma(c["budget_ma"], "budget_ma", kind=obj.budget_source.kind.value if protected else None),
        _ma(c["no_trip_ma"], "no_trip_ma", kind=dev.no_trip_source.kind.value if protected else None),
        _share(c["headroom_used"], "headroom_used"),
        Cell(c["status"], tone=c["status"]),
    ]


CIRCUIT_HEADERS = (
    "Circuit",
    "Device / rooms",
    "Supply",
    "Loads",
    "Cable (mA)",
    "Sum (mA)",
    "Phasor (mA)",
    "Budget (mA)",
    "No-trip (mA)",
    "Used",
    "Status",
)
LOAD_HEADERS = ("Load", "Qty", "Per unit (mA)", "Leakage (mA)", "Phase", "Leg", "Room", "Basis and source")


def _load_row(d: Mapping[str, Any], r: LoadResult, basis: str) -> list[Cell]:
    return [
        Cell(d["load"], note=f"row {d['row']}" if d["row"] else None),
        Cell(str(d["quantity"]), "quantity", d["quantity"]),
        _ma(d["per_unit_ma"], "per_unit_ma"),
        _ma(d["leakage_ma"], "leakage_ma"),
        Cell("-" if d["phase_deg"] is None else f"{d['phase_deg']:.0f}°", "phase_deg", d["phase_deg"]),
        Cell(_text(d["leg"])),
        Cell(_text(d["room"])),
        Cell(d["basis"], kind=load_kind(r, basis).value, note=d["source"]),
    ]


LOAD_WIDTHS = (1.5, 0.35, 0.7, 0.7, 0.55, 0.45, 0.8, 3.5)


def _overview_figures(bars: Sequence[Any], name: str, when: str) -> Iterable[Figure]:
    """Budget-used charts of the protected circuits, one per OVERVIEW_ROWS circuits so each fits a page."""
    from leakbudget.reporting.charts import overview_chart

    protected = [b for b in bars if b.protected and b.budget_ma]
    parts = range(0, len(protected), OVERVIEW_ROWS)
    for start in parts:
        group = protected[start : start + OVERVIEW_ROWS]
        used = ", ".join(f"{b.circuit} {100 * b.gate_ma / b.budget_ma:.0f} %" for b in group)
        part = f" ({start // OVERVIEW_ROWS + 1} of {len(parts)})" if len(parts) > 1 else ""
        yield Figure(
            overview_chart(group),
            f"Bar chart of budget used per protected circuit{when}{part}: {used}.",
            f"Share of each protected circuit's budget its standing leakage uses{when}{part}. Dashed "
            "line: the budget (100 %); red tick: the device's no-trip level on the same scale.",
            name + (f"-{start // OVERVIEW_ROWS + 1}" if part else ""),
        )


def _circuits_section(result: CheckResult, doc: Mapping[str, Any], bars: Sequence[Any]) -> Section:
    blocks: list[Block] = list(_overview_figures(bars, "overview", ""))
    gate = "phasor" if doc["sum_rule"] == "phasor" else "arithmetic"
    blocks.append(
        Table(
            CIRCUIT_HEADERS,
            [_circuit_row(c, o) for c, o in zip(doc["circuits"], result.circuits)],
            f"Circuits: standing leakage against budget ({gate} sum compared; catalogue basis {doc['basis']})",
            "circuits",
            (0.8, 1.3, 1.9, 0.4, 0.5, 0.5, 0.6, 0.8, 0.8, 0.5, 1.0),
        )
    )
    blocks.append(
        Paragraph(
            "Sums are computed from each circuit's loads (their tables follow in the circuit sections below, for "
            "every circuit shown in detail); the sources of each device's budget, "
            "no-trip and trip levels are in the table 'Protective devices' and of each supply in 'Supplies', "
            "under 'Supply and settings used'.",
            "muted",
        )
    )
    return Section("circuits", "Circuits", blocks)


def _likelihood_section(doc: Mapping[str, Any]) -> Section | None:
    risk = doc.get("risk")
    if not risk:
        return None
    rows = [
        [
            Cell(c["circuit"], tone=c["status"]),
            Cell(c["status"], tone=c["status"]),
            Cell(c["trip_probability_text"] or "-", "trip_probability", c["trip_probability"]),
            Cell(
                c["trip_probability_switch_on_text"] or "-",
                "trip_probability_switch_on",
                c["trip_probability_switch_on"],
            ),
        ]
        for c in doc["circuits"]
    ]
    return Section(
        "likelihood",
        "Likelihood of a nuisance trip",
        [
            Paragraph(
                "How likely the standing leakage reaches the point where the device trips, given the spread of "
                "each value and of the device's own trip point: in normal running, and just after switch-on "
                "when heating elements that stood idle leak more."
            ),
            Table(
                ("Circuit", "Status", "Running", "At switch-on after idle"),
                rows,
                "Trip likelihood per circuit",
                "likelihood",
                (1, 1, 1.2, 1.2),
            ),
            *(Paragraph(line, "muted") for line in risk["method"]),
        ],
    )


def _readings_section(doc: Mapping[str, Any]) -> Section | None:
    from leakbudget.readings import THRESHOLDS

    readings = doc.get("readings")
    if not readings:
        return None
    rows = []
    for d in readings:
        calibrated = "-"
        if d["calibration_factor"] is not None:
            calibrated = (
                f"×{d['calibration_factor']:.2f}: sum {d['estimate_gate_ma']:.3f} → "
                f"{d['calibrated_gate_ma']:.3f} mA, {d['estimate_status']} → {d['calibrated_status']}"
            )
        rows.append(
            [
                Cell(d["circuit"], note=f"Readings row {d['row']}"),
                _ma(
                    d["reading_ma"],
                    "reading_ma",
                    kind=Kind.MEASURED.value,
                    note=", ".join(x for x in (d["conditions"], d["date"], d["note"]) if x),
                ),
                Cell(
                    f"{d['estimate_median_ma']:.3f}",
                    "estimate_median_ma",
                    d["estimate_median_ma"],
                    note=f"{d['estimate_low_ma']:.3f}-{d['estimate_high_ma']:.3f} ({100 * d['coverage']:.0f} %)",
                ),
                Cell(d["flag"], note=d["message"], tone="ok" if d["flag"] == "consistent" else "warning"),
                Cell(calibrated, note=d["calibration"]),
            ]
        )
    return Section(
        "readings",
        "Readings on site",
        [
            Paragraph("Leakage-clamp readings from the Readings sheet beside the estimate of the same circuit."),
            Table(
                ("Circuit", "Reading (mA)", "Estimate (mA)", "Against the estimate", "Calibration"),
                rows,
                "Readings against the estimate (median and coverage interval)",
                "readings",
                (0.9, 1.3, 1.1, 2.2, 1.6),
            ),
            Paragraph(f"Thresholds: {THRESHOLDS}", "muted"),
        ],
    )


DEVICE_HEADERS = ("Circuit", "Own device", "Phase", "Purpose", "Sum (mA)", "Phasor (mA)")


def _device_sections(doc: Mapping[str, Any], all_circuits: bool) -> list[Section]:
    """One section per shared device (only those not ok unless ``all_circuits``): its circuits stacked against its
    budget and no-trip level (the protection tree; BS 7671:2018 reg. 531.3.2 on the accumulated total)."""
    from leakbudget.reporting.charts import CircuitBar, Segment, circuit_chart

    circuits = {c["circuit"]: c for c in doc["circuits"]}
    sections = []
    used: set[str] = set()
    for d in doc["devices"]:
        if not (all_circuits or d["status"] != "ok"):
            continue
        below = [circuits[cid] for cid in d["circuits"]]
        bar = CircuitBar(
            circuit=d["id"],
            device_label=d["device_label"],
            status=d["status"],
            segments=tuple(Segment(c["circuit"], c["leakage_ma"] or 0.0) for c in below),
            leakage_ma=d["leakage_ma"] or 0.0,
            phasor_ma=d["phasor_ma"] or 0.0,
            gate_ma=d["gate_ma"] or 0.0,
            gate_is_phasor=doc["sum_rule"] == "phasor",
            budget_ma=d["budget_ma"],
            no_trip_ma=d["no_trip_ma"],
        )
        rows = [
            [
                Cell(c["circuit"]),
                Cell(c["device"]),
                Cell(c.get("phase") or "-"),
                Cell(c.get("purpose") or "-"),
                _ma(c["leakage_ma"], "leakage_ma"),
                _ma(c["phasor_ma"], "phasor_ma"),
            ]
            for c in below
        ]
        facts = Facts(
            [
                ("Device", Cell(f"{d['device_label']} ({d['device']}), RCD type {d['rcd_type'] or 'not given'}")),
                (
                    "Upstream",
                    Cell(d["upstream"] or ("inside " + d["inside_circuit"] if d["inside_circuit"] else "origin")),
                ),
                ("Everything below it", _ma(d["leakage_ma"], "leakage_ma")),
                ("Budget", _sourced(d["budget_ma"], "budget_ma", None)),
                ("Budget source", Cell(d["budget_source"])),
                ("Status", Cell(d["status"], tone=d["status"])),
                ("Trip likelihood, switch-on", Cell(d["trip_probability_switch_on_text"] or "-")),
                ("Lost when it trips", Cell(", ".join(d["circuits_lost_on_trip"]) or "-")),
            ]
        )
        alt = (
            f"Stacked bar: {d['id']} carries {d['leakage_ma']:.3f} mA from {len(below)} circuit(s) against budget "
            f"{d['budget_ma']:.3f} mA and no-trip level {d['no_trip_ma']:.3f} mA."
        )
        blocks: list[Block] = [
            facts,
            Figure(
                circuit_chart(bar),
                alt,
                "Leakage by circuit below the device; the diamond marks the phasor sum.",
                f"chart-device-{d['id']}",
            ),
            Table(DEVICE_HEADERS, rows, f"Circuits below {d['id']}", f"device-{d['id']}"),
        ]
        sections.append(Section(_anchor(f"device-{d['id']}", used), f"Shared device {d['id']}", blocks))
    return sections


def _detail_sections(
    result: CheckResult, doc: Mapping[str, Any], bars: Sequence[Any], all_circuits: bool
) -> list[Section]:
    """One section per circuit that is not ok (every circuit with ``all_circuits``): its chart and load table;
    then the loads not yet placed."""
    from leakbudget.reporting.charts import circuit_chart

    pairs = list(zip(doc["loads"], result.loads))
    by_circuit: dict[str, list[tuple[Mapping[str, Any], LoadResult]]] = {}
    for d, r in pairs:
        if d["circuit"] is not None:
            by_circuit.setdefault(d["circuit"], []).append((d, r))
    sections = []
    used: set[str] = set()
    for c, bar in zip(doc["circuits"], bars):
        if not (all_circuits or c["status"] != "ok"):
            continue
        rows = [_load_row(d, r, doc["basis"]) for d, r in by_circuit.get(c["circuit"], ())]
        largest = (
            f"; largest: {c['largest_contributor']} {c['largest_contributor_ma']:.3f} mA"
            if c["largest_contributor"]
            else ""
        )
        levels = (
            f" against budget {c['budget_ma']:.3f} mA and no-trip level {c['no_trip_ma']:.3f} mA"
            if c["budget_ma"] is not None
            else " (unprotected: no budget)"
        )
        alt = f"Stacked bar: {c['circuit']} standing leakage {c['leakage_ma']:.3f} mA{levels}{largest}."
        blocks: list[Block] = [
            Figure(
                circuit_chart(bar),
                alt,
                "Leakage by load, largest first; the diamond marks the phasor sum.",
                f"chart-{c['circuit']}",
            ),
            Table(LOAD_HEADERS, rows, f"Loads on {c['circuit']}", f"loads-{c['circuit']}", LOAD_WIDTHS),
        ]
        if c["note"]:
            blocks.insert(0, Paragraph(f"Note: {c['note']}", "muted"))
        sections.append(Section(_anchor(f"circuit-{c['circuit']}", used), f"Circuit {c['circuit']}", blocks))
    unplaced = [_load_row(d, r, doc["basis"]) for d, r in pairs if d["kind"] == "load" and d["circuit"] is None]
    if unplaced:
        sections.append(
            Section(
                "unplaced",
                "Loads not yet placed",
                [
                    Paragraph(
                        "Estimated at the supply of a circuit serving their room (else the first circuit); they "
                        "count towards no circuit until placed.",
                        "muted",
                    ),
                    Table(LOAD_HEADERS, unplaced, "Loads with no circuit", "loads-unplaced", LOAD_WIDTHS),
                ],
            )
        )
    return sections


def _plan_section(plan: Mapping[str, Any] | None) -> Section:
    """The split plan, from the document ``leakbudget split --json`` prints."""
    if plan is None:
        return Section(
            "split",
            "Split plan",
            [
                Paragraph(
                    "No split plan was made for this report. `leakbudget report --split` includes one: the fewest new "
                    "circuits, then the fewest moved loads, that bring every protected circuit within its budget and "
                    "current limit (as `leakbudget split`).",
                    "muted",
                )
            ],
        )
    changes = [
        a
        for a in plan.get("assignments", [])
        if a.get("moved") or a.get("placed") or a.get("change") == "left unplaced"
    ]
    blocks: list[Block] = []
    if plan.get("summary"):
        blocks.append(Paragraph(str(plan["summary"])))
    blocks.append(
        Facts(
            [
                ("New circuits", Cell(str(plan.get("new_circuits", 0)), "new_circuits", plan.get("new_circuits"))),
                ("Loads moved or placed", Cell(str(len(changes)))),
                ("Lower bound on new circuits", Cell(_text(plan.get("lower_bound_new_circuits")))),
                ("Solution", Cell("proven optimal" if plan.get("optimal") else "not proven optimal")),
                *(
                    (("Current", Cell(str(plan["current_rule"]), note=plan.get("current_rule_text"))),)
                    if plan.get("current_rule") is not None
                    else ()
                ),
            ]
        )
    )
    for blocked in plan.get("blocked", []):
        blocks.append(Paragraph(f"Cannot be planned: {blocked['message']}.", "trip-risk"))
    for warning in plan.get("current_warnings", []):
        blocks.append(Paragraph(f"Current (warning): {warning['message']}.", "warning"))
    if changes:
        blocks.append(
            Table(
                ("Load", "From", "To", "Leakage (mA)"),
                [
                    [
                        Cell(a["load"]),
                        Cell(_text(a["from"]) if a.get("from") else "not placed"),
                        Cell(_text(a["to"]) if a.get("to") else "not placed"),
                        _ma(a.get("leakage_ma"), "leakage_ma"),
                    ]
                    for a in changes
                ],
                "Loads to move or place",
                "split-moves",
                (2, 1, 1, 1),
            )
        )
    else:
        blocks.append(Paragraph("No load needs to move: every protected circuit is within budget as planned."))
    details = plan.get("new_circuit_details") or []
    if details:
        blocks.append(
            Table(
                ("New circuit", "Device", "Rating (A)", "Rooms", "Purpose", "What it copies"),
                [
                    [
                        Cell(n["circuit"]),
                        Cell(n["device"]),
                        Cell(_text(n.get("rating_a"))),
                        Cell(", ".join(n.get("rooms") or []) or "-"),
                        Cell(_text(n.get("purpose"))),
                        Cell(_text(n.get("template"))),
                    ]
                    for n in details
                ],
                "New circuits",
                "split-new",
                (1, 1, 0.8, 1.2, 0.9, 2.2),
            )
        )
    after = plan.get("circuits") or []
    blocks.extend(
        _overview_figures(_bars(after, plan.get("sum_rule") == "phasor", {}), "split-overview", " after the plan")
    )
    if after:
        blocks.append(
            Table(
                ("Circuit", "Sum (mA)", "Budget (mA)", "Used", "Status", "Before", "Current (A)"),
                [
                    [
                        Cell(c["circuit"], tone=c["status"]),
                        _ma(c.get("leakage_ma"), "leakage_ma"),
                        _ma(c.get("budget_ma"), "budget_ma"),
                        _share(c.get("headroom_used"), "headroom_used"),
                        Cell(c["status"], tone=c["status"]),
                        Cell(_text(c.get("before_status")) if c.get("before_status") else "new circuit"),
                        _current(c),
                    ]
                    for c in after
                ],
                "Circuits after the plan",
                "split-circuits",
                (1.2, 1, 1, 0.7, 1, 1, 1.1),
            )
        )
    blocks.extend(Paragraph(note, "muted") for note in plan.get("notes", []))
    return Section("split", "Split plan", blocks)


def _current(c: Mapping[str, Any]) -> Cell:
    """A circuit's current after a plan by the current rule [A], with its limit beneath."""
    current, limit = c.get("current_a"), c.get("current_limit_a")
    return Cell(
        "-" if current is None else f"{current:.1f}",
        "current_a",
        current,
        note=None if limit is None else f"limit {limit:.1f}",
    )


def _findings_section(findings: Sequence[FindingLike] | None, basis: str | None) -> Section:
    if findings is None:
        return Section(
            "findings", "Review findings", [Paragraph("The compliance review was not run for this report.", "muted")]
        )
    head = [Paragraph(f"Reviewed against {basis}.", "muted")] if basis else []
    if not findings:
        return Section(
            "findings",
            "Review findings",
            [*head, Paragraph("The review found nothing to report for the rules it checks.")],
        )
    ordered = sorted(
        findings, key=lambda f: SEVERITY_ORDER.index(_word(f.severity)) if _word(f.severity) in SEVERITY_ORDER else 9
    )
    counts = {s: sum(1 for f in findings if _word(f.severity) == s) for s in SEVERITY_ORDER}
    summary = ", ".join(f"{n} {s}{'s' if n != 1 and s != 'info' else ''}" for s, n in counts.items() if n)
    rows = []
    for f in ordered:
        source = f.source
        kind = source.kind.value if isinstance(source, Source) else None
        rows.append(
            [
                Cell(_word(f.severity), tone=_word(f.severity)),
                Cell(_text(f.circuit)),
                Cell(_text(f.load)),
                Cell(f.message, note=f"rule: {f.rule}"),
                Cell(str(source), kind=kind),
            ]
        )
    return Section(
        "findings",
        "Review findings",
        [
            *head,
            Paragraph(
                f"{len(findings)} finding(s): {summary}. Each names the rule it comes from and that rule's "
                "source; the review never suggests removing or up-rating protection."
            ),
            Table(
                ("Severity", "Circuit", "Load", "Finding (rule)", "Source"),
                rows,
                "Findings, most severe first",
                "findings",
                (0.7, 0.8, 1.1, 3.2, 2),
            ),
        ],
    )


def _method_section() -> Section:
    legend = [
        [Cell(k.value, kind=k.value), Cell(text)]
        for k, text in (
            (Kind.PUBLISHED, "a published standard or handbook, with clause"),
            (Kind.MEASURED, "your measured or datasheet value"),
            (Kind.COMPUTED, "computed from component values or other figures"),
            (Kind.FROM_MEMORY, "a catalogue value no published source fixes: confirm it"),
            (Kind.COMMON_PRACTICE, "a rule of thumb of the trade"),
            (Kind.USER, "a value from your Settings sheet"),
            (Kind.DEFAULT, "leakbudget's default"),
        )
    ]
    return Section(
        "method",
        "How the figures were made",
        [
            *(Paragraph(t) for t in METHOD_NOTES),
            Table(("Mark", "Meaning"), legend, "Provenance marks used in this report", "marks", (1, 3)),
        ],
    )


# ---- assembly --------------------------------------------------------------------------------------------------


def circuit_bars(result: CheckResult, doc: Mapping[str, Any]) -> list[Any]:
    """One :class:`leakbudget.reporting.charts.CircuitBar` per circuit, from the check-JSON numbers."""
    from leakbudget.reporting.charts import Segment

    segments: dict[str, list[Any]] = {}
    for d in doc["loads"]:
        if d["circuit"] is not None:
            segments.setdefault(d["circuit"], []).append(
                Segment(d["load"] if d["kind"] == "load" else "cable run", d["leakage_ma"] or 0.0)
            )
    return _bars(doc["circuits"], doc["sum_rule"] == "phasor", segments)


def _bars(circuits: Sequence[Mapping[str, Any]], gate_is_phasor: bool, segments: Mapping[str, list[Any]]) -> list[Any]:
    """Chart data from circuit documents as ``check --json`` (or ``split --json``) gives them."""
    from leakbudget.reporting.charts import CircuitBar

    return [
        CircuitBar(
            circuit=c["circuit"],
            device_label=c["device_label"],
            status=c["status"],
            segments=tuple(segments.get(c["circuit"], ())),
            leakage_ma=c["leakage_ma"] or 0.0,
            phasor_ma=c["phasor_ma"] or 0.0,
            gate_ma=c["gate_ma"] or 0.0,
            gate_is_phasor=gate_is_phasor,
            budget_ma=c["budget_ma"],
            no_trip_ma=c["no_trip_ma"],
        )
        for c in circuits
    ]


def _verdict(
    doc: Mapping[str, Any],
    counts: Mapping[str, int],
    findings: Sequence[FindingLike] | None,
    plan: Mapping[str, Any] | None,
) -> Paragraph:
    errors = sum(1 for f in findings or () if _word(f.severity) == "error")
    review = f" The review found {errors} error(s): see 'Review findings'." if errors else ""
    if plan is not None and (counts.get("trip-risk", 0) or counts.get("over-budget", 0)):
        review += (
            " The split plan in this report brings every protected circuit within its budget and current limit."
            if plan.get("feasible", True)
            else " No split plan within every limit exists: see 'Split plan'."
        )
    if not doc["circuits"]:
        return Paragraph("The workbook lists no circuits yet.", "muted")
    trip, over = counts.get("trip-risk", 0), counts.get("over-budget", 0)
    if trip:
        return Paragraph(
            f"{trip} circuit(s) at or above the no-trip level (nuisance trips likely) and {over} "
            f"more over budget: the plan needs changes before installation.{review}",
            "trip-risk",
        )
    if over:
        return Paragraph(
            f"{over} circuit(s) over budget but below the no-trip level: the plan needs changes "
            f"before installation.{review}",
            "over-budget",
        )
    marginal = counts.get("marginal", 0)
    if marginal:
        return Paragraph(
            f"Every protected circuit is within its budget, but {marginal} circuit(s) are marginal: likely to trip "
            f"at switch-on.{review}",
            "marginal",
        )
    if errors:
        return Paragraph(f"Every protected circuit is within its budget.{review}", "over-budget")
    return Paragraph("Every protected circuit is within its budget.", "ok")


def build_report(
    result: CheckResult,
    findings: Sequence[FindingLike] | None = None,
    plan: Mapping[str, Any] | None = None,
    generated: dt.date | None = None,
    review_basis: str | None = None,
    all_circuits: bool = False,
) -> Report:
    """Assemble the report's sections from a check result, the review findings and a split-plan document.

    ``findings`` are :func:`leakbudget.compliance.rules.review`'s, None when the review was not run (the section says so);
    ``review_basis`` says which code they were found against and why. ``plan`` is the document
    ``leakbudget split --json`` prints, or None when no plan was made. ``generated`` is the report date (today
    when None). The summary heads the report; a detail section (chart and load table) follows for each circuit and
    shared device that is not ok, or for every one with ``all_circuits``.
    """
    from leakbudget.output.check import to_json

    doc = to_json(result)
    settings = result.project.settings
    date = (generated or dt.date.today()).isoformat()
    counts: dict[str, int] = {}
    for c in doc["circuits"]:
        counts[c["status"]] = counts.get(c["status"], 0) + 1
    bars = circuit_bars(result, doc)
    detailed = [_name(x) for x in (*doc["devices"], *doc["circuits"]) if x["status"] != "ok"]
    sections = [
        _summary_section(doc, findings, plan, detailed, all_circuits),
        _job_section(result, doc, date),
        _caution_section(result, doc),
        _settings_section(result, doc),
        _circuits_section(result, doc, bars),
        *_device_sections(doc, all_circuits),
        *(x for x in (_likelihood_section(doc), _readings_section(doc)) if x is not None),
        *_detail_sections(result, doc, bars, all_circuits),
        _plan_section(plan),
        _findings_section(findings, review_basis),
        _method_section(),
    ]
    title = settings.values.get("Job") or f"Earth-leakage budget: {result.project.path.stem}"
    subtitle = (
        " · ".join(str(settings.values[k]) for k in ("Site", "Client") if settings.values.get(k))
        or "Standing earth leakage per GFCI/RCD-protected circuit"
    )
    return Report(
        title=str(title),
        subtitle=subtitle,
        verdict=_verdict(doc, counts, findings, plan),
        status_counts=counts,
        sections=sections,
        generated=date,
        tool=f"leakbudget {__version__}",
    )
