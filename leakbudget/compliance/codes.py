"""The wiring codes the review checks against, as data: where each requires ground-fault protection for people,
which appliance outlets it names, and which devices provide that protection.

The requirements are paraphrased for design review, for dwellings and (NEC 210.8(B), with the Occupancy setting)
other premises; the code in force, as adopted locally, always decides. Every rule carries its source; clauses not confirmed here say "from memory".
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import Enum
from typing import Any

from leakbudget.devices import Device, Family
from leakbudget.provenance import Source
from leakbudget.settings import CODE_KEYS

# Default code when neither --code nor the Code setting gives one, by the circuits' supply frequency: a 60 Hz
# plan is taken as a US dwelling (the current NEC edition), a 50 Hz plan as IEC 60364 (the international base
# that national codes such as BS 7671 adopt); choose bs-7671 explicitly for a UK job.
DEFAULT_CODE_BY_FREQUENCY_HZ = {60.0: "nec-2023", 50.0: "iec-60364"}

# BS 7671:2018 reg. 415.1.1: additional protection is an RCD with IΔn not above 30 mA (and at most 40 ms at 5 IΔn).
ADDITIONAL_PROTECTION_MAX_MA = 30.0
# BS 7671:2018 reg. 411.3.3: additional protection for socket-outlets rated up to 32 A.
SOCKET_OUTLET_MAX_A = 32.0


class Scope(str, Enum):
    """What in a location a requirement covers."""

    RECEPTACLES = "receptacles"  # 125-250 V receptacles (socket-outlets) in the location
    COUNTERTOP = "countertop receptacles"  # only receptacles serving countertops (NEC 2020 kitchens)
    ALL_CIRCUITS = "all circuits"  # every circuit serving the location


@dataclass(frozen=True, slots=True)
class LocationRule:
    scope: Scope
    source: Source


@dataclass(frozen=True)
class Code:
    """One code's review rules."""

    key: str
    label: str
    family: str  # "nec" (GFCI for personnel) or "iec" (RCD additional protection)
    location_source: Source  # the clause the location rules come from
    locations: dict[str, LocationRule]  # location kind → requirement
    appliance_outlets: dict[str, str] = field(default_factory=dict)  # appliance key → the rule's wording
    appliance_source: Source | None = None
    appliance_outlet_sources: dict[str, Source] = field(default_factory=dict)  # a key's own clause, if not the above
    outdoor_source: Source | None = None  # NEC 210.8(F): outdoor outlets of dwellings, hard-wired ones included
    other_location_source: Source | None = None  # NEC 210.8(B): other than dwelling units
    type_ac_source: Source | None = None  # BS 7671:2018+A2:2022 reg. 531.3.3: Type AC for fixed equipment only
    pool_spa: dict[str, tuple[str, Source]] = field(default_factory=dict)  # NEC 680: appliance key → (what, clause)
    other_locations: dict[str, LocationRule] = field(default_factory=dict)
    dwelling_only_outlets: tuple[str, ...] = ()  # appliance keys whose outlet rule covers dwelling units only
    ev_source: Source | None = None
    socket_source: Source | None = None  # IEC / BS: socket-outlets need additional protection wherever they are
    lighting_source: Source | None = None  # BS 7671 411.3.4: circuits supplying luminaires in domestic premises
    waveform_source: Source = Source.published("IEC 60755 / IEC 62423 (RCD types AC, A, F, B)")
    budget_is_regulation: bool = False  # the 30 % budget rule is a regulation of this code (for RCDs)

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


