"""The compliance review: every rule with a case that triggers it and one that does not, each naming the rule's
source (standard, edition and clause, or common practice) in the test name or a comment.

Workbooks are built with XlsxWriter (tests/conftest.py) and read through the normal reader.
"""

from __future__ import annotations

import json
import re
from typing import Any

import pytest
from typer.testing import CliRunner

from leakbudget.cli.app import app
from leakbudget.compliance.rules import (
    GFCI_RUN_LIMIT_M,
    RULES,
    Finding,
    ReviewError,
    Severity,
    review,
    rule_description,
)
from leakbudget.errors import WorkbookError
from leakbudget.locations import classify_room
from leakbudget.provenance import Kind
from leakbudget.settings import SWITCH_ON_FACTOR_DEFAULT as SWITCH_ON_FACTOR
from leakbudget.workbook.read import read_project

runner = CliRunner()

CIRCUITS = [
    "Circuit",
    "Device",
    "RCD type",
    "Voltage",
    "Frequency",
    "System",
    "Rating",
    "Cable length",
    "Rooms",
    "Shared neutral",
    "Neutral-earth bond",
    "Purpose",
]
LOADS = [
    "Load",
    "Circuit",
    "Appliance",
    "Quantity",
    "Leakage",
    "Power",
    "Room",
    "Waveform",
    "Neutral-earth bond",
    "Connection",
]


def circuit(
    cid: str,
    device: str,
    rooms: str | None = None,
    *,
    rcd_type: str | None = None,
    us: bool = True,
    system: str = "single",
    rating: float = 20,
    length: float | str | None = None,
    shared: str | None = None,
    bond: str | None = None,
    purpose: str | None = None,
) -> list[Any]:
    v, f = (120, 60) if us else (230, 50)
    return [cid, device, rcd_type, v, f, system, rating, length, rooms, shared, bond, purpose]


def load(
    name: str,
    cid: str | None,
    appliance: str | None = None,
    leakage: str | None = None,
    *,
    power: float | str | None = None,
    room: str | None = None,
    waveform: str | None = None,
    quantity: int = 1,
    bond: str | None = None,
    connection: str | None = None,
) -> list[Any]:
    return [name, cid, appliance, quantity, leakage, power, room, waveform, bond, connection]


@pytest.fixture
def plan(make_workbook):
    count = iter(range(1000))

    def build(
        circuits: list[list[Any]],
        loads: list[list[Any]],
        settings: list[list[Any]] | None = None,
        locations: list[list[Any]] | None = None,
    ):
        sheets: dict[str, list[list[Any]]] = {"Circuits": [CIRCUITS, *circuits], "Loads": [LOADS, *loads]}
        if settings:
            sheets["Settings"] = [["Setting", "Value"], *settings]
        if locations:
            sheets["Locations"] = [["Room name", "Location kind"], *locations]
        return read_project(make_workbook(sheets, f"plan{next(count)}.xlsx"))

    return build


def found(project, rule: str, code: str | None = None) -> list[Finding]:
    return [f for f in review(project, code).findings if f.rule == rule]


# --------------------------------------------------------------------------------------------- code choice


def test_code_defaults_by_supply_frequency(plan):
    us = plan([circuit("K1", "gfci-a", "Kitchen")], [load("Kettle", "K1", "kettle")])
    iec = plan([circuit("K1", "rcd-30", "Kitchen", us=False)], [load("Kettle", "K1", "kettle")])
    assert review(us).code.key == "nec-2023"
    assert review(iec).code.key == "iec-60364"
    assert review(us).code_source.kind is Kind.DEFAULT


def test_code_setting_and_option(plan):
    p = plan(
        [circuit("K1", "rcd-30", "Kitchen", us=False)], [load("Kettle", "K1", "kettle")], settings=[["Code", "BS-7671"]]
    )
    rv = review(p)
    assert rv.code.key == "bs-7671" and rv.code_source.kind is Kind.USER
    assert review(p, "nec-2020").code.key == "nec-2020"  # the option wins over the setting
    with pytest.raises(ReviewError, match="'nec-2017' is not a code"):
        review(p, "nec-2017")


# --------------------------------------------------------------------------------------------- room table


@pytest.mark.parametrize(
    "room, kinds",
    [
        ("Main bath", ("bathroom",)),
        ("Guest Bathrooms", ("bathroom",)),  # plural
        ("Garage bath", ("garage", "bathroom")),  # two kinds named
        ("Wet bar", ("sink-area",)),  # the longer match wins over 'wet'
        ("Bedroom balcony", ("outdoor",)),  # dry is dropped beside another kind
        ("Powder room", ("half-bath",)),
        ("Crawl-space", ("crawl-space",)),
        ("Snug", ()),
    ],
)
def test_room_names_classify_through_the_built_in_table(room, kinds):
    assert classify_room(room).kinds == kinds


def test_users_locations_rows_come_first(plan):
    p = plan(
        [circuit("U1", "none", "Utility, Snug")],
        [load("Iron", "U1", "iron")],
        locations=[["utility", "damp"], ["Snug", "dry"]],
    )
    assert classify_room("Utility", p.location_rows).kinds == ("damp",)  # built-in says laundry
    assert classify_room("Snug", p.location_rows).kinds == ("dry",)
    assert "your sheet 'Locations' row 2" in classify_room("Utility", p.location_rows).matches[0].origin


def test_locations_sheet_with_unknown_kind_names_the_cell(plan):
    with pytest.raises(
        WorkbookError,
        match=r"sheet 'Locations', row 2, column 'Location kind', cell B2: 'spa' is "
        r"not one of bathroom",
    ):
        plan([circuit("U1", "none", "Snug")], [load("Iron", "U1", "iron")], locations=[["Snug", "spa"]])


# --------------------------------------------------------------------------------------------- location


def test_location_nec_2023_210_8_A_bathroom_receptacle_without_gfci_is_an_error(plan):
    p = plan([circuit("B1", "none", "Main bath")], [load("Hair dryer", "B1", "hair-dryer")])
    (f,) = found(p, "location")
    assert (f.severity, f.circuit, str(f.source)) == (Severity.ERROR, "B1", "NEC 2023 210.8(A)")
    assert f.message == (
        "B1 serves Main bath (bathroom): NEC 2023 210.8(A) requires GFCI protection for personnel (Class A) for "
        "receptacles there; B1 has no ground-fault protection: fit a Class A GFCI (gfci-a)."
    )


def test_location_nec_2023_210_8_A_satisfied_by_a_class_a_gfci(plan):
    p = plan([circuit("B1", "gfci-a", "Main bath")], [load("Hair dryer", "B1", "hair-dryer")])
    assert found(p, "location") == []


def test_location_nec_2023_210_8_A_wrong_kind_of_device(plan):
    # UL 943C special-purpose GFCIs (20 mA) are not personnel protection (Class A, UL 943).
    p = plan([circuit("G1", "spgfci", "Garage")], [load("Compressor", "G1", "air-compressor")])
    (f,) = found(p, "location")
    assert f.severity is Severity.ERROR and "has spgfci (Special-purpose GFCI Class C/D/E), not that kind" in f.message


def test_location_nec_210_8_A_covers_receptacles_so_fixed_wiring_is_info(plan):
    p = plan([circuit("B1", "none", "Main bath")], [load("Towel warmer", "B1", "towel-warmer")])  # fixed
    (f,) = found(p, "location")
    assert f.severity is Severity.INFO and "all fixed-wired" in f.message


def test_location_kitchen_nec_2020_countertop_only_versus_nec_2023_all_receptacles(plan):
    # NEC 2020 210.8(A): kitchen receptacles serving countertops; NEC 2023 210.8(A): all kitchen receptacles.
    p = plan([circuit("K1", "none", "Kitchen")], [load("Fridge", "K1", "refrigerator")])
    (old,) = found(p, "location", "nec-2020")
    (new,) = found(p, "location", "nec-2023")
    assert (old.severity, str(old.source)) == (Severity.WARNING, "NEC 2020 210.8(A)")
    assert (new.severity, str(new.source)) == (Severity.ERROR, "NEC 2023 210.8(A)")
    assert "countertop receptacles" in old.message


def test_location_iec_701_every_circuit_of_a_bathroom_needs_30ma_rcd(plan):
    # BS 7671:2018+A2:2022 reg. 701.411.3.3: every circuit serving a location with a bath or shower on a 30 mA RCD;
    # IEC 60364-7-701 numbers the same requirement 701.415.1 (edition 2006; not confirmed for 2019, from memory).
    fan = [load("Towel warmer", "B1", "towel-warmer")]  # fixed-wired: still covered
    for device, expected in (("none", 1), ("rcd-100", 1), ("rcd-30", 0), ("rcd-10", 0)):
        p = plan([circuit("B1", device, "En suite", us=False)], fan)
        hits = found(p, "location", "bs-7671")
        assert len(hits) == expected, device
        assert all(h.severity is Severity.ERROR for h in hits)
        assert all(str(h.source).startswith("BS 7671:2018+A2:2022 reg. 701.411.3.3") for h in hits)
        assert all(h.source.kind is Kind.PUBLISHED for h in hits)
        iec = found(p, "location", "iec-60364")
        assert len(iec) == expected, device
        assert all(str(h.source).startswith("IEC 60364-7-701:2019 701.415.1") for h in iec)
        assert all(h.source.kind is Kind.FROM_MEMORY for h in iec)


