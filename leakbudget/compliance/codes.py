"""The wiring codes the review checks against, as data: where each requires ground-fault protection for people,
which appliance outlets and pool or spa equipment it names, and which devices provide that protection.

The requirements are paraphrased for design review, for dwellings and (NEC 210.8(B), with the Occupancy setting)
other premises; the code in force, as adopted locally, always decides. Every rule carries its source with edition
and clause; clauses not confirmed here say "from memory".

BS 7671 is read as BS 7671:2018+A2:2022. A regulation that Amendment 2 changed (411.3.3 socket-outlets, 531.3.2
unwanted tripping, 531.3.3 RCD types, 722.531.3.101 EV charging points) is cited as "BS 7671:2018+A2:2022", and so
is one whose A2 text was confirmed here (415.1.1, 701.411.3.3); one cited as "BS 7671:2018" was confirmed only as
first published in 2018 (411.3.4, 314.1) or is from memory. Amendment 3:2024 (a supplement to A2) and any later
amendment were not checked against these rules.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import Enum
from typing import Any

from leakbudget.devices import BUDGET_FRACTION_SOURCE, SMOOTH_DC_LIMITS, Device, Family
from leakbudget.provenance import Source
from leakbudget.settings import CODE_KEYS

# Default code when neither --code nor the Code setting gives one, by the circuits' supply frequency: a 60 Hz
# plan is taken as a US dwelling (the current NEC edition), a 50 Hz plan as IEC 60364 (the international base
# that national codes such as BS 7671 adopt); choose bs-7671 explicitly for a UK job.
DEFAULT_CODE_BY_FREQUENCY_HZ = {60.0: "nec-2023", 50.0: "iec-60364"}

# BS 7671:2018 reg. 415.1.1: additional protection is an RCD with IΔn not above 30 mA (and at most 40 ms at 5 IΔn).
ADDITIONAL_PROTECTION_MAX_MA = 30.0
# BS 7671:2018+A2:2022 reg. 411.3.3: additional protection for socket-outlets rated up to 32 A.
SOCKET_OUTLET_MAX_A = 32.0


class Scope(str, Enum):
    """What in a location a requirement covers."""

    RECEPTACLES = "receptacles"  # 125-250 V receptacles (socket-outlets) in the location
    COUNTERTOP = "countertop receptacles"  # only receptacles serving countertops (NEC 2020 kitchens)
    ALL_CIRCUITS = "all circuits"  # every circuit serving the location


@dataclass(frozen=True, slots=True)
class LocationRule:
    """One location kind's requirement. ``proviso`` is a condition of the clause that a room name cannot show (a
    basement area that is unfinished, a locker room that has showers): a finding under it is at most a warning, and
    says the condition."""

    scope: Scope
    source: Source
    proviso: str | None = None


@dataclass(frozen=True, slots=True)
class EquipmentRule:
    """A requirement for the outlet or circuit supplying one kind of equipment (an appliance the code names, a pool
    pump): the code's words for it, the clause, a condition the review cannot see (``proviso``: the finding is then
    a warning that says it), and whether only cord-and-plug-connected equipment is covered."""

    what: str
    source: Source
    proviso: str | None = None
    plug_only: bool = False


@dataclass(frozen=True)
class Code:
    """One code's review rules."""

    key: str
    label: str
    family: str  # "nec" (GFCI for personnel) or "iec" (RCD additional protection)
    location_source: Source  # the clause the location rules come from
    locations: dict[str, LocationRule]  # location kind → requirement
    appliance_outlets: dict[str, EquipmentRule] = field(default_factory=dict)  # catalogue key → requirement
    appliance_scope: str = "the outlet supplying {what}"  # what the appliance rule protects, in the code's words
    appliance_note: str = ""  # said after an appliance-outlet finding (how else the code lets it be met)
    outdoor_source: Source | None = None  # NEC 210.8(F): outdoor outlets of dwellings, hard-wired ones included
    other_location_source: Source | None = None  # NEC 210.8(B): other than dwelling units
    type_ac_source: Source | None = None  # BS 7671:2018+A2:2022 reg. 531.3.3: Type AC for fixed equipment only
    pool_spa: dict[str, EquipmentRule] = field(default_factory=dict)  # NEC 680, IEC 60364-7-702: key → requirement
    other_locations: dict[str, LocationRule] = field(default_factory=dict)
    ev_source: Source | None = None
    ev_individual: bool = False  # each charging point on an RCD of its own, of Type A, F or B (IEC / BS 722)
    socket_source: Source | None = None  # IEC / BS: socket-outlets need additional protection wherever they are
    lighting_source: Source | None = None  # BS 7671 411.3.4: circuits supplying luminaires in domestic premises
    waveform_source: Source = Source.published("IEC 60755 / IEC 62423 (RCD types AC, A, F, B)")
    budget_is_regulation: bool = False  # the 30 % budget rule is a regulation of this code (for RCDs)
    citations: dict[Source, Source] = field(default_factory=dict)  # how this code cites a source the check gives

    def cite(self, source: Source) -> Source:
        """``source`` as this code's edition cites it (the check cites BS 7671 as first published in 2018)."""
        return self.citations.get(source, source)

    @property
    def requirement(self) -> str:
        """The protection this code's location and outlet rules ask for, in words."""
        if self.family == "nec":
            return "GFCI protection for personnel (Class A)"
        return f"additional protection by an RCD of IΔn {ADDITIONAL_PROTECTION_MAX_MA:g} mA or less"

    @property
    def remedy(self) -> str:
        """What to fit to meet :attr:`requirement`, with the device key."""
        if self.family == "nec":
            return "fit a Class A GFCI (gfci-a)"
        return (
            f"fit an RCD to IEC 61008-1 / IEC 61009-1 of IΔn {ADDITIONAL_PROTECTION_MAX_MA:g} mA or less "
            f"(rcd-30 or rcd-10)"
        )

    def location_rules(self, occupancy: str) -> tuple[Source, dict[str, LocationRule]]:
        """The location clause and its rules for ``occupancy`` ("dwelling" or "other"); a code without rules of its
        own for other occupancies keeps its dwelling rules."""
        if occupancy == "other" and self.other_location_source is not None:
            return self.other_location_source, self.other_locations
        return self.location_source, self.locations

    def satisfied_by(self, device: Device) -> bool:
        """Whether ``device`` is the kind of protection this code's location and outlet rules require."""
        if self.family == "nec":
            return device.family is Family.GFCI
        return device.family is Family.RCD and device.trip_ma <= ADDITIONAL_PROTECTION_MAX_MA