def _nec(
    year: int,
    kitchen: Scope,
    appliance_outlets: dict[str, str],
    appliance_source: Source,
    appliance_outlet_sources: dict[str, Source],
    outdoor_source: Source,
) -> Code:
    where = Source.published(f"NEC {year} 210.8(A)")
    wet = LocationRule(Scope.RECEPTACLES, where)
    locations = dict.fromkeys(
        (
            "bathroom",
            "half-bath",
            "garage",
            "accessory-building",
            "outdoor",
            "crawl-space",
            "basement",
            "sink-area",
            "boathouse",
            "laundry",
            "damp",
        ),
        wet,
    )
    locations["kitchen"] = LocationRule(kitchen, where)
    # 210.8(B), other than dwelling units: receptacles up to 250 V on single-phase circuits up to 150 V to ground
    # and 50 A in bathrooms, kitchens and food-preparation areas with a sink, rooftops, outdoors, within 1.8 m of a
    # sink, indoor damp or wet locations, locker rooms with showers, garages and service bays, crawl spaces,
    # unfinished basements, laundry areas, near bathtubs and showers (from memory for the list).
    other_where = Source.from_memory(f"NEC {year} 210.8(B) (other than dwelling units), list from memory")
    other_wet = LocationRule(Scope.RECEPTACLES, other_where)
    other_locations = dict.fromkeys(
        (
            "bathroom",
            "half-bath",
            "kitchen",
            "sink-area",
            "outdoor",
            "damp",
            "garage",
            "accessory-building",
            "crawl-space",
            "basement",
            "laundry",
        ),
        other_wet,
    )
    return Code(
        key=f"nec-{year}",
        label=f"NEC {year} (NFPA 70)",
        family="nec",
        location_source=where,
        locations=locations,
        appliance_outlets=appliance_outlets,
        appliance_source=appliance_source,
        appliance_outlet_sources=appliance_outlet_sources,
        outdoor_source=outdoor_source,
        other_location_source=other_where,
        pool_spa=_nec_680(year),
        other_locations=other_locations,
        dwelling_only_outlets=("dishwasher",) if year == 2020 else (),
        ev_source=Source.published(f"NEC {year} 625.54"),
    )


# NEC 680 (pools, spas, hot tubs, hydromassage bathtubs), clauses from memory: 680.21(C) GFCI for outlets supplying
# pool pump motors on circuits up to 150 V to ground and 60 A; 680.44 the outlets of a spa or hot tub; 680.71 a
# hydromassage bathtub and its components on an individual branch circuit with a readily accessible GFCI.
POOL_PUMP_MAX_V_TO_GROUND = 150.0
POOL_PUMP_MAX_A = 60.0
POOL_PUMP_KEYS = ("pool-pump", "pool-pump-vfd")


def _nec_680(year: int) -> dict[str, tuple[str, Source]]:
    pump = Source.from_memory(
        f"NEC {year} 680.21(C) (outlets supplying pool pump motors, up to 150 V to ground and 60 A), from memory"
    )
    spa = Source.from_memory(f"NEC {year} 680.44 (outlets supplying a spa or hot tub), from memory")
    tub = Source.from_memory(
        f"NEC {year} 680.71 (hydromassage bathtubs: an individual branch circuit and a readily accessible GFCI), "
        "from memory"
    )
    return {
        "pool-pump": ("pool pump motors", pump),
        "pool-pump-vfd": ("pool pump motors", pump),
        "hot-tub": ("spas and hot tubs", spa),
        "whirlpool-tub-pump": ("hydromassage bathtubs", tub),
    }


def _iec(key: str, label: str, *, bath: str, ev: str, sockets: Source, **extra: Any) -> Code:
    """An IEC-family code: 30 mA RCD additional protection for socket-outlets, every circuit of a room with a bath
    or shower, and EV charging points (the bath and EV clauses are cited from memory)."""
    bath_rule = Source.from_memory(f"{bath} (all circuits of a room with a bath or shower), from memory")
    return Code(
        key=key,
        label=label,
        family="iec",
        location_source=bath_rule,
        locations={"bathroom": LocationRule(Scope.ALL_CIRCUITS, bath_rule)},
        ev_source=Source.from_memory(f"{ev} (each charging point on an RCD), from memory"),
        socket_source=sockets,
        **extra,
    )