def test_location_dry_room_needs_nothing(plan):
    p = plan([circuit("O1", "none", "Office")], [load("PC", "O1", "desktop-pc")])
    assert found(p, "location") == [] and found(p, "room-unclassified") == []


# --------------------------------------------------------------------------------------------- unclassified


def test_room_unclassified_is_reported_and_a_locations_row_cures_it(plan):
    circuits = [circuit("S1", "none", "Snug"), circuit("S2", "gfci-a", "Snug")]
    loads = [load("Lamp", "S1", "monitor"), load("TV", "S2", "monitor")]
    hits = found(plan(circuits, loads), "room-unclassified")
    assert [(h.circuit, h.severity) for h in hits] == [("S1", Severity.WARNING), ("S2", Severity.INFO)]
    assert hits[0].message.startswith("Room 'Snug' on S1 is not in the room table")
    assert str(hits[0].source) == "NEC 2023 210.8(A)"  # the rule left unchecked
    assert found(plan(circuits, loads, locations=[["snug", "dry"]]), "room-unclassified") == []


# --------------------------------------------------------------------------------------------- pools and spas


def test_pool_spa_nec_680_pump_hot_tub_and_hydromassage_tub_need_gfci(plan):
    # NEC 2023 680.21(C) pool pump motors (up to 150 V to ground, 60 A), 680.44 spas and hot tubs, 680.71
    # hydromassage bathtubs; clauses from memory.
    p = plan(
        [
            circuit("PP", "none", "Pool house", system="split", rating=30),
            circuit("HT", "none", "Deck", system="split", rating=50),
            circuit("WT", "none", "Main bath"),
        ],
        [
            load("Pool pump", "PP", "pool-pump"),
            load("Spa", "HT", "hot-tub"),
            load("Jets", "WT", "whirlpool-tub-pump"),
        ],
    )
    hits = found(p, "pool-spa", "nec-2023")
    assert [(h.load, str(h.source).split(" (")[0]) for h in hits] == [
        ("Pool pump", "NEC 2023 680.21(C)"),
        ("Spa", "NEC 2023 680.44"),
        ("Jets", "NEC 2023 680.71"),
    ]
    assert all(h.severity is Severity.ERROR and h.source.kind is Kind.FROM_MEMORY for h in hits)
    assert sorted(h.load for h in found(p, "pool-spa", "bs-7671")) == ["Pool pump", "Spa"]  # 702; the tub is 701's


def test_pool_spa_iec_60364_7_702_pool_pump_and_hot_tub_need_a_30_ma_rcd(plan):
    # IEC 60364-7-702:2010 702.410.3.4 / 702.55.4 (clause numbers from memory): equipment in zones 1 and 2 of a pool
    # basin on an RCD of IΔn 30 mA or less. A pump may stand in a plant room outside the zones: a warning that says
    # so; a hot tub's equipment belongs to its basin: an error.
    p = plan(
        [
            circuit("PP", "none", "Plant room", us=False, rating=16),
            circuit("HT", "rcd-100", "Garden", us=False, rating=32),
        ],
        [load("Pool pump", "PP", "pool-pump-vfd"), load("Spa", "HT", "hot-tub")],
    )
    pump, spa = sorted(found(p, "pool-spa", "iec-60364"), key=lambda f: f.load or "")
    assert (pump.load, pump.severity, spa.load, spa.severity) == (
        "Pool pump",
        Severity.WARNING,
        "Spa",
        Severity.ERROR,
    )
    assert "zone 1 or 2" in pump.message and "rcd-100" in spa.message
    assert str(pump.source).startswith("IEC 60364-7-702:2010 702.410.3.4 and 702.55.4")
    assert all(f.source.kind is Kind.FROM_MEMORY for f in (pump, spa))
    assert str(found(p, "pool-spa", "bs-7671")[0].source).startswith(
        "BS 7671:2018 regs. 702.410.3.4 and 702.55.4 (Section 702"
    )


def test_pool_spa_iec_60364_7_702_not_raised_with_a_30_ma_rcd(plan):
    ok = plan(
        [circuit("PP", "rcd-30", "Plant room", us=False, rcd_type="F"), circuit("HT", "rcd-10", "Garden", us=False)],
        [load("Pool pump", "PP", "pool-pump-vfd"), load("Spa", "HT", "hot-tub")],
    )
    assert found(ok, "pool-spa", "iec-60364") == [] and found(ok, "pool-spa", "bs-7671") == []


def test_pool_spa_nec_680_not_raised_with_a_gfci_or_above_60_a(plan):
    ok = plan([circuit("PP", "gfci-a", "Pool house", system="split", rating=30)], [load("Pump", "PP", "pool-pump")])
    assert found(ok, "pool-spa") == []
    big = plan([circuit("PP", "none", "Pool house", system="split", rating=70)], [load("Pump", "PP", "pool-pump")])
    assert found(big, "pool-spa") == []  # 680.21(C) covers circuits up to 60 A


# --------------------------------------------------------------------------------------------- occupancy


def test_occupancy_other_uses_nec_210_8_B_and_drops_the_dwelling_only_rules(plan):
    # NEC 2023 210.8(B) (other than dwelling units, list from memory): a shop's bathroom receptacles need GFCI, as
    # in a dwelling, but 210.8(F) (outdoor outlets of dwellings) and BS 7671 reg. 411.3.4 (domestic premises) do not
    # apply.
    circuits = [
        circuit("B1", "none", "Staff washroom"),
        circuit("HP", "none", "Back yard", system="split", rating=30),
        circuit("D1", "none", "Stockroom"),
    ]
    loads = [
        load("Hand dryer", "B1", "hair-dryer"),
        load("Heat pump", "HP", "heat-pump-inverter"),
        load("Dishwasher", "D1", "dishwasher"),
    ]
    shop = plan(circuits, loads, settings=[["Occupancy", "other"]])
    hit, outdoors = found(shop, "location", "nec-2023")  # the washroom (plug: error), the yard (fixed: a note)
    assert (hit.severity, outdoors.severity) == (Severity.ERROR, Severity.INFO)
    assert hit.circuit == "B1" and str(hit.source).startswith("NEC 2023 210.8(B)") and "210.8(B)" in hit.message
    assert hit.source.kind is Kind.PUBLISHED
    assert found(shop, "outdoor-outlet", "nec-2023") == []
    # NEC 2020 422.5(A)(7) and NEC 2023 210.8(D)(7): dishwashers of every occupancy, not only of dwelling units
    assert [f.load for f in found(shop, "appliance-outlet", "nec-2020")] == ["Dishwasher"]
    assert [f.load for f in found(shop, "appliance-outlet", "nec-2023")] == ["Dishwasher"]
    assert found(shop, "room-unclassified", "nec-2023") == []  # stockroom and washroom are in the room table
    assert review(shop, "nec-2023").label == "NEC 2023 (NFPA 70), other than dwelling units"
    home = plan(circuits, loads)  # the default: a dwelling
    assert review(home, "nec-2023").label == "NEC 2023 (NFPA 70), dwelling units"
    assert str(found(home, "location", "nec-2023")[0].source) == "NEC 2023 210.8(A)"
    assert len(found(home, "outdoor-outlet", "nec-2023")) == 1
    lights = [circuit("L1", "none", "Shop floor", us=False, rating=6, purpose="lighting")]
    lamps = [load("Downlights", "L1", None, "0.5 mA")]
    assert found(plan(lights, lamps, settings=[["Occupancy", "other"]]), "lighting", "bs-7671") == []
    assert len(found(plan(lights, lamps), "lighting", "bs-7671")) == 1


def test_occupancy_setting_takes_dwelling_or_other(plan):
    with pytest.raises(WorkbookError, match="'hotel' is not one of dwelling, other"):
        plan(
            [circuit("B1", "none", "Main bath")], [load("Fan", "B1", None, "0.2 mA")], settings=[["Occupancy", "hotel"]]
        )


@pytest.mark.parametrize(
    "room", ["Print room", "Comms room", "Meeting room", "Shop floor", "Store room", "Office", "Commercial kitchen"]
)
def test_rooms_of_other_occupancies_are_classified(room):
    assert classify_room(room).classified


