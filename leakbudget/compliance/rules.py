"""Compliance review: the check's results read against one wiring code's rules, as a list of findings.

Each :class:`Finding` has a severity (error / warning / info), the rule it comes from and that rule's source
(standard, edition and clause, or common practice), the circuit and load it concerns, and one line saying what
is wrong and what to do. The advice is always to split, measure, repair, relocate or fit the kind of device the
code asks for; never to remove protection or raise its rated residual current.

Rules (ids in :data:`RULES`): location, appliance-outlet, outdoor-outlet, pool-spa, ev-charging, socket-outlets,
lighting, type-ac, room-unclassified, waveform, fault-sign, high-leakage, shared-neutral, neutral-earth, long-run,
switch-on, budget, and the protection tree's. The codes' requirements are data in
:mod:`leakbudget.compliance.codes`; room names are classified by :mod:`leakbudget.locations`.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from enum import Enum
from typing import Any

from leakbudget.checking import CheckResult, check
from leakbudget.compliance.codes import (
    ADDITIONAL_PROTECTION_MAX_MA,
    APPLIANCE_MAX_A,
    APPLIANCE_MAX_V_TO_GROUND,
    CODE_KEYS,
    CODES,
    DEFAULT_CODE_BY_FREQUENCY_HZ,
    HVAC_EXCEPTION_EXPIRED,
    HVAC_KEYS,
    OUTDOOR_KINDS,
    OUTDOOR_MAX_A,
    OUTDOOR_MAX_V_TO_GROUND,
    POOL_PUMP_KEYS,
    POOL_PUMP_MAX_A,
    POOL_PUMP_MAX_V_TO_GROUND,
    SOCKET_OUTLET_MAX_A,
    Code,
    LocationRule,
    Scope,
    is_ev_charger,
    is_lighting,
)
from leakbudget.devices import Device, Family, Status, smooth_dc_limit
from leakbudget.errors import LeakbudgetError
from leakbudget.estimate import MEASURED, CircuitResult, LoadResult
from leakbudget.locations import Classification, classify_room
from leakbudget.model import Circuit, Project, SharedDevice
from leakbudget.protection import chain
from leakbudget.provenance import Kind, Source
from leakbudget.settings import US_SUPPLY, Settings

# Heating and cooking elements take up moisture through their end seals while cold; at switch-on their leakage
# can be several times the dry value until they dry out (BS 7671:2001 guidance). The factor is the risk model's
# `Switch-on factor` setting (one default, in risk.py), so the review and the likelihood agree.


def _switch_on(settings: Settings) -> tuple[float, Source]:
    factor = float(settings["Switch-on factor"])
    origin = settings.sources["Switch-on factor"]
    return factor, Source(
        origin.kind, f"Switch-on factor {factor:g}: {origin}; moist elements at switch-on: BS 7671:2001 guidance"
    )


# IEC 62368-1 (which replaced the withdrawn IEC 60950-1): plug-connected equipment (ordinary plug) may have at most 3.5 mA protective
# conductor current; above it, permanent connection or an industrial plug and a high-leakage label (IEC 61140
# Annex B gives the general limits).
HIGH_LEAKAGE_PLUG_MA = 3.5
HIGH_LEAKAGE_SOURCE = Source.from_memory(
    "IEC 62368-1 (pluggable equipment type A: 3.5 mA protective conductor current), clause from memory; IEC 61140 "
    "Annex B (plug-connected equipment)"
)

# Common practice: keep the load-side run of a 5 mA (UL 943 Class A) GFCI under about 75 m / 250 ft.
M_PER_FT = 0.3048  # the international foot, exact by definition
GFCI_RUN_LIMIT_M = 250 * M_PER_FT
GFCI_RUN_SOURCE = Source.common_practice("load-side run of a 5 mA GFCI under about 75 m / 250 ft (common practice)")

# IEC 60335-1 cl. 13.2, class I stationary heating appliances: 0.75 mA per kW of rated input, at least 0.75 mA,
# at most 5 mA. Used to scale a catalogue limit to the load's own power.
IEC_60335_HEATING_MA_PER_KW = 0.75
IEC_60335_HEATING_MIN_MA = 0.75
IEC_60335_HEATING_MAX_MA = 5.0
IEC_60335_HEATING_ROW = "class I stationary heating"  # how catalogue Upper sources name that limit

SHARED_NEUTRAL_SOURCE = Source.common_practice(
    "a neutral shared with another circuit carries that circuit's return current through a single-pole "
    "device's sensing coil (common practice)"
)
# A load-side neutral-to-earth connection: part of the neutral's return current comes back through earth, which a
# residual-current device sees as residual current (physics), and UL 943 requires Class A GFCIs to trip on such a
# connection by itself (a second, grounded-neutral sensing coil); most RCDs trip on it too (common practice). The
# usual causes and cures are common practice of the trade.
NEUTRAL_EARTH_GFCI_SOURCE = Source.published(
    "UL 943 (Class A GFCIs must trip on a load-side grounded-neutral connection; clause number not confirmed here); "
    "causes and cures: common practice"
)
NEUTRAL_EARTH_SOURCE = Source.common_practice(
    "a load-side neutral-to-earth connection returns part of the neutral current through earth, which the device "
    "sees as residual current, and most devices also sense the connection itself (common practice)"
)
# Catalogue rows marked Often bonded (ranges, dryers) may be connected three-wire with a neutral-to-frame strap.
BONDING_STRAP_SOURCE = Source.common_practice(
    "ranges and dryers often come with a neutral-to-frame bonding strap for a three-wire connection (common practice)"
)
SMOOTH_DC_SOURCE = Source.published("IEC 62423 (Type B); IEC 62955 (6 mA DC detection for EV charging)")

# What each RCD type detects (IEC 60755 / IEC 62423): AC sine only; A adds pulsating DC; F adds the composite
# frequencies of single-phase inverters; B adds smooth DC.
WAVEFORM_ORDER = ("sine", "pulsating-dc", "high-frequency", "smooth-dc")
RCD_TYPE_DETECTS = {"AC": 1, "A": 2, "F": 3, "B": 4}  # how many of WAVEFORM_ORDER each type sees


class ReviewError(LeakbudgetError):
    """A review option has a value leakbudget does not know."""


class Severity(str, Enum):
    ERROR = "error"  # the plan does not meet the code, or will trip
    WARNING = "warning"  # likely a problem; check it
    INFO = "info"  # worth knowing; nothing wrong shown


SEVERITY_ORDER = {Severity.ERROR: 0, Severity.WARNING: 1, Severity.INFO: 2}


@dataclass(frozen=True, slots=True)
class Finding:
    """One review finding. ``circuit`` / ``load`` are None when it concerns no single circuit / load."""

    severity: Severity
    rule: str  # a key of RULES
    source: Source  # standard, edition and clause, or common practice / from memory
    circuit: str | None
    load: str | None
    message: str

    def to_dict(self) -> dict[str, Any]:
        return {
            "severity": self.severity.value,
            "rule": self.rule,
            "source": str(self.source),
            "source_kind": self.source.kind.value,
            "circuit": self.circuit,
            "load": self.load,
            "message": self.message,
        }


@dataclass
class Review:
    """The findings of one review, the code used and why, and the check they rest on."""

    check: CheckResult
    code: Code
    code_source: Source
    findings: list[Finding]

    @property
    def label(self) -> str:
        """The code's name with the occupancy its rules were read for: "NEC 2023 (NFPA 70), dwelling units"."""
        if self.code.family != "nec":
            return self.code.label
        dwelling = _occupancy(self.check) == "dwelling"
        return f"{self.code.label}, {'dwelling units' if dwelling else 'other than dwelling units'}"

    @property
    def errors(self) -> list[Finding]:
        return [f for f in self.findings if f.severity is Severity.ERROR]

    def count(self, severity: Severity) -> int:
        return sum(f.severity is severity for f in self.findings)