# NEC 2023 210.8(D): outlets supplying these appliances need GFCI protection (catalogue key → the rule's word).
NEC_2023_APPLIANCES = {
    "dishwasher": "dishwashers",
    "range-electric": "ranges",
    "wall-oven": "wall-mounted ovens",
    "cooktop-radiant": "counter-mounted cooking units",
    "induction-hob": "counter-mounted cooking units",
    "dryer": "clothes dryers",
    "heat-pump-dryer": "clothes dryers",
    "microwave": "microwave ovens",
    "sump-pump": "sump pumps",
    "vending-machine": "vending machines",
    "pressure-washer": "high-pressure spray washers",
    "drinking-water-cooler": "drinking-water coolers and bottle fill stations",
    "tire-inflation-machine": "tire inflation machines",
    "automotive-vacuum-machine": "automotive vacuum machines",
}
# The items NEC 2023 moved into Table 210.8(D) from 422.5(A) (NEC 2020): vending machines, high-pressure spray
# washers, drinking-water coolers, tire inflation and automotive vacuum machines.
NEC_2023_TABLE_ITEMS = Source.from_memory(
    "NEC 2023 Table 210.8(D) (vending machines, high-pressure spray washers, drinking-water coolers, tire "
    "inflation and automotive vacuum machines), from memory"
)
NEC_2020_422_5_A = Source.from_memory(
    "NEC 2020 422.5(A) (GFCI for vending machines, cord-and-plug-connected high-pressure spray washing machines, "
    "drinking water coolers, tire inflation and automotive vacuum machines), from memory"
)
NEC_422_5_KEYS = {
    "vending-machine": "vending machines",
    "pressure-washer": "high-pressure spray washing machines",
    "drinking-water-cooler": "drinking water coolers and bottle fill stations",
    "tire-inflation-machine": "tire inflation machines",
    "automotive-vacuum-machine": "automotive vacuum machines",
}

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

CODES: dict[str, Code] = {
    "nec-2020": _nec(
        2020,
        Scope.COUNTERTOP,
        {"dishwasher": "dishwashers", **NEC_422_5_KEYS},
        Source.from_memory("NEC 2020 210.8(D) (dishwasher outlets in dwelling units), from memory"),
        dict.fromkeys(NEC_422_5_KEYS, NEC_2020_422_5_A),
        NEC_2020_210_8_F,
    ),
    "nec-2023": _nec(
        2023,
        Scope.RECEPTACLES,
        NEC_2023_APPLIANCES,
        Source.published("NEC 2023 210.8(D)"),
        dict.fromkeys(NEC_422_5_KEYS, NEC_2023_TABLE_ITEMS),
        NEC_2023_210_8_F,
    ),
    "iec-60364": _iec(
        "iec-60364",
        "IEC 60364 (low-voltage installations)",
        bath="IEC 60364-7-701 701.411.3.3",
        ev="IEC 60364-7-722 722.531.2.101",
        sockets=Source.from_memory(
            "IEC 60364-4-41 411.3.3 and 415.1.1 (socket-outlets up to 32 A; the 32 A limit from memory)"
        ),
    ),
    "bs-7671": _iec(
        "bs-7671",
        "BS 7671:2018 (IET Wiring Regulations)",
        bath="BS 7671:2018 reg. 701.411.3.3",
        ev="BS 7671:2018 reg. 722.531.2.101",
        sockets=Source.published("BS 7671:2018 reg. 411.3.3 and 415.1.1"),
        lighting_source=Source.published(
            "BS 7671:2018 reg. 411.3.4 (AC final circuits supplying luminaires in domestic premises: additional "
            "protection by an RCD of IΔn 30 mA or less)"
        ),
        waveform_source=Source.published("BS 7671:2018 reg. 531.3.3; IEC 62423 (RCD types AC, A, F, B)"),
        type_ac_source=Source.from_memory(
            "BS 7671:2018+A2:2022 reg. 531.3.3 (Type AC only for fixed equipment known to have no DC component), "
            "from memory"
        ),
        budget_is_regulation=True,
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