@pytest.mark.parametrize(
    "room, kinds",
    [
        # words people use for the locations NEC 2023 210.8(B) lists, and for the rooms around them
        ("Roof plant", ("rooftop",)),
        ("Rooftop", ("rooftop",)),
        ("Roof space", ("dry",)),  # a loft, indoors
        ("Staff locker room", ("locker-room",)),
        ("Changing rooms", ("locker-room",)),
        ("Service bay 2", ("garage",)),
        ("Repair bay", ("garage",)),
        ("Car showroom", ("dry",)),  # vehicle showrooms are outside 210.8(B)'s garages item
        ("Unfinished basement", ("unfinished-basement",)),
        ("Basement, unfinished", ("unfinished-basement",)),
        ("Break room", ("sink-area",)),
        ("Janitor closet", ("sink-area",)),
        ("Sluice room", ("sink-area",)),
        ("Wash bay", ("damp",)),
        ("Walk-in cooler", ("damp",)),
        ("Laundromat", ("laundry",)),
        ("Fish room", ("aquarium",)),
        ("Bait well", ("aquarium",)),
        ("Boat shed", ("boathouse",)),
        ("Airing cupboard", ("dry",)),
        ("Plant room", ("dry",)),
    ],
)
def test_room_words_for_other_occupancies(room, kinds):
    assert classify_room(room).kinds == kinds


OTHER = [["Occupancy", "other"]]


@pytest.mark.parametrize(
    "room, settings, code, severity",
    [
        # NEC 2023 210.8(B) (other than dwelling units): receptacles in these locations need a Class A GFCI.
        ("Rooftop", OTHER, "nec-2023", Severity.ERROR),  # rooftops
        ("Service bay 2", OTHER, "nec-2023", Severity.ERROR),  # garages, service bays
        ("Crawl space", OTHER, "nec-2023", Severity.ERROR),  # crawl spaces at or below grade
        ("Unfinished basement", OTHER, "nec-2023", Severity.ERROR),  # unfinished areas of basements
        ("Basement store", OTHER, "nec-2023", Severity.WARNING),  # only its unfinished areas: the room may be finished
        ("Break room", OTHER, "nec-2023", Severity.ERROR),  # sinks, food or beverage preparation
        ("Wash bay", OTHER, "nec-2023", Severity.ERROR),  # indoor damp and wet locations
        ("Laundromat", OTHER, "nec-2023", Severity.ERROR),  # laundry areas
        ("Staff locker room", OTHER, "nec-2023", Severity.WARNING),  # locker rooms *with showering facilities*
        ("Locker room showers", OTHER, "nec-2023", Severity.ERROR),  # ... and it has them (a bathroom too)
        ("Fish room", OTHER, "nec-2023", Severity.ERROR),  # aquariums and bait wells: new in NEC 2023, item (13)
        ("Fish room", OTHER, "nec-2020", None),  # not in NEC 2020 210.8(B)
        ("Fish room", None, "nec-2023", None),  # not in 210.8(A) for dwelling units
        ("Basement store", None, "nec-2023", Severity.ERROR),  # NEC 2023 210.8(A): every basement of a dwelling
        ("Roof deck", None, "nec-2023", Severity.ERROR),  # 210.8(A): outdoors, and a rooftop is outdoors
        ("Boat shed", None, "nec-2023", Severity.ERROR),  # 210.8(A): boathouses
        ("Car showroom", OTHER, "nec-2023", None),  # vehicle showrooms are excepted from the garages item
        ("Changing room", None, "bs-7671", Severity.WARNING),  # BS 7671 701: a location with showers, if it has them
        ("Changing room showers", None, "bs-7671", Severity.ERROR),
    ],
)
def test_location_room_kinds_of_nec_210_8_B_and_their_conditions(plan, room, settings, code, severity):
    us = code.startswith("nec")
    kettle = [load("Kettle", "R1", "kettle")]  # plug-connected: the circuit feeds receptacles
    p = plan([circuit("R1", "none", room, us=us)], kettle, settings=settings)
    hits = found(p, "location", code)
    assert [h.severity for h in hits] == ([severity] if severity else [])
    assert found(p, "room-unclassified", code) == []
    if severity is Severity.WARNING:
        assert "if it has showers" in hits[0].message or "unfinished" in hits[0].message
    if hits and settings:
        assert str(hits[0].source).startswith(f"NEC {code[-4:]} 210.8(B) (") and hits[0].source.kind is Kind.PUBLISHED
    device = "gfci-a" if us else "rcd-30"
    protected = plan([circuit("R1", device, room, us=us)], kettle, settings=settings)
    assert found(protected, "location", code) == []  # the non-triggering case: the device the code asks for


def test_outdoor_outlet_nec_2023_210_8_F_rooftop_equipment_of_a_dwelling(plan):
    # NEC 2023 210.8(F): every outdoor outlet of a dwelling, hard-wired included; a rooftop is outdoors.
    roof = plan(
        [circuit("HP", "none", "Rooftop", system="split", rating=30)], [load("Heat pump", "HP", "heat-pump-inverter")]
    )
    (hit,) = found(roof, "outdoor-outlet", "nec-2023")
    assert hit.severity is Severity.ERROR and found(roof, "location", "nec-2023") == []
    loft = plan(
        [circuit("HP", "none", "Roof space", system="split", rating=30)], [load("Fan", "HP", "bath-exhaust-fan")]
    )
    assert found(loft, "outdoor-outlet", "nec-2023") == []  # a roof space is indoors


# --------------------------------------------------------------------------------------------- appliance outlets


def test_appliance_outlet_nec_2023_210_8_D_microwave_and_dishwasher(plan):
    # NEC 2023 210.8(D)(12) microwave ovens, (7) dishwashers; NEC 2020 210.8(D) sends the reader to 422.5(A), whose
    # list has dishwashers, item (7), but no microwave ovens.
    p = plan(
        [circuit("D1", "none", "Dining room")],
        [load("Microwave", "D1", "microwave"), load("Dishwasher", "D1", "dishwasher"), load("Lamp", "D1", "monitor")],
    )
    assert [(f.load, str(f.source)) for f in found(p, "appliance-outlet", "nec-2023")] == [
        ("Microwave", "NEC 2023 210.8(D)(12) (microwave ovens)"),
        ("Dishwasher", "NEC 2023 210.8(D)(7) (dishwashers)"),
    ]
    assert all(f.source.kind is Kind.PUBLISHED for f in found(p, "appliance-outlet", "nec-2023"))
    assert [(f.load, str(f.source)) for f in found(p, "appliance-outlet", "nec-2020")] == [
        ("Dishwasher", "NEC 2020 210.8(D) and 422.5(A)(7) (dishwashers)")
    ]
    assert found(p, "appliance-outlet", "bs-7671") == []


def test_appliance_outlet_satisfied_by_gfci(plan):
    p = plan([circuit("D1", "gfci-a", "Dining room")], [load("Microwave", "D1", "microwave")])
    assert found(p, "appliance-outlet") == []


def test_appliance_outlet_nec_2023_210_8_D_list_vending_machine_and_pressure_washer(plan):
    # NEC 2023 210.8(D) is a numbered list (not a table): (5) vending machines, (3) high-pressure spray washing
    # machines; NEC 2020 has them in 422.5(A)(5) and (3), and 422.5(B)(3)-(5) accept a GFCI in the appliance's plug,
    # cord or the appliance itself.
    p = plan(
        [circuit("S1", "none", "Shop")],
        [load("Vending", "S1", "vending-machine"), load("Washer", "S1", "pressure-washer")],
    )
    hits = found(p, "appliance-outlet", "nec-2023")
    assert [(h.load, str(h.source).split(" (")[0]) for h in hits] == [
        ("Vending", "NEC 2023 210.8(D)(5)"),
        ("Washer", "NEC 2023 210.8(D)(3)"),
    ]
    assert all(h.source.kind is Kind.PUBLISHED for h in hits)
    assert "high-pressure spray washing machines" in hits[1].message and "branch circuit or outlet" in hits[1].message
    old = found(p, "appliance-outlet", "nec-2020")
    assert [(h.load, str(h.source).split(" (")[0]) for h in old] == [
        ("Vending", "NEC 2020 210.8(D) and 422.5(A)(5)"),
        ("Washer", "NEC 2020 210.8(D) and 422.5(A)(3)"),
    ]
    assert all("422.5(B)(3)-(5)" in h.message for h in old)
    machines = [
        load("Cooler", "S1", "drinking-water-cooler"),
        load("Air", "S1", "tire-inflation-machine"),
        load("Vac", "S1", "automotive-vacuum-machine"),
    ]
    forecourt = plan([circuit("S1", "none", "Shop")], machines)
    for code in ("nec-2023", "nec-2020"):
        assert [h.load for h in found(forecourt, "appliance-outlet", code)] == ["Cooler", "Air", "Vac"]
    ok = plan([circuit("S1", "gfci-a", "Shop")], [load("Vending", "S1", "vending-machine")])
    assert found(ok, "appliance-outlet") == []