# Location kinds that are outdoors for the NEC's outdoor rules (210.8(A)/(B) outdoors, 210.8(F)): a rooftop is
# outdoors.
OUTDOOR_KINDS = ("outdoor", "rooftop")

# Conditions of a clause that a room name cannot show (LocationRule.proviso).
SHOWERS_PROVISO = "if it has showers"
UNFINISHED_PROVISO = "if that part of the basement is unfinished (not habitable space)"

# NEC 210.8(A), dwelling units: receptacles in bathrooms, garages and accessory buildings, outdoors, crawl spaces,
# basements, kitchens, areas with a sink, within 1.8 m of a sink or of a bathtub or shower stall, boathouses,
# laundry areas and indoor damp or wet locations. A rooftop is outdoors; a locker room counts where it has showers.
DWELLING_KINDS = (
    "bathroom",
    "half-bath",
    "garage",
    "accessory-building",
    "outdoor",
    "rooftop",
    "crawl-space",
    "basement",
    "unfinished-basement",
    "sink-area",
    "boathouse",
    "laundry",
    "damp",
)
# NEC 210.8(B), other than dwelling units, as NEC 2020 lists it (12 items, confirmed from a public summary of the
# code): bathrooms; kitchens; rooftops; outdoors; sinks (within 1.8 m); indoor damp and wet locations; locker rooms
# with associated showering facilities; garages, service bays and similar areas other than vehicle exhibition halls
# and showrooms; crawl spaces at or below grade; unfinished areas of basements; laundry areas; within 1.8 m of a
# bathtub or shower stall. NEC 2023 has 15 items (confirmed from a maker's public summary of the 2023 changes): it
# splits kitchens from areas with a sink and permanent provisions for food or beverage preparation or cooking, adds
# buffet serving areas, and adds aquariums, bait wells and similar open aquatic vessels (within 1.8 m), item (13);
# it covers receptacles up to 250 V on single-phase circuits up to 150 V to ground and 50 A, and on three-phase
# circuits up to 150 V to ground and 100 A. An outbuilding (accessory-building) is taken as an area similar to a
# garage (a modelling choice; whether NEC 2023 names accessory buildings in this item is not confirmed here).
OTHER_KINDS_2020 = (
    "bathroom",
    "half-bath",
    "kitchen",
    "sink-area",
    "rooftop",
    "outdoor",
    "damp",
    "garage",
    "accessory-building",
    "crawl-space",
    "unfinished-basement",
    "laundry",
)
OTHER_KINDS_2023 = (*OTHER_KINDS_2020, "aquarium")
NEC_210_8_B = {
    2020: Source.published(
        "NEC 2020 210.8(B) (other than dwelling units, 12 locations: bathrooms, kitchens, rooftops, outdoors, near "
        "sinks, indoor damp and wet locations, locker rooms with showers, garages and service bays, crawl spaces, "
        "unfinished basements, laundry areas, near bathtubs and showers)"
    ),
    2023: Source.published(
        "NEC 2023 210.8(B) (other than dwelling units, 15 locations: bathrooms, kitchens, sinks with food or "
        "beverage preparation, buffet serving areas, rooftops, outdoors, near sinks, indoor damp and wet locations, "
        "locker rooms with showers, garages, service bays and similar areas, crawl spaces, unfinished basements, "
        "near aquariums and bait wells, laundry areas, near bathtubs and showers)"
    ),
}