# ------------------------------------------------------------------------------------------------ code choice


def choose_code(project: Project, code: str | None = None) -> tuple[Code, Source]:
    """The code to review against and why: ``code`` if given, else the Code setting, else by supply frequency."""
    if code is not None:
        key = code.strip().lower()
        if key not in CODES:
            raise ReviewError(f"'{code}' is not a code leakbudget reviews against; use one of {', '.join(CODE_KEYS)}.")
        return CODES[key], Source(Kind.USER, "chosen for this run (--code)")
    if project.settings["Code"] is not None:
        return CODES[project.settings["Code"]], project.settings.sources["Code"]
    nearest = [_nearest_frequency_hz(c.frequency_hz) for c in project.circuits]
    if nearest:
        f_hz = max(DEFAULT_CODE_BY_FREQUENCY_HZ, key=nearest.count)
        why = f"default for a {f_hz:g} Hz supply ({nearest.count(f_hz)} of {len(nearest)} circuits)"
    else:
        f_hz = _nearest_frequency_hz(project.settings["Frequency"] or US_SUPPLY[1])
        why = f"default for a {f_hz:g} Hz supply (no circuits yet)"
    code_key = DEFAULT_CODE_BY_FREQUENCY_HZ[f_hz]
    return CODES[code_key], Source(Kind.DEFAULT, f"{why}; set Code in Settings or use --code")


def _nearest_frequency_hz(frequency_hz: float) -> float:
    return min(DEFAULT_CODE_BY_FREQUENCY_HZ, key=lambda f0: abs(f0 - frequency_hz))


# ------------------------------------------------------------------------------------------------ context


def connection(r: LoadResult) -> str | None:
    """How a load connects: "plug" or "fixed" (hard-wired), from its Connection column, else the catalogue's; None
    when neither says."""
    if r.load is not None and r.load.connection is not None:
        return r.load.connection
    return r.appliance.connection if r.appliance is not None else None


@dataclass
class _Circuit:
    """One circuit as the rules see it: its check result, its loads (no cable line) and its rooms."""

    result: CircuitResult
    loads: list[LoadResult]
    rooms: list[Classification]
    above: list[SharedDevice] = field(default_factory=list)  # shared devices above it, nearest first
    inside: list[SharedDevice] = field(default_factory=list)  # devices inside it (a GFCI receptacle)

    def satisfied(self, code: Code) -> bool:
        """Whether the circuit has the protection ``code`` requires: its own device, a shared device above it, or
        devices inside it that every one of its loads sits under."""
        if code.satisfied_by(self.circuit.device) or any(code.satisfied_by(d.device) for d in self.above):
            return True
        good = {d.device_id for d in self.inside if code.satisfied_by(d.device)}
        return bool(good) and all(r.load is not None and r.load.protected_by in good for r in self.loads)

    @property
    def circuit(self) -> Circuit:
        return self.result.circuit

    @property
    def cid(self) -> str:
        return self.result.circuit.circuit_id

    def outlets(self) -> str:
        """Evidence of receptacles: "plug" (a plug-connected load), "fixed" (every load fixed-wired), else
        "unknown" (no loads, or a load whose connection is not known)."""
        kinds = [connection(r) for r in self.loads]
        if "plug" in kinds:
            return "plug"
        if kinds and all(k == "fixed" for k in kinds):
            return "fixed"
        return "unknown"


def _circuits(result: CheckResult) -> list[_Circuit]:
    project = result.project
    by_circuit: dict[str, list[LoadResult]] = {}
    for r in result.loads:
        if r.load is not None and r.circuit_id is not None:
            by_circuit.setdefault(r.circuit_id, []).append(r)
    classified: dict[str, Classification] = {}  # a room name is classified once per review
    views = []
    for c in result.circuits:
        loads = by_circuit.get(c.circuit.circuit_id, [])
        names = list(c.circuit.rooms) + [r.load.room for r in loads if r.load is not None and r.load.room]
        rooms = []
        for name in dict.fromkeys(n.strip() for n in names if n.strip()):
            if name not in classified:
                classified[name] = classify_room(name, project.location_rows)
            rooms.append(classified[name])
        above = chain(project, c.circuit.protected_by)
        inside = [d for d in project.protection if d.circuit_id == c.circuit.circuit_id]
        views.append(_Circuit(c, loads, rooms, above, inside))
    return views


def _missing(view: _Circuit) -> str:
    """What a circuit that lacks the code's protection has instead."""
    dev = view.circuit.device
    if view.above:
        return f"{view.cid} hangs under {view.above[0].device_id} ({view.above[0].device.label}), not that kind"
    if not dev.protected:
        return f"{view.cid} has no ground-fault protection"
    return f"{view.cid} has {dev.key} ({dev.label}), not that kind"


def _clause(source: Source) -> str:
    """A citation without its parenthesised gloss: "NEC 2023 210.8(A)", "BS 7671:2018+A2:2022 reg. 411.3.3 and 415.1.1"."""
    return source.text.split(" (")[0]


def _ma(value: float) -> str:
    return f"{value:.2f} mA"


# ------------------------------------------------------------------------------------------------ rules

RuleFunc = Callable[[list[_Circuit], Code, CheckResult], Iterator[Finding]]

SCOPE_STRENGTH = (Scope.ALL_CIRCUITS, Scope.RECEPTACLES, Scope.COUNTERTOP)  # strongest first
SCOPE_SEVERITY = {  # (scope, receptacle evidence) → severity of a missing-protection finding
    (Scope.RECEPTACLES, "plug"): Severity.ERROR,
    (Scope.RECEPTACLES, "unknown"): Severity.WARNING,
    (Scope.RECEPTACLES, "fixed"): Severity.INFO,
    (Scope.COUNTERTOP, "plug"): Severity.WARNING,
    (Scope.COUNTERTOP, "unknown"): Severity.WARNING,
    (Scope.COUNTERTOP, "fixed"): Severity.INFO,
}
EVIDENCE_NOTE = {
    "plug": "",
    "unknown": (
        " It applies if the circuit feeds a receptacle there (the loads' connection is not known: say plug or "
        "hard-wired in the Loads sheet's Connection column)."
    ),
    "fixed": " Its loads are all fixed-wired, so it applies only if the circuit also feeds a receptacle there.",
}