def test_appliance_outlet_nec_2020_spray_washers_cord_and_plug_only_nec_2023_hard_wired_too(plan):
    # NEC 2020 422.5(A)(3): cord-and-plug-connected high-pressure spray washing machines; NEC 2023 210.8(D)(3): the
    # branch circuit or outlet supplying them, hard-wired or not.
    def hits(connection, code):
        washer = [load("Washer", "S1", "pressure-washer", connection=connection)]
        return found(plan([circuit("S1", "none", "Yard")], washer), "appliance-outlet", code)

    assert hits("hard-wired", "nec-2020") == []
    assert [h.severity for h in hits("plug", "nec-2020")] == [Severity.ERROR]
    assert [h.severity for h in hits("hard-wired", "nec-2023")] == [Severity.ERROR]


def test_appliance_outlet_nec_2020_422_5_A_sump_pumps_and_commercial_dishwashers(plan):
    # NEC 2020 422.5(A)(6) sump pumps and (7) dishwashers (a commercial one too); NEC 2023 210.8(D)(6) and (7).
    p = plan(
        [circuit("S1", "none", "Stockroom")],
        [load("Sump", "S1", "sump-pump"), load("Glasswasher", "S1", "commercial-dishwasher")],
        settings=OTHER,
    )
    for code, items in (("nec-2020", ("422.5(A)(6)", "422.5(A)(7)")), ("nec-2023", ("210.8(D)(6)", "210.8(D)(7)"))):
        hits = found(p, "appliance-outlet", code)
        assert [h.load for h in hits] == ["Sump", "Glasswasher"]
        assert all(item in str(h.source) for item, h in zip(items, hits, strict=True))


@pytest.mark.parametrize(
    "voltage, rating, expected",
    [
        # NEC 2023 210.8(D): appliances rated 150 V or less to ground and 60 A or less.
        (120, 50, 1),
        (120, 60, 1),
        (120, 70, 0),  # above 60 A
        (277, 30, 0),  # above 150 V to ground
    ],
)
def test_appliance_outlet_nec_2023_210_8_D_limits(plan, voltage, rating, expected):
    row = circuit("R1", "none", "Kitchen", system="split", rating=rating)
    row[3] = voltage
    hits = found(plan([row], [load("Range", "R1", "range-electric")]), "appliance-outlet", "nec-2023")
    assert len(hits) == expected


# --------------------------------------------------------------------------------------------- outdoor outlets


def test_outdoor_outlet_nec_2023_210_8_F_hard_wired_heat_pump_and_pool_pump(plan):
    # NEC 2023 210.8(F): outdoor outlets of dwellings, hard-wired included, single-phase up to 150 V to ground and
    # 50 A; Exception No. 2 (listed HVAC equipment) expired 1 September 2026.
    p = plan(
        [circuit("HP", "none", "Back yard", system="split", rating=30)],
        [load("Heat pump", "HP", "heat-pump-inverter"), load("Pool pump", "HP", "pool-pump")],
    )
    (hit,) = found(p, "outdoor-outlet", "nec-2023")
    assert hit.severity is Severity.ERROR and hit.source.kind is Kind.PUBLISHED
    assert str(hit.source).startswith("NEC 2023 210.8(F)") and "1 September 2026" in str(hit.source)
    assert "Heat pump, Pool pump" in hit.message and "ran out on 1 September 2026" in hit.message
    assert found(p, "location", "nec-2023") == []  # no 210.8(A) receptacle note beside the 210.8(F) error
    # NEC 2020 210.8(F) (from memory)
    (old,) = found(p, "outdoor-outlet", "nec-2020")
    assert old.source.kind is Kind.FROM_MEMORY and "1 January 2023" in old.message
    assert found(p, "outdoor-outlet", "bs-7671") == []


@pytest.mark.parametrize(
    "device, system, voltage_rating, loads, expected",
    [
        ("gfci-a", "split", 30, [("Pool pump", "pool-pump")], 0),  # protected
        ("none", "split", 60, [("Pool pump", "pool-pump")], 0),  # above 50 A
        ("none", "three", 30, [("Pool pump", "pool-pump")], 0),  # not single-phase
        ("none", "single", 20, [("Floodlights", "outdoor-led-floodlight")], 0),  # lighting outlets excepted
        ("none", "single", 20, [("Pond pump", "pond-pump")], 0),  # a receptacle: the location rule, 210.8(A)
        ("none", "single", None, [("Pool pump", "pool-pump")], 1),  # no Rating: a warning
    ],
)
def test_outdoor_outlet_nec_2023_210_8_F_limits(plan, device, system, voltage_rating, loads, expected):
    row = circuit("P1", device, "Patio", system=system, rating=voltage_rating)
    hits = found(plan([row], [load(n, "P1", k) for n, k in loads]), "outdoor-outlet", "nec-2023")
    assert len(hits) == expected
    if hits:
        assert hits[0].severity is Severity.WARNING and "Rating is not given" in hits[0].message


# --------------------------------------------------------------------------------------------- connection


def test_connection_column_overrides_the_catalogue_for_receptacle_rules(plan):
    # NEC 2023 210.8(A) covers receptacles: a hard-wired load is only a note, a plug-connected one an error; with
    # neither the Connection column nor a catalogue row, the finding says the connection is unknown.
    def location(connection):
        p = plan([circuit("B1", "none", "Main bath")], [load("Fan", "B1", None, "0.2 mA", connection=connection)])
        (hit,) = found(p, "location", "nec-2023")
        return hit

    assert location(None).severity is Severity.WARNING and "Connection column" in location(None).message
    assert location("plug").severity is Severity.ERROR
    assert location("hard-wired").severity is Severity.INFO
    # the catalogue's plug-connected hair dryer, said to be hard-wired: only a note
    p = plan([circuit("B1", "none", "Main bath")], [load("Dryer", "B1", "hair-dryer", connection="Hard-wired")])
    assert [f.severity for f in found(p, "location", "nec-2023")] == [Severity.INFO]
    # BS 7671:2018 reg. 411.3.3: a hard-wired load feeds no socket-outlet
    p = plan([circuit("C1", "none", "Lounge", us=False)], [load("Heater", "C1", "kettle", connection="hard-wired")])
    assert found(p, "socket-outlets", "bs-7671") == []


def test_connection_column_takes_plug_or_hard_wired(plan):
    with pytest.raises(WorkbookError, match=r"column 'Connection', cell J2: 'wireless' is not plug or hard-wired"):
        plan([circuit("B1", "none", "Main bath")], [load("Fan", "B1", None, "0.2 mA", connection="wireless")])


# --------------------------------------------------------------------------------------------- EV charging


def test_ev_charging_nec_625_54_covers_receptacles(plan):
    p = plan(
        [circuit("E1", "none", "Driveway"), circuit("E2", "none", "Driveway", rating=50)],
        [load("Cord set", "E1", "ev-charger-level-1"), load("Wall unit", "E2", "ev-charger-level-2")],
    )
    hits = found(p, "ev-charging")
    assert [(h.load, str(h.source)) for h in hits] == [("Cord set", "NEC 2023 625.54")]  # the fixed unit: none
    assert (
        found(
            plan([circuit("E1", "gfci-a", "Driveway")], [load("Cord set", "E1", "ev-charger-level-1")]), "ev-charging"
        )
        == []
    )


def test_ev_charging_iec_722_needs_an_rcd(plan):
    # IEC 60364-7-722:2018 722.531.3.101 (clause from memory): each charging point on an RCD of 30 mA or less.
    loads = [load("Wallbox", "E1", "ev-charger-wallbox-230v")]
    (hit,) = found(plan([circuit("E1", "none", "Garage", us=False, rating=40)], loads), "ev-charging", "iec-60364")
    assert str(hit.source).startswith("IEC 60364-7-722:2018 722.531.3.101") and hit.severity is Severity.ERROR
    assert hit.source.kind is Kind.FROM_MEMORY
    assert (
        found(
            plan([circuit("E1", "rcd-30", "Garage", us=False, rcd_type="B", rating=40)], loads),
            "ev-charging",
            "iec-60364",
        )
        == []
    )