# NEC 2023 210.8(D): the branch circuit or outlet supplying these appliances, rated 150 V or less to ground and 60 A
# or less, single- or three-phase, needs GFCI protection, hard-wired or cord-and-plug-connected. It is a numbered
# list, not a table: items (1)-(7) are NEC 2020 422.5(A)'s, (8)-(12) were added in 2023 (confirmed from two makers'
# public summaries of the 2023 code). NEC 2020 210.8(D) sends the reader to 422.5(A)(1)-(7) (confirmed from a public
# summary of the 2020 code), with no dwelling-unit limit; its spray washers are the cord-and-plug-connected ones, and
# 422.5(B)(3)-(5) let the GFCI sit in the appliance's plug, in its cord within 300 mm of the plug, or in the
# appliance itself instead.
APPLIANCE_MAX_V_TO_GROUND = 150.0
APPLIANCE_MAX_A = 60.0
NEC_2023_210_8_D = {  # catalogue key → (item, the code's words)
    "automotive-vacuum-machine": (1, "automotive vacuum machines"),
    "drinking-water-cooler": (2, "drinking water coolers and bottle fill stations"),
    "pressure-washer": (3, "high-pressure spray washing machines"),
    "tire-inflation-machine": (4, "tire inflation machines"),
    "vending-machine": (5, "vending machines"),
    "sump-pump": (6, "sump pumps"),
    "dishwasher": (7, "dishwashers"),
    "commercial-dishwasher": (7, "dishwashers"),
    "range-electric": (8, "electric ranges"),
    "wall-oven": (9, "wall-mounted ovens"),
    "cooktop-radiant": (10, "counter-mounted cooking units"),
    "induction-hob": (10, "counter-mounted cooking units"),
    "dryer": (11, "clothes dryers"),
    "heat-pump-dryer": (11, "clothes dryers"),
    "microwave": (12, "microwave ovens"),
}
NEC_2020_422_5_A = {  # catalogue key → (item, the code's words)
    "automotive-vacuum-machine": (1, "automotive vacuum machines"),
    "drinking-water-cooler": (2, "drinking water coolers and bottle fill stations"),
    "pressure-washer": (3, "cord-and-plug-connected high-pressure spray washing machines"),
    "tire-inflation-machine": (4, "tire inflation machines"),
    "vending-machine": (5, "vending machines"),
    "sump-pump": (6, "sump pumps"),
    "dishwasher": (7, "dishwashers"),
    "commercial-dishwasher": (7, "dishwashers"),
}
NEC_2020_APPLIANCE_NOTE = (
    " NEC 2020 422.5(B)(3)-(5) also accept a GFCI in the appliance's attachment plug, in its cord within 300 mm of "
    "the plug, or factory-installed in the appliance: check the appliance."
)


def _appliances_2023() -> dict[str, EquipmentRule]:
    return {
        key: EquipmentRule(what, Source.published(f"NEC 2023 210.8(D)({item}) ({what})"))
        for key, (item, what) in NEC_2023_210_8_D.items()
    }