def _occupancy(result: CheckResult) -> str:
    """The Occupancy setting: "dwelling" (default) or "other"."""
    return str(result.project.settings["Occupancy"] or "dwelling")


def rule_location(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """Rooms where the code requires protection for people (NEC 210.8(A), or 210.8(B) for other than dwelling units;
    IEC 60364-7-701 / BS 7671 701); a room whose clause has a condition its name cannot show (a locker room with
    showers, an unfinished basement) gets at most a warning that says it."""
    _, locations = code.location_rules(_occupancy(result))
    for v in views:
        if v.satisfied(code):
            continue
        hits: list[tuple[str, str, LocationRule]] = [
            (c.room, kind, locations[kind]) for c in v.rooms for kind in c.kinds if kind in locations
        ]
        if not hits:
            continue
        evidence = v.outlets()
        # the strongest scope speaks, a rule without a proviso before one with (a room named both ways)
        rule = min((r for _, _, r in hits), key=lambda r: (SCOPE_STRENGTH.index(r.scope), r.proviso is not None))
        scope = rule.scope
        severity = Severity.ERROR if scope is Scope.ALL_CIRCUITS else SCOPE_SEVERITY[(scope, evidence)]
        if rule.proviso is not None and severity is Severity.ERROR:
            severity = Severity.WARNING  # the clause's condition is not known from the room name
        if (
            severity is Severity.INFO
            and {kind for _, kind, _ in hits} <= set(OUTDOOR_KINDS)
            and _outdoor_outlets(v, code, result)
        ):
            continue  # hard-wired outdoor equipment: the outdoor-outlet rule (NEC 210.8(F)) gives the finding
        rooms = ", ".join(dict.fromkeys(f"{room} ({kind})" for room, kind, _ in hits))
        covers = "every circuit serving it" if scope is Scope.ALL_CIRCUITS else f"{scope.value} there"
        if rule.proviso is not None:
            covers += f" {rule.proviso}"
        note = "" if scope is Scope.ALL_CIRCUITS else EVIDENCE_NOTE[evidence]
        yield Finding(
            severity,
            "location",
            rule.source,
            v.cid,
            None,
            f"{v.cid} serves {rooms}: {_clause(rule.source)} requires {code.requirement} for {covers}; "
            f"{_missing(v)}: {code.remedy}.{note}",
        )


def rule_room_unclassified(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """Rooms the room table could not classify, so their location rules went unchecked."""
    location_source, _ = code.location_rules(_occupancy(result))
    for v in views:
        for c in v.rooms:
            if c.classified:
                continue
            protected = v.satisfied(code)
            yield Finding(
                Severity.INFO if protected else Severity.WARNING,
                "room-unclassified",
                location_source,
                v.cid,
                None,
                f"Room '{c.room}' on {v.cid} is not in the room table, so the location rules were not checked for "
                f"it{'' if protected else ' (' + _missing(v) + ')'}; add it to a Locations sheet (Room name, "
                f"Location kind, e.g. dry or bathroom).",
            )


def rule_appliance_outlet(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """Appliances the code names, on a circuit without a Class A GFCI, up to 150 V to ground and 60 A (NEC 2023
    210.8(D)(1)-(12), hard-wired or not; NEC 2020 210.8(D) and 422.5(A)(1)-(7), spray washers only when
    cord-and-plug-connected)."""
    if not code.appliance_outlets:
        return
    for v in views:
        c = v.circuit
        if v.satisfied(code):
            continue
        if c.voltage_v > APPLIANCE_MAX_V_TO_GROUND or (c.rating_a is not None and c.rating_a > APPLIANCE_MAX_A):
            continue
        for r in v.loads:
            key = r.appliance.key if r.appliance is not None else None
            rule = code.appliance_outlets.get(key) if key is not None else None
            if rule is None:
                continue
            how = connection(r)
            if rule.plug_only and how == "fixed":
                continue
            unknown = rule.plug_only and how is None
            note = (
                f" It applies if {r.name} is cord-and-plug-connected (say plug or hard-wired in the Loads sheet's "
                "Connection column)."
                if unknown
                else ""
            )
            yield Finding(
                Severity.WARNING if unknown else Severity.ERROR,
                "appliance-outlet",
                rule.source,
                v.cid,
                r.name,
                f"{r.name} ({key}) is on {v.cid}: {_clause(rule.source)} requires GFCI protection for "
                f"{code.appliance_scope.format(what=rule.what)}; {_missing(v)}: {code.remedy}.{code.appliance_note}"
                f"{note}",
            )


def _outdoor_outlets(v: _Circuit, code: Code, result: CheckResult) -> list[LoadResult]:
    """The loads of an unprotected circuit that NEC 210.8(F) covers: outdoor equipment that is not plug-connected
    (receptacles outdoors are the location rule's), not a luminaire, on a single-phase circuit up to 150 V to
    ground and 50 A; empty when the code has no such rule or the premises are not a dwelling."""
    c = v.circuit
    if code.outdoor_source is None or _occupancy(result) != "dwelling":
        return []
    if v.satisfied(code) or c.purpose == "lighting" or c.system == "three":
        return []
    if c.voltage_v > OUTDOOR_MAX_V_TO_GROUND or (c.rating_a is not None and c.rating_a > OUTDOOR_MAX_A):
        return []
    outdoor_room = any(kind in OUTDOOR_KINDS for room in v.rooms for kind in room.kinds)
    return [
        r
        for r in v.loads
        if connection(r) != "plug"
        and not is_lighting(r.appliance.key if r.appliance is not None else None)
        and (outdoor_room or (r.appliance is not None and r.appliance.category == "outdoor"))
    ]


def rule_outdoor_outlet(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """Hard-wired outdoor equipment of a dwelling without GFCI protection (NEC 210.8(F): every outdoor outlet on a
    single-phase circuit up to 150 V to ground and 50 A, lighting outlets excepted)."""
    if code.outdoor_source is None or _occupancy(result) != "dwelling":
        return
    year = int(code.key.rsplit("-", 1)[1])
    for v in views:
        c = v.circuit
        hits = _outdoor_outlets(v, code, result)
        if not hits:
            continue
        names = ", ".join(r.name for r in hits[:4]) + (", …" if len(hits) > 4 else "")
        hvac = any(r.appliance is not None and r.appliance.key in HVAC_KEYS for r in hits)
        note = (
            f" (the exception for HVAC equipment ran out on {HVAC_EXCEPTION_EXPIRED[year]})"
            if hvac and year in HVAC_EXCEPTION_EXPIRED
            else ""
        )
        rating = "" if c.rating_a is not None else " (its Rating is not given; the rule covers circuits up to 50 A)"
        yield Finding(
            Severity.ERROR if c.rating_a is not None else Severity.WARNING,
            "outdoor-outlet",
            code.outdoor_source,
            v.cid,
            None,
            f"{v.cid} supplies outdoor equipment that is not plug-connected ({names}){rating}: "
            f"{_clause(code.outdoor_source)} requires {code.requirement} for every outdoor outlet of a dwelling "
            f"on a single-phase circuit up to {OUTDOOR_MAX_V_TO_GROUND:g} V to ground and {OUTDOOR_MAX_A:g} A, "
            f"hard-wired equipment included{note}; {_missing(v)}: {code.remedy}.",
        )


def rule_pool_spa(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """Pool pumps, spas and hot tubs, hydromassage bathtubs without the protection the code asks for, hard-wired or
    not (NEC 680.21(C), 680.44, 680.71: a Class A GFCI; IEC 60364-7-702 / BS 7671 702: a 30 mA RCD for
    equipment in zones 1 and 2 of the basin)."""
    if not code.pool_spa:
        return
    for v in views:
        c = v.circuit
        if v.satisfied(code):
            continue
        for r in v.loads:
            key = r.appliance.key if r.appliance is not None else None
            rule = code.pool_spa.get(key) if key is not None else None
            if rule is None:
                continue
            if (
                code.family == "nec"
                and key in POOL_PUMP_KEYS
                and (
                    c.voltage_v > POOL_PUMP_MAX_V_TO_GROUND or (c.rating_a is not None and c.rating_a > POOL_PUMP_MAX_A)
                )
            ):
                continue
            where = f", {rule.proviso}" if rule.proviso is not None else ""
            yield Finding(
                Severity.WARNING if rule.proviso is not None else Severity.ERROR,
                "pool-spa",
                rule.source,
                v.cid,
                r.name,
                f"{r.name} ({key}) is on {v.cid}: {_clause(rule.source)} requires {code.requirement} for "
                f"{rule.what}, hard-wired or not{where}; {_missing(v)}: {code.remedy}.",
            )


def _ev_not_individual(v: _Circuit, code: Code, result: CheckResult, chargers: int) -> str | None:
    """Why a protected EV circuit still falls short of "each charging point protected individually by an RCD of
    Type A, F or B" (IEC / BS 722.531.3.101), in words; None when it does not."""
    c = v.circuit
    if code.satisfied_by(c.device):
        name, rcd_type, shared = f"its {c.device.key}", c.rcd_type, 1
    else:
        above = next((d for d in v.above if code.satisfied_by(d.device)), None)
        if above is None:
            return None  # protected by a device inside the circuit: not judged here
        circuits = next((d.circuits for d in result.devices if d.device_id == above.device_id), [v.cid])
        name, rcd_type, shared = above.device_id, above.rcd_type, len(circuits)
        if shared > 1:
            others = ", ".join(x for x in circuits if x != v.cid)
            return (
                f"it is protected by {name} together with other circuits ({others}), not individually: give "
                f"{v.cid} an RCD of its own (an RCBO, rcd-30, of Type A, F or B as the charger needs)"
            )
    if rcd_type == "AC":
        return f"{name} is a Type AC RCD: fit a Type A (or F or B, as the charger needs) device of the same IΔn"
    if chargers > 1:
        return f"{chargers} charging points share {name}: give each its own circuit and RCD"
    return None


def rule_ev_charging(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """EV charging: NEC 625.54 (receptacles for EV charging need GFCI for personnel); IEC / BS 722.531.3.101 (each
    charging point protected individually by a 30 mA RCD of Type A, F or B)."""
    if code.ev_source is None:
        return
    for v in views:
        evs = [r for r in v.loads if r.appliance is not None and is_ev_charger(r.appliance.key)]
        if code.family == "nec":
            evs = [r for r in evs if connection(r) == "plug"]  # 625.54 covers receptacles; fixed units carry their own
        if not evs:
            continue
        if v.satisfied(code):
            if not code.ev_individual:
                continue
            why = _ev_not_individual(v, code, result, sum(r.load.quantity for r in evs if r.load is not None))
            if why is not None:
                yield Finding(
                    Severity.ERROR,
                    "ev-charging",
                    code.ev_source,
                    v.cid,
                    evs[0].name,
                    f"{', '.join(r.name for r in evs)} on {v.cid}: {_clause(code.ev_source)} asks for each charging "
                    f"point to be protected individually by an RCD of Type A, F or B of IΔn "
                    f"{ADDITIONAL_PROTECTION_MAX_MA:g} mA or less; {why}.",
                )
            continue
        for r in evs:
            assert r.appliance is not None
            yield Finding(
                Severity.ERROR,
                "ev-charging",
                code.ev_source,
                v.cid,
                r.name,
                f"{r.name} ({r.appliance.key}) is EV charging equipment on {v.cid}: {_clause(code.ev_source)} "
                f"requires {code.requirement}; {_missing(v)}: {code.remedy}.",
            )


def rule_socket_outlets(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """IEC 60364-4-41 / BS 7671 411.3.3: socket-outlets up to 32 A need 30 mA additional protection (415.1.1)."""
    if code.socket_source is None:
        return
    for v in views:
        rating = v.circuit.rating_a
        evidence = v.outlets()
        if v.satisfied(code) or evidence == "fixed" or (rating and rating > SOCKET_OUTLET_MAX_A):
            continue
        if v.circuit.purpose == "lighting":
            continue  # supplies luminaires, not socket-outlets: the lighting rule (BS 7671 reg. 411.3.4)
        plugs = [r.name for r in v.loads if connection(r) == "plug"]
        what = (
            f"plug-connected loads ({', '.join(plugs[:4])}{', …' if len(plugs) > 4 else ''})"
            if plugs
            else "loads whose connection is not known"
        )
        yield Finding(
            Severity.ERROR if plugs else Severity.WARNING,
            "socket-outlets",
            code.socket_source,
            v.cid,
            None,
            f"{v.cid} feeds {what} through socket-outlets up to {SOCKET_OUTLET_MAX_A:g} A: "
            f"{_clause(code.socket_source)} requires {code.requirement}; {_missing(v)}: {code.remedy}.",
        )


def rule_type_ac(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """A Type AC RCD in front of socket-outlets or loads not known to be fixed equipment (BS 7671:2018+A2:2022
    reg. 531.3.3: Type AC only for fixed equipment known to have no DC component)."""
    if code.type_ac_source is None:
        return
    for v in views:
        c = v.circuit
        if c.device.protected:
            name, rcd_type = f"its {c.device.key}", c.rcd_type
        elif v.above:
            name, rcd_type = v.above[0].device_id, v.above[0].rcd_type
        else:
            continue
        evidence = v.outlets()
        if rcd_type != "AC" or evidence == "fixed":
            continue
        what = "plug-connected loads" if evidence == "plug" else "loads not known to be fixed equipment"
        yield Finding(
            Severity.ERROR if evidence == "plug" else Severity.WARNING,
            "type-ac",
            code.type_ac_source,
            v.cid,
            None,
            f"{v.cid} feeds {what} through {name}, a Type AC RCD: {_clause(code.type_ac_source)} allows Type AC "
            "only for fixed equipment known to have no DC component in its residual current; fit a Type A (or F "
            "or B, as the loads need) device of the same IΔn.",
        )


def rule_lighting(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """A lighting circuit of a dwelling (Purpose lighting, or a circuit with luminaires) without 30 mA RCD
    additional protection (BS 7671:2018 reg. 411.3.4)."""
    if code.lighting_source is None or _occupancy(result) != "dwelling":
        return
    for v in views:
        if v.satisfied(code):
            continue
        lamps = [r.name for r in v.loads if r.appliance is not None and is_lighting(r.appliance.key)]
        if v.circuit.purpose != "lighting" and not lamps:
            continue
        what = (
            "is a lighting circuit"
            if v.circuit.purpose == "lighting"
            else f"supplies luminaires ({', '.join(lamps[:4])}{', …' if len(lamps) > 4 else ''})"
        )
        yield Finding(
            Severity.ERROR,
            "lighting",
            code.lighting_source,
            v.cid,
            None,
            f"{v.cid} {what} in domestic premises: {_clause(code.lighting_source)} requires {code.requirement} "
            f"for AC final circuits supplying luminaires; {_missing(v)}: {code.remedy}.",
        )


def effective_waveform(r: LoadResult) -> tuple[str, str]:
    """A load's leakage waveform and where it comes from: the Waveform column, else the catalogue, else sine."""
    if r.load is not None and r.load.waveform:
        return r.load.waveform, "Waveform column"
    if r.appliance is not None:
        return r.appliance.waveform, f"catalogue '{r.appliance.key}'"
    return "sine", "no catalogue row; sine assumed"


def _types_seeing(wave: str) -> str:
    """The RCD types that see a waveform, in words: "Type F or B"."""
    types = [t for t, n in RCD_TYPE_DETECTS.items() if n > WAVEFORM_ORDER.index(wave)]
    return "Type " + (" or ".join(types) if len(types) < 3 else ", ".join(types[:-1]) + " or " + types[-1])


# What a device type that cannot see a waveform does with it, in words that match the physics: high-frequency
# leakage is under-read or over-read (a device's sensitivity changes with frequency); pulsating DC is not seen by
# Type AC; smooth DC saturates (blinds) the core of a Type AC, A or F device.
WAVEFORM_EFFECT = {
    "pulsating-dc": "may not see pulsating DC residual current, so it may not trip on a fault with such a current",
    "high-frequency": (
        "under-reads or over-reads high-frequency leakage (its sensitivity changes with frequency), so it may trip "
        "late on a fault or trip without one"
    ),
    "smooth-dc": "can be blinded by smooth DC leakage (its core saturates), so it may not trip on a fault",
}
# A modelling choice: high-frequency leakage of switch-mode loads on a Type A device is only a note while it is
# small, i.e. within the circuit's budget; above it, a warning.
SMALL_HF_SOURCE = Source(
    Kind.DEFAULT,
    "modelling choice: high-frequency leakage within the circuit's budget on a Type A device is a note; "
    "IEC 60755 / IEC 62423 (RCD types)",
)


def rule_waveform(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """Leakage whose waveform the RCD type cannot see, one finding per circuit and waveform (IEC 60755 / IEC 62423;
    IEC 62955 DC detection)."""
    for v in views:
        if not v.circuit.device.protected:
            continue
        rcd_type = v.circuit.rcd_type
        groups: dict[str, list[tuple[LoadResult, str]]] = {}
        for r in v.loads:
            wave, origin = effective_waveform(r)
            if wave == "sine" or (rcd_type is not None and WAVEFORM_ORDER.index(wave) < RCD_TYPE_DETECTS[rcd_type]):
                continue
            groups.setdefault(wave, []).append((r, origin))
        for wave in (w for w in WAVEFORM_ORDER if w in groups):
            members = groups[wave]
            total_ma = sum(r.leakage_ma for r, _ in members)
            named = ", ".join(f"{r.name} ({origin})" for r, origin in members[:4]) + (", …" if len(members) > 4 else "")
            one = members[0][0].name if len(members) == 1 else None
            source = SMOOTH_DC_SOURCE if wave == "smooth-dc" else code.waveform_source
            leak = f"{wave} leakage ({_ma(total_ma)}) of {named}"
            if rcd_type is None:
                yield Finding(
                    Severity.INFO,
                    "waveform",
                    source,
                    v.cid,
                    one,
                    f"{v.cid} carries {leak}, and its device type (AC, A, F or B) is not given; {_types_seeing(wave)} "
                    f"sees it: check the device's datasheet and give its type in the RCD type column.",
                )
                continue
            cure = f"fit a {_types_seeing(wave)} device of the same IΔn"
            if wave == "smooth-dc":
                cure += (
                    ", or a Type A with an IEC 62955 6 mA DC-detecting device (many EV chargers have one "
                    "built in: check the datasheet); a Type A still trips with up to 6 mA smooth DC, a Type F "
                    "up to 10 mA"
                )
            severity = Severity.ERROR if rcd_type == "AC" else Severity.WARNING
            if wave == "high-frequency" and rcd_type == "A" and total_ma <= v.result.budget_ma:
                severity, source = Severity.INFO, SMALL_HF_SOURCE
                cure = (
                    "small switch-mode loads like these are usual on a Type A device; measure the circuit's "
                    f"leakage, and if it trips without a fault, {cure}"
                )
            yield Finding(
                severity,
                "waveform",
                source,
                v.cid,
                one,
                f"{v.cid} carries {leak}, and its Type {rcd_type} device {WAVEFORM_EFFECT[wave]}: {cure}.",
            )
        if v.result.dc_blinded and rcd_type is not None:
            limit, limit_source = smooth_dc_limit(rcd_type)
            yield Finding(
                Severity.ERROR,
                "waveform",
                code.cite(limit_source),
                v.cid,
                None,
                f"{v.cid} carries {_ma(v.result.smooth_dc_ma)} of smooth DC leakage, more than the "
                f"{_ma(limit or 0.0)} its Type {rcd_type} device operates with: the device may not trip on a fault "
                "while it flows; fit a Type B device of the same IΔn, or a DC-detecting device (IEC 62955) "
                "ahead of it, and keep the smooth-DC loads on circuits of their own.",
            )


def published_limit(r: LoadResult) -> tuple[float, Source] | None:
    """The appliance's published upper leakage limit per unit [mA] and its source, or None when the catalogue
    row's upper value is not a published limit. A class I stationary heating limit (IEC 60335-1 cl. 13.2) is
    scaled to the load's own Power when given."""
    a = r.appliance
    if a is None or a.upper_source.kind is not Kind.PUBLISHED:
        return None
    power_w = r.load.power_w if r.load is not None else None
    if IEC_60335_HEATING_ROW in a.upper_source.text and power_w:
        limit = min(
            max(IEC_60335_HEATING_MA_PER_KW * power_w / 1000.0, IEC_60335_HEATING_MIN_MA), IEC_60335_HEATING_MAX_MA
        )
        return limit, Source.published(
            f"IEC 60335-1 cl. 13.2 (class I stationary heating, 0.75 mA/kW at "
            f"{power_w / 1000.0:g} kW, at least 0.75 mA, at most 5 mA)"
        )
    return a.upper_ma, a.upper_source


def rule_fault_sign(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """A measured leakage above the appliance's upper limit (IEC 60335-1 cl. 13.2, UL 101, …): likely a fault."""
    for r in result.loads:
        if r.load is None or r.basis != MEASURED or r.appliance is None:
            continue
        measured = r.load.leakage_ma or 0.0
        limit = published_limit(r)
        if limit is not None and measured > limit[0]:
            yield Finding(
                Severity.ERROR,
                "fault-sign",
                limit[1],
                r.circuit_id,
                r.name,
                f"{r.name} measured {_ma(measured)} per unit, above the {_ma(limit[0])} limit for "
                f"'{r.appliance.key}': the appliance is probably faulty (damp or damaged insulation, "
                f"failed filter); have it repaired or replaced and measure again. This is a fault, not a "
                f"budget problem.",
            )
        elif limit is None and measured > r.appliance.upper_ma:
            yield Finding(
                Severity.INFO,
                "fault-sign",
                r.appliance.upper_source,
                r.circuit_id,
                r.name,
                f"{r.name} measured {_ma(measured)} per unit, above the catalogue's upper figure "
                f"{_ma(r.appliance.upper_ma)} for '{r.appliance.key}' (not a published limit): measure "
                f"again, and have the appliance checked if the reading holds.",
            )


def rule_high_leakage(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """Plug-connected equipment above 3.5 mA (IEC 62368-1 / IEC 61140 Annex B)."""
    for r in result.loads:
        plug = connection(r) == "plug"
        if r.load is None or not plug or r.per_unit_ma <= HIGH_LEAKAGE_PLUG_MA:
            continue
        yield Finding(
            Severity.WARNING,
            "high-leakage",
            HIGH_LEAKAGE_SOURCE,
            r.circuit_id,
            r.name,
            f"{r.name} leaks {_ma(r.per_unit_ma)} per unit ({r.basis}) on a plug: above "
            f"{HIGH_LEAKAGE_PLUG_MA:g} mA equipment must be permanently connected or use an industrial plug, "
            f"and carry a high-leakage label; measure it, and connect it that way or have it repaired.",
        )


def rule_shared_neutral(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """A circuit marked as sharing its neutral, on a single-pole (single-phase) device."""
    for v in views:
        c = v.circuit
        if not (c.shared_neutral and c.device.protected and c.system == "single"):
            continue
        yield Finding(
            Severity.ERROR,
            "shared-neutral",
            SHARED_NEUTRAL_SOURCE,
            v.cid,
            None,
            f"{v.cid} shares its neutral with another circuit, but its {c.device.label} ({c.device.key}) "
            f"is single-pole: the other circuit's return current passes through its sensing coil and it "
            f"will trip; give {v.cid} its own neutral, or protect both circuits of the shared neutral with "
            f"one two-pole device of the same kind.",
        )


def _sensing(devices: list[tuple[str, Device]]) -> tuple[str, Device] | None:
    """The nearest protective device of (name, device) pairs listed nearest first, or None."""
    return next(((name, d) for name, d in devices if d.protected), None)


def _neutral_earth_source(device: Device) -> Source:
    return NEUTRAL_EARTH_GFCI_SOURCE if device.family is Family.GFCI else NEUTRAL_EARTH_SOURCE


def rule_neutral_earth(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """A neutral tied to earth on the load side of a GFCI/RCD (the Neutral-earth bond column): the device trips at
    once or at random, whatever the leakage budget says (UL 943 Class A grounded-neutral detection); a note for an
    Often bonded catalogue row (a range, a dryer) whose column is blank."""
    for v in views:
        c = v.circuit
        board = [(f"{v.cid}'s {c.device.key}", c.device)] + [(d.device_id, d.device) for d in v.above]
        if c.neutral_earth_bond:
            hit = _sensing(board)
            chosen = hit or _sensing([(d.device_id, d.device) for d in v.inside])
            if chosen is not None:
                name, dev = chosen
                where = "" if hit is not None else f" if the bond lies below {name}"
                yield Finding(
                    Severity.ERROR if hit is not None else Severity.WARNING,
                    "neutral-earth",
                    _neutral_earth_source(dev),
                    v.cid,
                    None,
                    f"{v.cid} has its neutral tied to earth on its load side, under {name} ({dev.label}): part of "
                    f"the neutral current returns through earth and the device will trip{where}; separate neutral "
                    "and earth in the subpanel it feeds (neutral bar isolated, bonded only at the service), or, for "
                    "a generator or inverter with a bonded neutral, use a transfer switch that switches the neutral.",
                )
        for r in v.loads:
            if r.load is None:
                continue
            own = [(d.device_id, d.device) for d in v.inside if d.device_id == r.load.protected_by]
            hit = _sensing(own + board)
            if hit is None:
                continue
            name, dev = hit
            key = r.appliance.key if r.appliance is not None else None
            if r.load.neutral_earth_bond is None and r.appliance is not None and r.appliance.often_bonded:
                yield Finding(
                    Severity.INFO,
                    "neutral-earth",
                    BONDING_STRAP_SOURCE,
                    v.cid,
                    r.name,
                    f"{r.name} ({key}) often comes with its neutral bonded to its frame for a three-wire "
                    f"connection, which makes {name} ({dev.label}) trip: check that the bonding strap is out and it "
                    "is connected four-wire, and say yes or no in the Loads sheet's Neutral-earth bond column.",
                )
                continue
            if not r.load.neutral_earth_bond:
                continue
            if r.appliance is not None and r.appliance.often_bonded:
                cure = (
                    "take the bonding strap out of its terminal block and connect it four-wire (separate neutral "
                    "and equipment grounding conductors), as its instructions say"
                )
            else:
                cure = (
                    "for a dryer or range, take the bonding strap out and connect it four-wire; for a generator or "
                    "inverter with a bonded neutral, use a transfer switch that switches the neutral, or unbond its "
                    "neutral as its maker allows"
                )
            yield Finding(
                Severity.ERROR,
                "neutral-earth",
                _neutral_earth_source(dev),
                v.cid,
                r.name,
                f"{r.name} ties neutral to earth under {name} ({dev.label}) on {v.cid}: part of the neutral current "
                f"returns through earth and the device will trip, whatever the leakage; {cure}.",
            )


def rule_long_run(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """A load-side cable run longer than the usual limit for a 5 mA GFCI (common practice)."""
    for v in views:
        c = v.circuit
        if c.device.family is not Family.GFCI or not c.cable_length_m or c.cable_length_m <= GFCI_RUN_LIMIT_M:
            continue
        yield Finding(
            Severity.WARNING,
            "long-run",
            GFCI_RUN_SOURCE,
            v.cid,
            None,
            f"{v.cid}'s load-side cable run is {c.cable_length_m:.0f} m ({c.cable_length_m / M_PER_FT:.0f} "
            f"ft), longer than the usual 75 m / 250 ft for a 5 mA GFCI: the cable's own capacitance adds "
            f"{_ma(v.result.cable_ma)} of standing leakage here and surges may trip it; place the GFCI "
            f"nearer the loads (a GFCI receptacle or a GFCI at a sub-panel) or split the run.",
        )


def rule_switch_on(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """A circuit within budget that is likely to trip at switch-on: a heating element whose switch-on (moist)
    leakage would reach the no-trip level, or a switch-on trip likelihood above the Switch-on limit (marginal)."""
    settings = result.project.settings
    phasor = settings.sum_rule == "phasor"
    factor, source = _switch_on(settings)
    limit = float(settings["Switch-on limit"])
    total_phasor: dict[str, complex] = {}
    for r in result.loads:
        if r.circuit_id is not None:
            total_phasor[r.circuit_id] = total_phasor.get(r.circuit_id, 0j) + r.phasor_ma
    for v in views:
        dev = v.circuit.device
        c = v.result
        if not dev.protected or c.status not in (Status.OK, Status.MARGINAL):
            continue
        likely = (
            f" (switch-on trip likelihood {100 * c.risk.switch_on:.2g} %, above the Switch-on limit of "
            f"{100 * limit:g} %: marginal)"
            if c.status is Status.MARGINAL and c.risk is not None
            else ""
        )
        spoken = False
        for r in v.loads:
            if r.appliance is None or not r.appliance.heating:
                continue
            extra = factor - 1.0
            wet_total = abs(total_phasor[v.cid] + r.phasor_ma * extra) if phasor else c.gate_ma + r.leakage_ma * extra
            if wet_total < dev.no_trip_ma:
                continue
            spoken = True
            yield Finding(
                Severity.WARNING,
                "switch-on",
                source,
                v.cid,
                r.name,
                f"{r.name} is a heating element: its {_ma(r.leakage_ma)} dry leakage may be about "
                f"{_ma(r.leakage_ma * factor)} at switch-on after standing cold, taking {v.cid} "
                f"from {_ma(c.gate_ma)} to {_ma(wet_total)}, at or above its no-trip level "
                f"{_ma(dev.no_trip_ma)}{likely}; measure it at switch-on, and move it to a circuit with more "
                f"headroom (`leakbudget split`) or have the element's seals repaired if it trips.",
            )
        if likely and not spoken:
            assert c.risk is not None
            yield Finding(
                Severity.WARNING,
                "switch-on",
                Source(Kind.DEFAULT, str(settings.sources["Switch-on limit"])),
                v.cid,
                None,
                f"{v.cid} is within its budget, but its switch-on trip likelihood {100 * c.risk.switch_on:.2g} % "
                f"is above the Switch-on limit of {100 * limit:g} %, so it is marginal: its heating elements may "
                f"trip it, leaking about {factor:g} × their dry value when switched on cold. Measure them at "
                f"switch-on, or give them a circuit of their own (`leakbudget split --max-trip-likelihood`). {source}.",
            )


def rule_budget(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """The check's verdict: over budget (BS 7671 reg. 531.3.2, in BS 7671:2018+A2:2022 item (iii)) or at the no-trip
    level."""
    for v in views:
        c = v.result
        dev = c.circuit.device
        if not dev.protected:
            continue  # judged with the shared device above it (device-budget), if any
        largest = f"; the largest contributor is {c.largest} ({_ma(c.largest_ma)})" if c.largest else ""
        advice = (
            "split the circuit (`leakbudget split`), measure the largest contributors, and repair appliances "
            "that leak far above their typical value"
        )
        if c.status is Status.TRIP_RISK:
            yield Finding(
                Severity.ERROR,
                "budget",
                dev.no_trip_source,
                v.cid,
                None,
                f"{v.cid}'s standing leakage {_ma(c.gate_ma)} reaches the no-trip level "
                f"{_ma(dev.no_trip_ma)} of its {dev.label}, so nuisance trips are likely{largest}: "
                f"{advice}.",
            )
        elif c.status is Status.OVER_BUDGET:
            regulation = code.budget_is_regulation and dev.family is Family.RCD
            yield Finding(
                Severity.ERROR if regulation else Severity.WARNING,
                "budget",
                code.cite(c.budget_source),
                v.cid,
                None,
                f"{v.cid}'s standing leakage {_ma(c.gate_ma)} is over its budget {_ma(c.budget_ma)} (below "
                f"the no-trip level {_ma(dev.no_trip_ma)}){largest}: {advice}.",
            )


# --------------------------------------------------------------------------------------------- the protection tree

# Selectivity of RCDs in series: the upstream one time-delayed (type S) with IΔn at least 3 × the downstream one,
# or the downstream device's break time within the upstream's non-actuating time (IEC 61008-1 type S times).
SELECTIVITY_RATIO = 3.0
SELECTIVITY_SOURCE = Source.from_memory(
    "BS 7671:2018 reg. 536.4.1.4 / IEC 60364-5-53 (RCDs in series: the upstream one type S with IΔn at least 3 × "
    "the downstream one), from memory"
)
HIGH_INTEGRITY_MA = 10.0
HIGH_INTEGRITY_SOURCE = Source.from_memory(
    "BS 7671:2018 reg. 543.7 (protective conductor current above 10 mA: high-integrity protective conductor), "
    "clause from memory"
)
DIVISION_SOURCE = Source.published(
    "BS 7671:2018 reg. 314.1 (divide an installation to reduce the inconvenience of a fault and unwanted RCD "
    "tripping; account for the danger of losing a lighting circuit)"
)


def _pairs(result: CheckResult) -> Iterator[tuple[str, Device, str, Device]]:
    """(downstream name, its device, upstream name, its device) for every two devices in series."""
    project = result.project
    by_id = {d.device_id.lower(): d for d in project.protection}
    for d in project.protection:
        if d.upstream_id:
            up = by_id[d.upstream_id.lower()]
            yield d.device_id, d.device, up.device_id, up.device
    for c in project.circuits:
        if c.device.protected and c.protected_by:
            up = by_id[c.protected_by.lower()]
            yield f"{c.circuit_id}'s {c.device.key}", c.device, up.device_id, up.device
    for d in project.protection:
        if d.circuit_id is None:
            continue
        circuit = next(c for c in project.circuits if c.circuit_id == d.circuit_id)
        if circuit.device.protected:
            yield d.device_id, d.device, f"{circuit.circuit_id}'s {circuit.device.key}", circuit.device
        elif circuit.protected_by:
            up = by_id[circuit.protected_by.lower()]
            yield d.device_id, d.device, up.device_id, up.device


def _selective(down: Device, up: Device) -> bool:
    if up.time_delayed and up.trip_ma >= SELECTIVITY_RATIO * down.trip_ma:
        return True
    # times: the downstream device clears at 5 IΔn (of its own) before the upstream one may act at that current
    current = 5.0 * down.trip_ma
    return down.max_break_time_s(current_ma=current) < up.min_non_actuating_time_s(current_ma=current)


def rule_selectivity(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """Two devices in series that are not selective: a fault below the lower one may trip the upper one too, and
    take out everything under it."""
    for down_name, down, up_name, up in _pairs(result):
        if _selective(down, up):
            continue
        yield Finding(
            Severity.WARNING,
            "selectivity",
            SELECTIVITY_SOURCE,
            None,
            None,
            f"{down_name} ({down.label}) sits under {up_name} ({up.label}) without selectivity: a fault below "
            f"{down_name} may trip {up_name} as well and cut everything under it; make the upstream device "
            "time-delayed (type S) with at least three times the IΔn of the one below, as the designer and the "
            "code in force allow.",
        )


def rule_device_budget(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """A shared device whose accumulated protective conductor current is over its budget or reaches its no-trip
    level (BS 7671 reg. 531.3.2 applies to the total downstream of an RCD)."""
    for d in result.devices:
        dev = d.shared.device
        if d.status not in (Status.OVER_BUDGET, Status.TRIP_RISK):
            continue
        regulation = code.budget_is_regulation and dev.family is Family.RCD
        severity = Severity.ERROR if d.status is Status.TRIP_RISK or regulation else Severity.WARNING
        yield Finding(
            severity,
            "device-budget",
            code.cite(dev.no_trip_source if d.status is Status.TRIP_RISK else d.budget_source),
            None,
            None,
            f"{d.device_id} ({dev.label}) carries {_ma(d.gate_ma)} from everything below it "
            f"({', '.join(d.circuits)}), {'at or above its no-trip level ' + _ma(dev.no_trip_ma) if d.status is Status.TRIP_RISK else 'over its budget ' + _ma(d.budget_ma)}"
            f"; the largest part is {d.largest} ({_ma(d.largest_ma)}): move circuits to another device of the "
            "board, give the largest a device of its own (an RCBO), or measure the largest contributors.",
        )


def rule_high_integrity(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """A device whose accumulated protective conductor current is above 10 mA, which calls for a high-integrity
    protective conductor."""
    for d in result.devices:
        if d.shared.circuit_id is None and d.leakage_ma > HIGH_INTEGRITY_MA:
            yield Finding(
                Severity.WARNING,
                "high-integrity",
                HIGH_INTEGRITY_SOURCE,
                None,
                None,
                f"The protective conductor current below {d.device_id} adds up to {_ma(d.leakage_ma)}, above "
                f"{_ma(HIGH_INTEGRITY_MA)}: the circuits below it need a high-integrity protective conductor "
                "(duplicated, or of a greater cross-section) where the code in force asks for it.",
            )


def rule_division(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """Every lighting circuit, or every socket circuit, of the installation under one device: one trip darkens or
    cuts the whole home."""
    for purpose, what in (("lighting", "darkens"), ("sockets", "cuts every socket of")):
        group = [v for v in views if v.circuit.purpose == purpose]
        tops = {v.above[-1].device_id if v.above else None for v in group}
        nearest = {v.above[0].device_id if v.above else None for v in group}
        if len(group) < 2 or None in nearest or len(nearest) != 1:
            continue
        (device_id,) = nearest
        others = {d.device_id for d in result.devices if d.shared.circuit_id is None} - {device_id} - tops
        yield Finding(
            Severity.WARNING,
            "division",
            DIVISION_SOURCE,
            None,
            None,
            f"Every {purpose} circuit ({', '.join(v.cid for v in group)}) hangs under {device_id}: one trip "
            f"{what} the whole home; spread them over "
            + (f"{device_id} and {', '.join(sorted(others))}" if others else "two devices")
            + " (`leakbudget split`).",
        )


def rule_device_waveform(views: list[_Circuit], code: Code, result: CheckResult) -> Iterator[Finding]:
    """A shared device that the smooth DC of everything below it blinds (BS 7671 reg. 531.3.3)."""
    for d in result.devices:
        if not d.dc_blinded or d.shared.rcd_type is None:
            continue
        limit, source = smooth_dc_limit(d.shared.rcd_type)
        yield Finding(
            Severity.ERROR,
            "device-waveform",
            code.cite(source),
            None,
            None,
            f"{d.device_id} (Type {d.shared.rcd_type}) sees {_ma(d.smooth_dc_ma)} of smooth DC leakage from below "
            f"it, more than the {_ma(limit or 0.0)} it operates with: it may not trip on a fault; fit a Type B "
            "device, or put the smooth-DC loads under a DC-detecting device (IEC 62955) of their own.",
        )


RULES: dict[str, RuleFunc] = {
    "location": rule_location,
    "appliance-outlet": rule_appliance_outlet,
    "outdoor-outlet": rule_outdoor_outlet,
    "pool-spa": rule_pool_spa,
    "ev-charging": rule_ev_charging,
    "socket-outlets": rule_socket_outlets,
    "lighting": rule_lighting,
    "type-ac": rule_type_ac,
    "room-unclassified": rule_room_unclassified,
    "waveform": rule_waveform,
    "fault-sign": rule_fault_sign,
    "high-leakage": rule_high_leakage,
    "shared-neutral": rule_shared_neutral,
    "neutral-earth": rule_neutral_earth,
    "long-run": rule_long_run,
    "switch-on": rule_switch_on,
    "budget": rule_budget,
    "device-budget": rule_device_budget,
    "selectivity": rule_selectivity,
    "high-integrity": rule_high_integrity,
    "division": rule_division,
    "device-waveform": rule_device_waveform,
}


def rule_description(rule: str) -> str:
    """One line saying what a rule looks for (the first paragraph of its function's docstring)."""
    return " ".join((RULES[rule].__doc__ or "").split("\n\n")[0].split()).rstrip(".")


# ------------------------------------------------------------------------------------------------ entry points


def review(subject: Project | CheckResult, code: str | None = None) -> Review:
    """The review's one entry point: check ``subject`` (unless it is already a check result) and apply every rule
    of ``code`` (one of CODE_KEYS; default: the Code setting, else by supply frequency). Findings come errors
    first, then warnings, then info; within a severity in circuit order."""
    result = subject if isinstance(subject, CheckResult) else check(subject)
    chosen, why = choose_code(result.project, code)
    views = _circuits(result)
    order = {c.circuit.circuit_id: i for i, c in enumerate(result.circuits)}
    findings = [f for func in RULES.values() for f in func(views, chosen, result)]
    findings.sort(key=lambda f: (SEVERITY_ORDER[f.severity], order.get(f.circuit or "", len(order))))
    return Review(result, chosen, why, findings)