def test_ev_charging_bs_7671_a2_722_531_3_101_each_point_individually_on_type_a_f_or_b(plan, make_workbook):
    # BS 7671:2018+A2:2022 reg. 722.531.3.101: each charging point protected individually by an RCD of Type A, F or
    # B, IΔn 30 mA or less.
    loads = [load("Wallbox", "E1", "ev-charger-wallbox-230v")]

    def ev(rcd_type, quantity=1):
        wallbox = [load("Wallbox", "E1", "ev-charger-wallbox-230v", quantity=quantity)]
        p = plan([circuit("E1", "rcd-30", "Garage", us=False, rcd_type=rcd_type, rating=40)], wallbox)
        return found(p, "ev-charging", "bs-7671")

    assert ev("A") == []
    (ac,) = ev("AC")
    assert ac.severity is Severity.ERROR and "Type AC" in ac.message
    assert str(ac.source).startswith("BS 7671:2018+A2:2022 reg. 722.531.3.101") and ac.source.kind is Kind.PUBLISHED
    (two,) = ev("A", quantity=2)
    assert "2 charging points share" in two.message
    from tests.test_protection import CIRCUITS as TREE_CIRCUITS
    from tests.test_protection import LOADS as TREE_LOADS
    from tests.test_protection import PROTECTION

    board = make_workbook(
        {
            "Protection": [PROTECTION, ["RCD1", "rcd-30", "A", None, 63, "Consumer unit", "single", None]],
            "Circuits": [
                TREE_CIRCUITS,
                ["E1", "none", 230, 50, "single", 32, "Garage", "RCD1", None, "dedicated"],
                ["S1", "none", 230, 50, "single", 32, "Lounge", "RCD1", None, "sockets"],
            ],
            "Loads": [
                TREE_LOADS,
                ["Wallbox", "E1", "ev-charger-wallbox-230v", 1, None, None, "Garage", None],
                ["Lamp", "S1", None, 1, "0.2 mA", None, "Lounge", None],
            ],
        },
        "ev-board.xlsx",
    )
    (shared,) = [f for f in review(read_project(board), "bs-7671").findings if f.rule == "ev-charging"]
    assert shared.severity is Severity.ERROR and "together with other circuits (S1), not individually" in shared.message
    assert found(plan([circuit("E1", "none", "Garage", us=False, rating=40)], loads), "ev-charging", "nec-2023") == []


# --------------------------------------------------------------------------------------------- socket-outlets


def test_socket_outlets_bs_7671_411_3_3(plan):
    # BS 7671:2018+A2:2022 reg. 411.3.3 / 415.1.1: socket-outlets up to 32 A need an RCD of IΔn ≤ 30 mA (A2 changed
    # 411.3.3, so it is cited with the amendment).
    kettle = [load("Kettle", "C1", "kettle")]
    (hit,) = found(plan([circuit("C1", "none", "Kitchen", us=False)], kettle), "socket-outlets", "bs-7671")
    assert hit.severity is Severity.ERROR and hit.source.kind is Kind.PUBLISHED
    assert str(hit.source).startswith("BS 7671:2018+A2:2022 reg. 411.3.3 and 415.1.1 (")
    assert "BS 7671:2018+A2:2022 reg. 411.3.3 and 415.1.1 requires" in hit.message
    assert found(plan([circuit("C1", "rcd-30", "Kitchen", us=False)], kettle), "socket-outlets", "bs-7671") == []
    assert (
        found(plan([circuit("C1", "none", "Kitchen", us=False, rating=40)], kettle), "socket-outlets", "bs-7671") == []
    )  # above 32 A
    heater = [load("Water heater", "C1", "storage-water-heater")]  # fixed-wired: no socket-outlet
    assert found(plan([circuit("C1", "none", "Kitchen", us=False)], heater), "socket-outlets", "bs-7671") == []


def test_socket_outlets_unknown_connection_is_a_warning(plan):
    p = plan([circuit("C1", "rcd-100", "Kitchen", us=False)], [load("Something", "C1", None, "0.4 mA")])
    (hit,) = found(p, "socket-outlets", "iec-60364")
    assert hit.severity is Severity.WARNING and hit.source.kind is Kind.FROM_MEMORY  # 32 A limit from memory


# --------------------------------------------------------------------------------------------- lighting


def test_lighting_bs_7671_411_3_4_domestic_lighting_circuit_needs_a_30_ma_rcd(plan):
    # BS 7671:2018 reg. 411.3.4: AC final circuits supplying luminaires in domestic premises need 30 mA RCD
    # additional protection; the socket-outlet rule (411.3.3) no longer speaks for a lighting circuit.
    lights = [load("Downlights", "L1", None, "0.5 mA")]
    p = plan([circuit("L1", "none", "Hall", us=False, rating=6, purpose="lighting")], lights)
    (hit,) = found(p, "lighting", "bs-7671")
    assert hit.severity is Severity.ERROR and str(hit.source).startswith("BS 7671:2018 reg. 411.3.4")
    assert hit.source.kind is Kind.PUBLISHED and "is a lighting circuit" in hit.message
    assert found(p, "socket-outlets", "bs-7671") == []
    # a luminaire row on a mixed circuit counts too
    mixed = plan([circuit("M1", "none", "Hall", us=False)], [load("Ballasts", "M1", "hf-ballast-luminaire")])
    assert [f.circuit for f in found(mixed, "lighting", "bs-7671")] == ["M1"]


def test_lighting_bs_7671_411_3_4_not_raised_with_an_rcd_or_under_other_codes(plan):
    lights = [load("Downlights", "L1", None, "0.5 mA")]
    ok = plan([circuit("L1", "rcd-30", "Hall", us=False, rating=6, purpose="lighting")], lights)
    assert found(ok, "lighting", "bs-7671") == []
    bare = plan([circuit("L1", "none", "Hall", us=False, rating=6, purpose="lighting")], lights)
    assert found(bare, "lighting", "iec-60364") == [] and found(bare, "lighting", "nec-2023") == []
    sockets = plan([circuit("S1", "none", "Hall", us=False, purpose="sockets")], [load("Kettle", "S1", "kettle")])
    assert found(sockets, "lighting", "bs-7671") == []


# --------------------------------------------------------------------------------------------- Type AC


def test_type_ac_bs_7671_a2_531_3_3_only_for_fixed_equipment(plan):
    # BS 7671:2018+A2:2022 reg. 531.3.3: Type AC only for fixed equipment known to have no DC component in its load
    # current; in front of socket-outlets (a plug-connected kettle) it is an error, of unknown loads a warning.
    def hits(rcd_type, loads, code="bs-7671"):
        return found(plan([circuit("C1", "rcd-30", "Lounge", us=False, rcd_type=rcd_type)], loads), "type-ac", code)

    (hit,) = hits("AC", [load("Kettle", "C1", "kettle")])
    assert hit.severity is Severity.ERROR and str(hit.source).startswith("BS 7671:2018+A2:2022 reg. 531.3.3")
    assert hit.source.kind is Kind.PUBLISHED and "fit a Type A" in hit.message
    assert [h.severity for h in hits("AC", [load("Thing", "C1", None, "0.2 mA")])] == [Severity.WARNING]
    assert hits("AC", [load("Heater", "C1", "storage-water-heater")]) == []  # fixed equipment
    assert hits("A", [load("Kettle", "C1", "kettle")]) == []
    assert hits("AC", [load("Kettle", "C1", "kettle")], "iec-60364") == []


# --------------------------------------------------------------------------------------------- waveform


@pytest.mark.parametrize(
    "rcd_type, waveform, severity",
    [
        # IEC 60755 / IEC 62423: AC sees sine only; A adds pulsating DC; F adds inverter frequencies; B adds smooth DC.
        ("AC", "pulsating-dc", Severity.ERROR),
        ("A", "pulsating-dc", None),
        ("AC", "high-frequency", Severity.ERROR),
        ("A", "high-frequency", Severity.INFO),  # 1 mA of a switch-mode load, within the 9 mA budget: a note
        ("F", "high-frequency", None),
        ("F", "smooth-dc", Severity.WARNING),
        ("B", "smooth-dc", None),
        ("AC", "sine", None),
    ],
)
def test_waveform_against_rcd_type_iec_62423(plan, rcd_type, waveform, severity):
    p = plan(
        [circuit("C1", "rcd-30", "Office", us=False, rcd_type=rcd_type)],
        [load("Drive", "C1", None, "1 mA", waveform=waveform)],
    )
    hits = found(p, "waveform")
    assert [h.severity for h in hits] == ([severity] if severity else [])
    if hits:
        assert "Waveform column" in hits[0].message


def test_waveform_smooth_dc_cites_iec_62955_dc_detection(plan):
    p = plan(
        [circuit("E1", "rcd-30", "Garage", us=False, rcd_type="A", rating=40)],
        [load("Wallbox", "E1", "ev-charger-wallbox-230v")],
    )
    (hit,) = found(p, "waveform")
    assert "IEC 62955" in str(hit.source) and "IEC 62955 6 mA DC-detecting device" in hit.message
    assert "catalogue 'ev-charger-wallbox-230v'" in hit.message