def _appliances_2020() -> dict[str, EquipmentRule]:
    return {
        key: EquipmentRule(
            what,
            Source.published(f"NEC 2020 210.8(D) and 422.5(A)({item}) ({what})"),
            plug_only=key == "pressure-washer",
        )
        for key, (item, what) in NEC_2020_422_5_A.items()
    }


def _nec(year: int, kitchen: Scope, outdoor_source: Source) -> Code:
    where = Source.published(f"NEC {year} 210.8(A)")
    locations = {kind: LocationRule(Scope.RECEPTACLES, where) for kind in DWELLING_KINDS}
    locations["kitchen"] = LocationRule(kitchen, where)
    locations["locker-room"] = LocationRule(Scope.RECEPTACLES, where, SHOWERS_PROVISO)  # bathtubs, shower stalls
    other_where = NEC_210_8_B[year]
    other_kinds = OTHER_KINDS_2023 if year >= 2023 else OTHER_KINDS_2020
    other_locations = {kind: LocationRule(Scope.RECEPTACLES, other_where) for kind in other_kinds}
    other_locations["locker-room"] = LocationRule(Scope.RECEPTACLES, other_where, SHOWERS_PROVISO)
    other_locations["basement"] = LocationRule(Scope.RECEPTACLES, other_where, UNFINISHED_PROVISO)
    return Code(
        key=f"nec-{year}",
        label=f"NEC {year} (NFPA 70)",
        family="nec",
        location_source=where,
        locations=locations,
        appliance_outlets=_appliances_2023() if year >= 2023 else _appliances_2020(),
        appliance_scope=(
            "the branch circuit or outlet supplying {what}, hard-wired or cord-and-plug-connected"
            if year >= 2023
            else "the outlet supplying {what}"
        ),
        appliance_note="" if year >= 2023 else NEC_2020_APPLIANCE_NOTE,
        outdoor_source=outdoor_source,
        other_location_source=other_where,
        pool_spa=_nec_680(year),
        other_locations=other_locations,
        ev_source=Source.published(f"NEC {year} 625.54"),
    )


# NEC 680 (pools, spas, hot tubs, hydromassage bathtubs), clauses from memory: 680.21(C) GFCI for outlets supplying
# pool pump motors on circuits up to 150 V to ground and 60 A; 680.44 the outlets of a spa or hot tub; 680.71 a
# hydromassage bathtub and its components on an individual branch circuit with a readily accessible GFCI.
POOL_PUMP_MAX_V_TO_GROUND = 150.0
POOL_PUMP_MAX_A = 60.0
POOL_PUMP_KEYS = ("pool-pump", "pool-pump-vfd")


def _nec_680(year: int) -> dict[str, EquipmentRule]:
    pump = Source.from_memory(
        f"NEC {year} 680.21(C) (outlets supplying pool pump motors, up to 150 V to ground and 60 A), from memory"
    )
    spa = Source.from_memory(f"NEC {year} 680.44 (outlets supplying a spa or hot tub), from memory")
    tub = Source.from_memory(
        f"NEC {year} 680.71 (hydromassage bathtubs: an individual branch circuit and a readily accessible GFCI), "
        "from memory"
    )
    return {
        "pool-pump": EquipmentRule("pool pump motors", pump),
        "pool-pump-vfd": EquipmentRule("pool pump motors", pump),
        "hot-tub": EquipmentRule("spas and hot tubs", spa),
        "whirlpool-tub-pump": EquipmentRule("hydromassage bathtubs", tub),
    }


# IEC 60364-7-702:2010 (edition 3, the current one; the edition confirmed from standards catalogues): equipment in
# zones 1 and 2 of a swimming-pool or fountain basin needs a 30 mA RCD, SELV or electrical separation (702.410.3.4,
# and 702.55.4 for pumps and other fixed equipment in zone 1); clause numbers from memory. A hot tub (spa pool) is
# taken as such a basin, from memory. A whirlpool bath is a bath: the location rule (701) covers its circuit.
IEC_702 = Source.from_memory(
    "IEC 60364-7-702:2010 702.410.3.4 and 702.55.4 (equipment in zones 1 and 2 of a swimming-pool or fountain "
    "basin: an RCD of IΔn 30 mA or less, SELV or electrical separation), clause numbers from memory"
)
BS_702 = Source.from_memory(
    "BS 7671:2018 regs. 702.410.3.4 and 702.55.4 (Section 702, as IEC 60364-7-702: equipment in zones 1 and 2 of a "
    "swimming-pool or fountain basin on an RCD of IΔn 30 mA or less, SELV or electrical separation), clause "
    "numbers from memory"
)
POOL_ZONE_PROVISO = (
    "if it stands in zone 1 or 2 of the basin (a pump in a plant room outside the zones is not covered by this clause)"
)