def test_waveform_column_overrides_the_catalogue(plan):
    circuits = [circuit("C1", "rcd-30", "Office", us=False, rcd_type="AC")]
    # the catalogue's hair dryer leaks pulsating DC; the user's measurement says sine
    assert found(plan(circuits, [load("Dryer", "C1", "hair-dryer", waveform="sine")]), "waveform") == []
    assert len(found(plan(circuits, [load("Dryer", "C1", "hair-dryer")]), "waveform")) == 1
    # the catalogue's kettle is sine; the user says its electronics leak pulsating DC
    assert len(found(plan(circuits, [load("Kettle", "C1", "kettle", waveform="Pulsating-DC")]), "waveform")) == 1


def test_waveform_unknown_device_type_is_info(plan):
    p = plan([circuit("L1", "gfci-a", "Laundry")], [load("Washer", "L1", "washer-inverter")])
    (hit,) = found(p, "waveform")
    assert hit.severity is Severity.INFO and "Type F or B sees it" in hit.message


def test_waveform_column_rejects_unknown_values(plan):
    with pytest.raises(WorkbookError, match=r"sheet 'Loads', row 2, column 'Waveform', cell H2: 'square' is not one"):
        plan([circuit("C1", "rcd-30", "Office", us=False)], [load("X", "C1", "kettle", waveform="square")])


def test_waveform_one_finding_per_circuit_and_waveform_in_words_that_match_the_physics(plan):
    # IEC 60755 / IEC 62423: a Type AC device sees sine only; high-frequency leakage is under- or over-read, smooth
    # DC blinds; several loads of one waveform on one circuit give one finding naming them all.
    drives = [load(f"Drive {i}", "C1", None, "1 mA", waveform="high-frequency") for i in (1, 2, 3)]
    charger = [load("Charger", "C1", None, "2 mA", waveform="smooth-dc")]
    p = plan([circuit("C1", "rcd-30", "Office", us=False, rcd_type="AC")], drives + charger)
    hf, dc, blinding = found(p, "waveform")  # the third: the circuit's smooth DC beyond what Type AC operates with
    assert blinding.load is None and "smooth DC" in blinding.message
    assert (hf.load, dc.load) == (None, "Charger") and hf.severity is dc.severity is Severity.ERROR
    assert "high-frequency leakage (3.00 mA) of Drive 1 (Waveform column), Drive 2" in hf.message
    assert "under-reads or over-reads" in hf.message and "blinded" not in hf.message
    assert "blinded by smooth DC" in dc.message
    # Type A: high-frequency switch-mode leakage within the budget (9 mA) is a note, above it a warning
    small = plan([circuit("C1", "rcd-30", "Office", us=False, rcd_type="A")], drives)
    assert [(f.severity, f.source.kind) for f in found(small, "waveform")] == [(Severity.INFO, Kind.DEFAULT)]
    big = plan(
        [circuit("C1", "rcd-30", "Office", us=False, rcd_type="A", rating=32)],
        [load("Drives", "C1", None, "10 mA", waveform="high-frequency")],
    )
    assert [f.severity for f in found(big, "waveform")] == [Severity.WARNING]


# --------------------------------------------------------------------------------------------- fault sign


def test_fault_sign_ul_101_refrigerator_above_0_75_ma(plan):
    # UL 101: stationary cord-connected appliance at most 0.75 mA.
    hits = found(
        plan([circuit("K1", "gfci-a", "Kitchen")], [load("Fridge", "K1", "refrigerator", "1.2 mA")]), "fault-sign"
    )
    assert [(h.severity, str(h.source)) for h in hits] == [
        (Severity.ERROR, "UL 101 (0.75 mA, stationary cord-connected)")
    ]
    assert "probably faulty" in hits[0].message and "not a budget problem" in hits[0].message
    assert (
        found(
            plan([circuit("K1", "gfci-a", "Kitchen")], [load("Fridge", "K1", "refrigerator", "0.7 mA")]), "fault-sign"
        )
        == []
    )


@pytest.mark.parametrize(
    "power, measured, faulty",
    [
        # IEC 60335-1 cl. 13.2, class I stationary heating: 0.75 mA/kW, at least 0.75 mA, at most 5 mA.
        ("3 kW", "2.5 mA", True),  # limit 0.75 × 3 = 2.25 mA
        ("5 kW", "2.5 mA", False),  # limit 3.75 mA
        ("8 kW", "5.5 mA", True),  # 6 mA capped at 5 mA
        ("0.5 kW", "0.8 mA", True),  # 0.375 mA raised to the 0.75 mA floor
    ],
)
def test_fault_sign_iec_60335_1_heating_limit_scales_with_power(plan, power, measured, faulty):
    p = plan([circuit("K1", "rcd-30", "Kitchen", us=False)], [load("Oven", "K1", "wall-oven", measured, power=power)])
    hits = found(p, "fault-sign")
    assert bool(hits) is faulty
    if hits:
        assert str(hits[0].source).startswith("IEC 60335-1 cl. 13.2 (class I stationary heating")


def test_fault_sign_against_a_from_memory_upper_is_only_info(plan):
    # The dishwasher row's upper value (1.5 mA) is from memory, not a published limit.
    p = plan([circuit("K1", "gfci-a", "Kitchen")], [load("Dishwasher", "K1", "dishwasher", "3.5 mA")])
    (hit,) = found(p, "fault-sign")
    assert hit.severity is Severity.INFO and hit.source.kind is Kind.FROM_MEMORY
    assert "not a published limit" in hit.message


# --------------------------------------------------------------------------------------------- high leakage


def test_high_leakage_plug_connected_above_3_5_ma_iec_62368_1(plan):
    circuits = [circuit("W1", "rcd-30", "Workshop", us=False)]
    (hit,) = found(plan(circuits, [load("Welder", "W1", "inverter-welder", "4.2 mA")]), "high-leakage")
    assert hit.severity is Severity.WARNING and "IEC 62368-1" in str(hit.source)
    assert found(plan(circuits, [load("Welder", "W1", "inverter-welder", "3.4 mA")]), "high-leakage") == []
    # permanently connected equipment may exceed 3.5 mA (IEC 61140 Annex B): no finding
    assert found(plan(circuits, [load("Pump", "W1", "pool-pump-vfd", "4.2 mA")]), "high-leakage") == []


def test_high_leakage_uses_the_upper_basis_when_chosen(plan):
    circuits = [circuit("W1", "rcd-30", "Workshop", us=False)]
    loads = [load("Welder", "W1", "inverter-welder")]  # catalogue typical 1 mA, upper 5 mA (IEC 61140 Annex B)
    assert found(plan(circuits, loads), "high-leakage") == []
    assert len(found(plan(circuits, loads, settings=[["Basis", "upper"]]), "high-leakage")) == 1


# --------------------------------------------------------------------------------------------- shared neutral


@pytest.mark.parametrize(
    "device, system, shared, expected",
    [
        ("gfci-a", "single", "yes", 1),  # single-pole device on a shared neutral: trips (common practice)
        ("gfci-a", "split", "yes", 0),  # two-pole device carries both lines and the neutral
        ("gfci-a", "single", None, 0),
        ("none", "single", "yes", 0),
    ],
)
def test_shared_neutral_on_a_single_pole_device(plan, device, system, shared, expected):
    p = plan([circuit("K1", device, "Kitchen", system=system, shared=shared)], [load("Fridge", "K1", "refrigerator")])
    hits = found(p, "shared-neutral")
    assert len(hits) == expected
    if hits:
        assert hits[0].severity is Severity.ERROR and hits[0].source.kind is Kind.COMMON_PRACTICE


def test_shared_neutral_column_takes_yes_or_no(plan):
    with pytest.raises(WorkbookError, match=r"column 'Shared neutral', cell J2: 'maybe' is not yes or no"):
        plan([circuit("K1", "gfci-a", "Kitchen", shared="maybe")], [load("Fridge", "K1", "refrigerator")])


# --------------------------------------------------------------------------------------------- neutral-earth bond


def test_neutral_earth_bond_of_a_three_wire_dryer_under_a_gfci_ul_943(plan):
    # UL 943: a Class A GFCI must trip on a load-side grounded-neutral connection; the cure (strap out, four-wire)
    # is common practice.
    p = plan([circuit("D1", "gfci-a", "Laundry", system="split")], [load("Dryer", "D1", "dryer", bond="yes")])
    (hit,) = found(p, "neutral-earth")
    assert hit.severity is Severity.ERROR and hit.load == "Dryer" and hit.source.kind is Kind.PUBLISHED
    assert "UL 943" in str(hit.source) and "four-wire" in hit.message and "bonding strap out" in hit.message
    # no bond, or no device to sense it: no finding
    no_bond = plan([circuit("D1", "gfci-a", "Laundry")], [load("Dryer", "D1", "dryer", bond="no")])
    assert found(no_bond, "neutral-earth") == []
    unprotected = plan([circuit("D1", "none", "Laundry")], [load("Dryer", "D1", "dryer", bond="yes")])
    assert found(unprotected, "neutral-earth") == []


def test_neutral_earth_bond_of_a_subpanel_under_an_rcd_is_common_practice(plan):
    # an IEC RCD: the neutral's return current partly through earth is residual current (common practice)
    p = plan([circuit("S1", "rcd-30", "Workshop", us=False, bond="yes")], [load("Lathe", "S1", None, "1 mA")])
    (hit,) = found(p, "neutral-earth")
    assert hit.severity is Severity.ERROR and hit.load is None and hit.source.kind is Kind.COMMON_PRACTICE
    assert "subpanel" in hit.message and "switches the neutral" in hit.message
    assert (
        found(
            plan([circuit("S1", "rcd-30", "Workshop", us=False)], [load("Lathe", "S1", None, "1 mA")]), "neutral-earth"
        )
        == []
    )


def test_neutral_earth_bond_under_a_shared_or_an_inside_device(make_workbook):
    # UL 943 Class A grounded-neutral detection seen from a shared device above the circuit and from a GFCI
    # receptacle inside it (Protection sheet).
    from tests.test_protection import CIRCUITS as TREE_CIRCUITS
    from tests.test_protection import LOADS as TREE_LOADS
    from tests.test_protection import PROTECTION

    path = make_workbook(
        {
            "Protection": [
                PROTECTION,
                ["RCD1", "rcd-30", "A", None, 63, "Consumer unit", "single", None],
                ["GR1", "gfci-a", None, None, 20, None, "single", "K2"],
            ],
            "Circuits": [
                [*TREE_CIRCUITS, "Neutral-earth bond"],
                ["K1", "none", 230, 50, "single", 20, "Workshop", "RCD1", None, "sockets", None],
                ["K2", "none", 120, 60, "single", 20, "Garage", None, None, "sockets", None],
                ["K3", "none", 120, 60, "single", 20, "Garage", None, None, "sockets", "yes"],
            ],
            "Loads": [
                [*TREE_LOADS, "Neutral-earth bond"],
                ["Generator", "K1", None, 1, "0.5 mA", None, None, None, "yes"],
                ["Inverter", "K2", None, 1, "0.5 mA", None, None, "GR1", "yes"],
                ["Welder", "K2", None, 1, "0.5 mA", None, None, None, "yes"],
                ["Saw", "K3", None, 1, "0.5 mA", None, None, None, None],
            ],
        },
        "bonds.xlsx",
    )
    hits = [f for f in review(read_project(path), "nec-2023").findings if f.rule == "neutral-earth"]
    assert [(f.circuit, f.load) for f in hits] == [("K1", "Generator"), ("K2", "Inverter")]  # Welder is above GR1
    assert "RCD1" in hits[0].message and "switches the neutral" in hits[0].message
    assert "GR1" in hits[1].message and "UL 943" in str(hits[1].source)


def test_neutral_earth_often_bonded_catalogue_rows_ask_for_the_column(plan):
    # common practice: ranges and dryers often come with a bonding strap; with the column blank the review asks,
    # with yes it is the UL 943 error, with no it says nothing.
    circuits = [circuit("D1", "gfci-a", "Laundry", system="split")]
    (note,) = found(plan(circuits, [load("Dryer", "D1", "dryer")]), "neutral-earth")
    assert note.severity is Severity.INFO and note.source.kind is Kind.COMMON_PRACTICE
    assert "bonding strap is out" in note.message and "Neutral-earth bond column" in note.message
    assert found(plan(circuits, [load("Dryer", "D1", "dryer", bond="no")]), "neutral-earth") == []
    assert found(plan(circuits, [load("Kettle", "D1", "kettle")]), "neutral-earth") == []  # not often bonded


def test_neutral_earth_bond_column_takes_yes_or_no(plan):
    with pytest.raises(WorkbookError, match=r"column 'Neutral-earth bond', cell I2: 'sometimes' is not yes or no"):
        plan([circuit("K1", "gfci-a", "Kitchen")], [load("Dryer", "K1", "dryer", bond="sometimes")])


# --------------------------------------------------------------------------------------------- long run


def test_long_run_gfci_250_ft_common_practice(plan):
    assert pytest.approx(250 * 0.3048) == GFCI_RUN_LIMIT_M  # 250 ft in metres (international foot)
    loads = [load("Pump", "P1", "pond-pump")]
    (hit,) = found(plan([circuit("P1", "gfci-a", "Patio", length="300 ft")], loads), "long-run")
    assert hit.severity is Severity.WARNING and hit.source.kind is Kind.COMMON_PRACTICE
    assert "91 m (300 ft)" in hit.message
    assert found(plan([circuit("P1", "gfci-a", "Patio", length="200 ft")], loads), "long-run") == []
    assert found(plan([circuit("P1", "rcd-30", "Patio", us=False, length=300)], loads), "long-run") == []


# --------------------------------------------------------------------------------------------- switch-on


def test_switch_on_heating_element_crosses_no_trip(plan):
    # UL 943 Class A: budget 0.3 × 6 = 1.8 mA, no-trip 4 mA. A dry element within budget whose switch-on value
    # (SWITCH_ON_FACTOR × dry, from memory) reaches 4 mA is flagged; below 4 mA it is not.
    circuits = [circuit("W1", "gfci-a", "Laundry")]
    crossing = round(4.0 / SWITCH_ON_FACTOR + 0.05, 2)
    assert crossing <= 1.8  # the dry value is within budget, so only the switch-on rule can speak
    (hit,) = found(plan(circuits, [load("Heater", "W1", "storage-water-heater", f"{crossing} mA")]), "switch-on")
    assert hit.severity is Severity.WARNING and hit.source.kind is Kind.FROM_MEMORY
    assert f"{crossing * SWITCH_ON_FACTOR:.2f} mA at switch-on" in hit.message
    below = round(4.0 / SWITCH_ON_FACTOR - 0.05, 2)
    assert found(plan(circuits, [load("Heater", "W1", "storage-water-heater", f"{below} mA")]), "switch-on") == []
    # not a heating element: no switch-on rule
    assert found(plan(circuits, [load("Drive", "W1", None, f"{crossing} mA")]), "switch-on") == []


def test_switch_on_not_repeated_when_the_circuit_is_already_over_budget(plan):
    p = plan([circuit("W1", "gfci-a", "Laundry")], [load("Heater", "W1", "storage-water-heater", "1.9 mA")])
    assert found(p, "switch-on") == [] and len(found(p, "budget")) == 1


# --------------------------------------------------------------------------------------------- budget


@pytest.mark.parametrize(
    "measured, code, severity",
    [
        # BS 7671:2018 reg. 531.3.2: budget 30 % of IΔn = 9 mA on a 30 mA RCD; IEC 61008-1 no-trip 0.5 IΔn = 15 mA.
        ("8 mA", "bs-7671", None),
        ("10 mA", "bs-7671", Severity.ERROR),  # a regulation of the chosen code
        ("10 mA", "iec-60364", Severity.WARNING),
        ("16 mA", "iec-60364", Severity.ERROR),  # at the no-trip level: nuisance trips
    ],
)
def test_budget_findings_follow_the_check(plan, measured, code, severity):
    p = plan([circuit("C1", "rcd-30", "Office", us=False, rating=40)], [load("Rack", "C1", None, measured)])
    hits = found(p, "budget", code)
    assert [h.severity for h in hits] == ([severity] if severity else [])
    if severity is Severity.ERROR and measured == "16 mA":
        assert "IEC 61008-1" in str(hits[0].source)


def test_bs_7671_review_cites_the_a2_text_of_the_regulations_the_check_cites_as_2018(plan):
    # BS 7671:2018+A2:2022 reg. 531.3.2(iii): the 30 % rule (A2 added an item before it); reg. 531.3.3: A2 changed it.
    # The check cites both as first published in 2018; the review under bs-7671 cites the amendment, and says in its
    # label which amendment its rules follow.
    rack = plan([circuit("C1", "rcd-30", "Office", us=False, rating=40)], [load("Rack", "C1", None, "10 mA")])
    (bs,) = found(rack, "budget", "bs-7671")
    (iec,) = found(rack, "budget", "iec-60364")
    assert str(bs.source).startswith("BS 7671:2018+A2:2022 reg. 531.3.2(iii)") and bs.source.kind is Kind.PUBLISHED
    assert str(iec.source) == "BS 7671:2018 reg. 531.3.2 (30 % of IΔn)"  # the check's own citation, unchanged
    charger = [load("Charger", "C1", None, "7 mA", waveform="smooth-dc")]
    blinded = plan([circuit("C1", "rcd-30", "Garage", us=False, rcd_type="A", rating=40)], charger)
    limits = [f for f in found(blinded, "waveform", "bs-7671") if "operates with" in f.message]
    assert [str(f.source).split(" (")[0] for f in limits] == ["BS 7671:2018+A2:2022 reg. 531.3.3"]
    assert review(rack, "bs-7671").label == "BS 7671:2018+A2:2022 (IET Wiring Regulations)"