def _iec_702(source: Source) -> dict[str, EquipmentRule]:
    pump = EquipmentRule("swimming-pool pumps", source, POOL_ZONE_PROVISO)
    spa = EquipmentRule(
        "spa pools and hot tubs",
        Source(source.kind, source.text.replace("), clause", "; a hot tub taken as one), clause")),
    )
    return {"pool-pump": pump, "pool-pump-vfd": pump, "hot-tub": spa}


def _iec(key: str, label: str, *, bath: Source, ev: Source, sockets: Source, pools: Source, **extra: Any) -> Code:
    """An IEC-family code: 30 mA RCD additional protection for socket-outlets, every circuit of a location with a
    bath or shower (a locker room where it has showers), swimming-pool and spa equipment, and each EV charging point
    on an RCD of its own."""
    bath_rule = LocationRule(Scope.ALL_CIRCUITS, bath)
    return Code(
        key=key,
        label=label,
        family="iec",
        location_source=bath,
        locations={
            "bathroom": bath_rule,
            "locker-room": LocationRule(Scope.ALL_CIRCUITS, bath, SHOWERS_PROVISO),
        },
        pool_spa=_iec_702(pools),
        ev_source=ev,
        ev_individual=True,
        socket_source=sockets,
        **extra,
    )


# NEC 210.8(F): every outdoor outlet of a dwelling (a receptacle or the point where hard-wired equipment connects),
# on a single-phase branch circuit of at most 150 V to ground and 50 A, needs GFCI protection; lighting outlets are
# excepted. NEC 2023's Exception No. 2 for listed HVAC equipment expired on 1 September 2026 (confirmed from a
# public summary of the code text); NEC 2020's exception for HVAC equipment with power conversion (TIA 20-13) ran
# to 1 January 2023.
OUTDOOR_MAX_V_TO_GROUND = 150.0
OUTDOOR_MAX_A = 50.0
HVAC_EXCEPTION_EXPIRED = {2023: "1 September 2026", 2020: "1 January 2023"}
NEC_2023_210_8_F = Source.published(
    "NEC 2023 210.8(F) (outdoor outlets of dwellings, hard-wired ones included, single-phase, up to 150 V to ground "
    "and 50 A; Exception No. 1 lighting outlets; Exception No. 2, listed HVAC equipment, expired 1 September 2026)"
)
NEC_2020_210_8_F = Source.from_memory(
    "NEC 2020 210.8(F) (outdoor outlets of dwellings, single-phase, up to 150 V to ground and 50 A; lighting outlets "
    "excepted; the TIA 20-13 HVAC exception ran to 1 January 2023), from memory"
)

# The check's own BS 7671 citations (leakbudget.devices) name the regulations as first published in 2018; Amendment
# 2 changed both. 531.3.2: the 30 % rule is item (iii) of the A2 text (confirmed from a maker's public summary of
# A2). 531.3.3: A2 restricts Type AC; the smooth-DC levels of Types A and F are the 2018 notes' (confirmed), their
# note numbers in A2 not confirmed.
BS_7671_A2_CITATIONS = {
    BUDGET_FRACTION_SOURCE: Source.published(
        "BS 7671:2018+A2:2022 reg. 531.3.2(iii) (protective conductor current accumulated downstream of an RCD not "
        "more than 30 % of IΔn)"
    ),
    SMOOTH_DC_LIMITS["A"][1]: Source.published(
        "BS 7671:2018+A2:2022 reg. 531.3.3 (Type A: operates with up to 6 mA smooth DC; the note number in A2 not "
        "confirmed)"
    ),
    SMOOTH_DC_LIMITS["F"][1]: Source.published(
        "BS 7671:2018+A2:2022 reg. 531.3.3 (Type F: operates with up to 10 mA smooth DC; the note number in A2 not "
        "confirmed)"
    ),
    SMOOTH_DC_LIMITS["B"][1]: Source.published(
        "BS 7671:2018+A2:2022 reg. 531.3.3 (Type B: detects smooth DC residual current)"
    ),
}