# --------------------------------------------------------------------------------------------- every rule


def everything(plan):
    """One US plan that triggers every NEC rule, one IEC plan for the rest."""
    us = plan(
        [
            circuit("B1", "none", "Main bath, Snug"),
            circuit("K1", "gfci-a", "Kitchen", shared="yes", length="300 ft"),
            circuit("W1", "gfci-a", "Laundry"),
            circuit("G1", "gfci-a", "Garage"),
            circuit("D1", "none", "Dining room"),
            circuit("T1", "gfci-a", "Laundry", system="split"),
            circuit("HP", "none", "Back yard", system="split", rating=30),
        ],
        [
            load("Hair dryer", "B1", "hair-dryer"),
            load("Fridge", "K1", "refrigerator", "1.2 mA"),
            load("Heater", "W1", "storage-water-heater", "1.5 mA"),
            load("Welder", "G1", "inverter-welder", "4.5 mA"),
            load("Microwave", "D1", "microwave"),
            load("Cord set", "D1", "ev-charger-level-1"),
            load("Dryer", "T1", "dryer", bond="yes"),
            load("Heat pump", "HP", "heat-pump-inverter"),
            load("Pool pump", "HP", "pool-pump"),
        ],
    )
    iec = plan(
        [
            circuit("C1", "rcd-30", "Office", us=False, rcd_type="AC"),
            circuit("C2", "none", "Office", us=False),
            circuit("L1", "none", "Hall", us=False, rating=6, purpose="lighting"),
            circuit("C3", "none", "Office", us=False),
        ],
        [
            load("Radio", "C3", None, "0.2 mA"),  # connection unknown: a socket-outlets warning
            load("Drive", "C1", None, "1 mA", waveform="high-frequency"),
            load("Kettle", "C2", "kettle"),
            load("Downlights", "L1", None, "0.5 mA"),
        ],
    )
    return review(us, "nec-2023").findings, review(iec, "bs-7671").findings


def test_every_rule_is_exercised_and_described(plan, make_workbook):
    from tests.test_protection import tree_for_review

    us, iec = everything(plan)
    rules = {f.rule for f in us + iec + tree_for_review(make_workbook).findings}
    assert rules == set(RULES), set(RULES) - rules
    assert all(rule_description(r) for r in RULES)


FORBIDDEN = re.compile(
    r"\b(remove|removing|omit|bypass|disable|up-?rat\w*|raise|larger|higher|less sensitive|"
    r"100 mA|300 mA|500 mA)\b",
    re.IGNORECASE,
)


def test_no_finding_advises_removing_or_up_rating_protection(plan):
    # IEC 60479-1: personnel protection trips at 4-6 mA (US) or 30 mA (IEC) for a reason; advice is to split,
    # measure, repair, relocate or fit the kind of device the code asks for.
    us, iec = everything(plan)
    for f in us + iec:
        assert not FORBIDDEN.search(f.message), f.message


def test_findings_are_sorted_errors_first_and_every_finding_has_a_source(plan):
    for findings in everything(plan):
        order = [f.severity for f in findings]
        assert order == sorted(order, key=[Severity.ERROR, Severity.WARNING, Severity.INFO].index)
        assert len(set(order)) > 1 or len(order) < 3
        assert all(str(f.source) for f in findings)


def test_finding_shape(plan):
    f = everything(plan)[0][0]
    assert set(f.to_dict()) == {"severity", "rule", "source", "source_kind", "circuit", "load", "message"}


def test_review_accepts_a_check_result(plan):
    from leakbudget.checking import check

    p = plan([circuit("B1", "none", "Main bath")], [load("Hair dryer", "B1", "hair-dryer")])
    assert review(check(p)).findings == review(p).findings


# --------------------------------------------------------------------------------------------- command line


def test_cli_review_json_and_exit_codes(make_workbook):
    ok = make_workbook(
        {
            "Circuits": [CIRCUITS, circuit("B1", "gfci-a", "Main bath")],
            "Loads": [LOADS, load("Hair dryer", "B1", "hair-dryer")],
        },
        "ok.xlsx",
    )
    result = runner.invoke(app, ["review", str(ok), "--json", "--no-write"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert doc["code"] == "nec-2023" and doc["counts"]["error"] == 0
    bad = make_workbook(
        {
            "Circuits": [CIRCUITS, circuit("B1", "none", "Main bath")],
            "Loads": [LOADS, load("Hair dryer", "B1", "hair-dryer")],
        },
        "bad.xlsx",
    )
    result = runner.invoke(app, ["review", str(bad), "--json", "--no-write", "--code", "nec-2020"])
    assert result.exit_code == 1
    doc = json.loads(result.stdout)
    assert doc["findings"][0] == {
        "severity": "error",
        "rule": "location",
        "source": "NEC 2020 210.8(A)",
        "source_kind": "published",
        "circuit": "B1",
        "load": None,
        "message": "B1 serves Main bath (bathroom): NEC 2020 210.8(A) requires GFCI protection for personnel "
        "(Class A) for receptacles there; B1 has no ground-fault protection: fit a Class A GFCI (gfci-a).",
    }


def test_cli_review_text_and_bad_code(make_workbook):
    path = make_workbook(
        {
            "Circuits": [CIRCUITS, circuit("B1", "none", "Main bath")],
            "Loads": [LOADS, load("Hair dryer", "B1", "hair-dryer")],
        }
    )
    result = runner.invoke(app, ["review", str(path), "--no-write"])
    assert result.exit_code == 1
    assert "error location · B1" in result.stdout
    assert "Source: NEC 2023 210.8(A)" in result.stdout
    wrong = runner.invoke(app, ["review", str(path), "--no-write", "--code", "nec-2017"])
    assert wrong.exit_code == 2
    assert wrong.stderr.strip().startswith("Error: 'nec-2017' is not a code leakbudget reviews against")


def test_findings_sheet_rows(plan):
    from leakbudget.output.review import FINDING_COLUMNS, findings_rows

    p = plan([circuit("B1", "none", "Main bath")], [load("Hair dryer", "B1", "hair-dryer")])
    rv = review(p, "nec-2023")
    rows = findings_rows(rv)
    assert FINDING_COLUMNS == ("Severity", "Rule", "Circuit", "Load", "Finding", "Source", "Source kind")
    assert rows[0][:4] == ["error", "location", "B1", None]
    assert rows[0][5:] == ["NEC 2023 210.8(A)", "published"]
    assert all(len(r) == len(FINDING_COLUMNS) for r in rows)
    footer = [r[0] for r in rows[len(rv.findings) + 1 :]]
    assert footer[0] == "Reviewed against NEC 2023 (NFPA 70), dwelling units: chosen for this run (--code)."
    assert footer[1] == f"1 error(s), 0 warning(s), {rv.count(Severity.INFO)} info."
    assert footer[-1].startswith("Caution: ")


def test_cli_review_writes_the_findings_sheet(make_workbook, tmp_path):
    import python_calamine

    path = make_workbook(
        {
            "Circuits": [CIRCUITS, circuit("B1", "none", "Main bath")],
            "Loads": [LOADS, load("Hair dryer", "B1", "hair-dryer")],
        }
    )
    out = tmp_path / "reviewed.xlsx"
    result = runner.invoke(app, ["review", str(path), "--out", str(out)])
    assert result.exit_code == 1
    assert f"Findings written to {out} (sheet 'Review findings')." in " ".join(result.stdout.split())
    book = python_calamine.CalamineWorkbook.from_path(str(out))  # read back by an independent reader
    assert book.sheet_names == ["Circuits", "Loads", "Review findings"]
    grid = book.get_sheet_by_name("Review findings").to_python()
    assert grid[0] == ["Severity", "Rule", "Circuit", "Load", "Finding", "Source", "Source kind"]
    assert grid[1][:3] == ["error", "location", "B1"] and grid[1][5] == "NEC 2023 210.8(A)"
    # the user's own sheets are untouched
    assert book.get_sheet_by_name("Circuits").to_python()[1][:2] == ["B1", "none"]


def test_demo_review_agrees_with_its_check():
    from leakbudget.api import example_path

    rv = review(read_project(example_path()))
    flagged = {c.circuit.circuit_id for c in rv.check.circuits if c.status.value in ("over-budget", "trip-risk")}
    assert {f.circuit for f in rv.findings if f.rule == "budget"} == flagged == {"K-CTR1", "G-BENCH", "P-OUT"}
    assert rv.code.key == "nec-2023" and rv.errors == []  # every wet-location circuit of the demo has a Class A GFCI