CODES: dict[str, Code] = {
    "nec-2020": _nec(2020, Scope.COUNTERTOP, NEC_2020_210_8_F),
    "nec-2023": _nec(2023, Scope.RECEPTACLES, NEC_2023_210_8_F),
    "iec-60364": _iec(
        "iec-60364",
        "IEC 60364 (low-voltage installations)",
        # IEC 60364-7-701:2019 is edition 3, the current one (confirmed from standards catalogues); its RCD clause
        # is numbered 701.415.1 in edition 2 (2006, confirmed from an identical national adoption); the 2019
        # number is not confirmed here.
        bath=Source.from_memory(
            "IEC 60364-7-701:2019 701.415.1 (every circuit of a location containing a bath or shower on one or more "
            "RCDs of IΔn 30 mA or less; SELV, PELV and electrical separation excepted), the clause number as "
            "edition 2 (2006) has it, from memory for 2019"
        ),
        # IEC 60364-7-722:2018 is edition 2 (confirmed); BS 7671 takes 722.531.3.101 from it.
        ev=Source.from_memory(
            "IEC 60364-7-722:2018 722.531.3.101 (each AC charging point on an RCD of its own, IΔn 30 mA or less, "
            "Type A, F or B), clause from memory"
        ),
        # IEC 60364-4-41:2005+AMD1:2017 (the edition confirmed from a normative-reference list).
        sockets=Source.from_memory(
            "IEC 60364-4-41:2005+AMD1:2017 411.3.3 and 415.1.1 (socket-outlets up to 32 A; the 32 A limit from memory)"
        ),
        pools=IEC_702,
    ),
    "bs-7671": _iec(
        "bs-7671",
        "BS 7671:2018+A2:2022 (IET Wiring Regulations)",
        bath=Source.published(
            "BS 7671:2018+A2:2022 reg. 701.411.3.3 (every low-voltage circuit serving a location containing a bath "
            "or shower, and any passing through its zones 1 and 2, on an RCD of IΔn 30 mA or less)"
        ),
        ev=Source.published(
            "BS 7671:2018+A2:2022 reg. 722.531.3.101 (each charging point with a socket-outlet or vehicle connector "
            "protected individually by an RCD of Type A, F or B, IΔn 30 mA or less; not where supplied by "
            "electrical separation)"
        ),
        sockets=Source.published("BS 7671:2018+A2:2022 reg. 411.3.3 and 415.1.1 (socket-outlets rated up to 32 A)"),
        pools=BS_702,
        lighting_source=Source.published(
            "BS 7671:2018 reg. 411.3.4 (AC final circuits supplying luminaires in domestic premises: additional "
            "protection by an RCD of IΔn 30 mA or less)"
        ),
        waveform_source=Source.published("BS 7671:2018+A2:2022 reg. 531.3.3; IEC 62423 (RCD types AC, A, F, B)"),
        type_ac_source=Source.published(
            "BS 7671:2018+A2:2022 reg. 531.3.3 (Type AC only for fixed equipment known to have no DC component in "
            "its load current)"
        ),
        budget_is_regulation=True,
        citations=BS_7671_A2_CITATIONS,
    ),
}
if tuple(CODES) != CODE_KEYS:  # the Code setting's choices (leakbudget.settings) must be exactly these codes
    raise AssertionError(f"codes defined {tuple(CODES)} differ from the Code setting's {CODE_KEYS}")

EV_CHARGER_KEY_PREFIX = "ev-charger"  # catalogue keys of EV charging equipment start with this


def is_ev_charger(appliance_key: str | None) -> bool:
    """Whether a catalogue key names EV charging equipment (built-in keys and user rows named ``ev-charger…``)."""
    return bool(appliance_key and appliance_key.startswith(EV_CHARGER_KEY_PREFIX))


# Catalogue rows that are luminaires or their drivers: lighting outlets, excepted from NEC 210.8(F).
LIGHTING_KEY_WORDS = ("light", "luminaire", "led-driver", "lamp")
# Catalogue rows that are HVAC equipment (NEC 2023 210.8(F) Exception No. 2, now expired).
HVAC_KEYS = ("heat-pump-inverter", "window-air-conditioner")


def is_lighting(appliance_key: str | None) -> bool:
    """Whether a catalogue key names a luminaire or its driver (a lighting outlet)."""
    return bool(appliance_key and any(word in appliance_key for word in LIGHTING_KEY_WORDS))
