"""Reading and validating the workbook contract; every error names file, sheet, row and column."""

from __future__ import annotations

import copy

import pytest

from leakbudget.errors import WorkbookError, WorkbookProblems
from leakbudget.workbook.read import read_project
from tests.conftest import basic_sheets


def test_reads_the_basic_workbook(make_workbook):
    p = read_project(make_workbook())
    assert [c.circuit_id for c in p.circuits] == ["K1", "E1"]
    assert p.loads[0].y_capacitance_nf == pytest.approx(4.7)
    assert p.loads[1].leakage_ma == pytest.approx(0.75) and p.loads[1].quantity == 2


def test_sheet_and_column_names_match_loosely(make_workbook):
    sheets = basic_sheets()
    sheets = {"  circuits ": sheets["Circuits"], "LOADS": sheets["Loads"]}
    sheets["  circuits "][0] = [h.upper().replace(" ", "_") for h in sheets["  circuits "][0]]
    sheets["LOADS"][0] = ["  " + h.lower() + " " for h in sheets["LOADS"][0]]
    p = read_project(make_workbook(sheets))
    assert p.circuits[0].voltage_v == 120.0


def test_the_former_column_name_fixed_reads_as_stays_with_a_warning(make_workbook):
    sheets = basic_sheets()
    sheets["Loads"][0] = [*sheets["Loads"][0], "Fixed"]
    sheets["Loads"][1] = [*sheets["Loads"][1], "yes"]
    p = read_project(make_workbook(sheets))
    assert p.loads[0].stays and not p.loads[1].stays
    assert p.warnings == [
        "plan.xlsx, sheet 'Loads': the column 'Fixed' is now called 'Stays' and was read as such; rename its header "
        "to 'Stays'"
    ]
    assert read_project(make_workbook()).warnings == []


def test_the_former_and_the_current_name_together_are_refused(make_workbook):
    sheets = basic_sheets()
    sheets["Loads"][0] = [*sheets["Loads"][0], "Stays", "Fixed"]  # columns J and K
    with pytest.raises(WorkbookError) as caught:
        read_project(make_workbook(sheets))
    message = str(caught.value)
    assert "sheet 'Loads'" in message and "cell K1" in message
    assert "the column 'Fixed' (column K) is the former name of 'Stays', which is there too (column J)" in message
    assert "keep one of them, named 'Stays'" in message


def _broken(mutate):
    sheets = copy.deepcopy(basic_sheets())
    mutate(sheets)
    return sheets


CASES = [
    ("missing-sheet", lambda s: s.pop("Loads"), "plan.xlsx: the required sheet 'Loads' is missing"),
    (
        "missing-column",
        lambda s: s["Circuits"][0].__setitem__(1, "Breaker"),
        "plan.xlsx, sheet 'Circuits', row 1: the required column 'Device' is missing",
    ),
    (
        "unknown-device",
        lambda s: s["Circuits"][1].__setitem__(1, "gfci-z"),
        "plan.xlsx, sheet 'Circuits', row 2, column 'Device', cell B2: 'gfci-z' is not a known device key",
    ),
    (
        "unknown-appliance",
        lambda s: s["Loads"][1].__setitem__(2, "flux-capacitor"),
        "plan.xlsx, sheet 'Loads', row 2, column 'Appliance', cell C2: 'flux-capacitor' is not in the appliance catalogue",
    ),
    (
        "negative",
        lambda s: s["Loads"][2].__setitem__(4, -0.5),
        "plan.xlsx, sheet 'Loads', row 3, column 'Leakage', cell E3: '-0.5' must not be negative",
    ),
    (
        "unparseable",
        lambda s: s["Loads"][2].__setitem__(4, "lots"),
        "plan.xlsx, sheet 'Loads', row 3, column 'Leakage', cell E3: 'lots' is not a number with a unit",
    ),
    (
        "wrong-dimension",
        lambda s: s["Loads"][2].__setitem__(4, "5 kg"),
        "plan.xlsx, sheet 'Loads', row 3, column 'Leakage', cell E3: '5 kg' is in kg, which is not a current",
    ),
    (
        "duplicate-circuit",
        lambda s: s["Circuits"][2].__setitem__(0, "k1"),
        "plan.xlsx, sheet 'Circuits', row 3, column 'Circuit', cell A3: the circuit id 'k1' is used twice (also row 2)",
    ),
    (
        "unknown-circuit",
        lambda s: s["Loads"][1].__setitem__(1, "K9"),
        "plan.xlsx, sheet 'Loads', row 2, column 'Circuit', cell B2: 'K9' is not a circuit in the Circuits sheet",
    ),
    (
        "no-leakage-figure",
        lambda s: s["Loads"][1].__setitem__(5, None),
        "plan.xlsx, sheet 'Loads', row 2, column 'Appliance', cell C2: the load has no leakage figure",
    ),
    (
        "bad-leg",
        lambda s: s["Loads"][1].__setitem__(7, "L2"),
        "plan.xlsx, sheet 'Loads', row 2, column 'Leg', cell H2: leg 'L2' does not exist on a single circuit",
    ),
    (
        "implausible",
        lambda s: s["Loads"][2].__setitem__(4, "3 A"),
        "plan.xlsx, sheet 'Loads', row 3, column 'Leakage', cell E3: '3 A' is 3000 mA, not plausible for a standing "
        "leakage per unit",
    ),
    (
        "zero-voltage",
        lambda s: s["Circuits"][1].__setitem__(2, 0),
        "plan.xlsx, sheet 'Circuits', row 2, column 'Voltage', cell C2: '0' must be greater than zero",
    ),
]


@pytest.mark.parametrize(("mutate", "message"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_bad_input_is_one_sentence_with_location(make_workbook, mutate, message):
    with pytest.raises(WorkbookProblems) as info:
        read_project(make_workbook(_broken(mutate)))
    first = str(info.value.problems[0])
    assert first.startswith(message)
    assert all(str(p).endswith(".") and "\n" not in str(p) for p in info.value.problems)
    if len(info.value.problems) == 1:  # one problem: the exception is that sentence, and names its cell
        assert str(info.value) == first and info.value.row == info.value.problems[0].row


def test_a_renamed_circuit_also_leaves_its_loads_without_a_circuit(make_workbook):
    """E1 typed as a second k1: the id used twice, and the load on E1 now on no circuit of the sheet; both are
    true, and both are listed."""
    with pytest.raises(WorkbookProblems) as info:
        read_project(make_workbook(_broken(lambda s: s["Circuits"][2].__setitem__(0, "k1"))))
    assert [p.cell for p in info.value.problems] == ["A3", "B3"]


def test_every_sheet_reports_every_bad_row_in_one_run(make_workbook):
    """Bad cells on Settings, Appliances (two rows: the catalogue reader stops at its first problem, so each row
    is read alone), Cables, Protection, Circuits, Loads, Readings and Locations: all of them, in the workbook's
    sheet order, and no follow-on problem (a load on the appliance whose row is bad is not 'unknown')."""
    sheets = basic_sheets()
    sheets["Circuits"][1][2] = "240-10 V"
    sheets["Circuits"][2][6] = "1,500 ft"
    sheets["Loads"][1][4] = "5/2 mA"
    sheets["Loads"][2][2] = "site-heater"
    sheets["Loads"][2][3] = "2 3"
    sheets["Settings"] = [["Setting", "Value"], ["Budget fraction", "30"], ["Length unit", "furlong 2"]]
    sheets["Appliances"] = [
        ["Key", "Typical leakage", "Reference voltage"],
        ["site-heater", "<0.2 mA", 230],
        ["site-fan", "~0.1 mA", "2**8 V"],
        ["site-lamp", 0.1, 230],
    ]
    sheets["Cables"] = [["Key", "Capacitance"], ["site-cable", "100 nF/m"]]
    sheets["Protection"] = [["Id", "Device"], ["RCD1", "rcd-30"], ["RCD1", "rcd-30"]]
    sheets["Readings"] = [["Circuit", "Reading"], ["E1", "pi mA"]]
    sheets["Locations"] = [["Room name", "Location kind"], ["Snug", "cave"]]
    with pytest.raises(WorkbookProblems) as info:
        read_project(make_workbook(sheets))
    cells = [(p.sheet, p.cell) for p in info.value.problems]
    assert cells == [
        ("Circuits", "C2"),
        ("Circuits", "G3"),
        ("Loads", "E2"),
        ("Loads", "D3"),
        ("Settings", "B2"),
        ("Settings", "B3"),
        ("Appliances", "B2"),
        ("Appliances", "B3"),
        ("Appliances", "C3"),
        ("Cables", "B2"),
        ("Protection", "A3"),
        ("Readings", "B2"),
        ("Locations", "B2"),
    ]
    assert str(info.value).splitlines()[0] == "plan.xlsx: 13 problems; fix them all, then run again:"


def test_not_a_workbook(tmp_path):
    p = tmp_path / "notes.xlsx"
    p.write_text("hello")
    with pytest.raises(WorkbookError, match=r"notes.xlsx: this is a text file \(plain text\), not an .xlsx workbook"):
        read_project(p)


def test_wrong_extension(tmp_path):
    p = tmp_path / "plan.csv"
    p.write_text("a,b")
    with pytest.raises(WorkbookError, match="reads .xlsx and .ods workbooks"):
        read_project(p)


def test_header_below_a_title_block(make_workbook):
    sheets = basic_sheets()
    sheets["Circuits"] = [["Panel schedule, 9 Tamsin Row"], [], *sheets["Circuits"]]
    p = read_project(make_workbook(sheets))
    assert p.circuits[1].row == 5


def test_settings_are_read_with_their_source(make_workbook):
    sheets = basic_sheets()
    sheets["Settings"] = [
        ["Setting", "Value"],
        ["Budget fraction", "25 %"],
        ["Basis", "upper"],
        ["Length unit", "ft"],
        ["Something else", 3],
    ]
    p = read_project(make_workbook(sheets))
    assert p.settings.budget_fraction == pytest.approx(0.25)
    assert p.settings.basis == "upper"
    assert "Settings sheet, row 2" in str(p.settings.sources["Budget fraction"])
    assert any("something else" in w for w in p.warnings)


def test_bad_setting_names_the_cell(make_workbook):
    sheets = basic_sheets()
    sheets["Settings"] = [["Setting", "Value"], ["Budget fraction", 30]]
    with pytest.raises(
        WorkbookError, match=r"sheet 'Settings', row 2, column 'Value', cell B2: setting 'Budget fraction'"
    ):
        read_project(make_workbook(sheets))


def test_default_supply_is_reported(make_workbook):
    sheets = basic_sheets()
    sheets["Circuits"][1][2:4] = [None, None]
    p = read_project(make_workbook(sheets))
    assert p.circuits[0].voltage_v == 120.0 and p.circuits[0].frequency_hz == 60.0
    assert any("120 V 60 Hz" in d and "K1" in d for d in p.defaults_used)


def test_user_appliance_rows_override_and_are_reported(make_workbook):
    sheets = basic_sheets()
    sheets["Appliances"] = [
        [
            "Key",
            "Description",
            "Typical leakage",
            "Upper leakage",
            "Reference voltage",
            "Reference frequency",
            "Typical source",
        ],
        ["kettle", "Our kettle", 0.1, 0.2, 120, 60, "measured on site 2026-11-03"],
    ]
    sheets["Loads"].append(["Kettle", "K1", "kettle", 1, None, None, None, None, "Kitchen"])
    p = read_project(make_workbook(sheets))
    assert p.catalogue.appliances["kettle"].typical_ma == 0.1
    assert any("kettle" in w and "replaces the built-in" in w for w in p.warnings)


def test_settings_use_the_same_number_reader(make_workbook):
    """A percentage where a fraction is meant; a unit of length by name for Length unit (1 ft = 0.3048 m, the
    international foot); arithmetic, a percentage where a count is meant and a number for a unit refused, each
    on its own row in one run."""
    sheets = basic_sheets()
    sheets["Circuits"][1][6] = 100
    sheets["Settings"] = [
        ["Setting", "Value"],
        ["Budget fraction", "25 %"],
        ["Length unit", "feet"],
        ["Line imbalance", "60 %"],
    ]
    p = read_project(make_workbook(sheets))
    assert (p.settings.budget_fraction, p.settings["Line imbalance"]) == (pytest.approx(0.25), pytest.approx(0.6))
    assert p.circuits[0].cable_length_m == pytest.approx(30.48)
    sheets["Settings"] = [
        ["Setting", "Value"],
        ["Voltage", "240-10 V"],
        ["Samples", "50 %"],
        ["Length unit", "1 12000"],
        ["Switch-on factor", "9**9**9"],
        ["Seed", "2 3"],
    ]
    with pytest.raises(WorkbookProblems) as info:
        read_project(make_workbook(sheets))
    assert [str(x).split(": ", 1)[1] for x in info.value.problems] == [
        "setting 'Voltage': '240-10 V' is a calculation or a range, and leakbudget does no arithmetic; type one "
        "number, the result you mean, with at most one unit.",
        "setting 'Samples': '50 %' is a percentage or share, where a plain number belongs; type a plain number.",
        "setting 'Length unit': '1 12000' is not a unit of length; type m or ft.",
        "setting 'Switch-on factor': '9**9**9' is a calculation or a range, and leakbudget does no arithmetic; type "
        "one number, the result you mean, with at most one unit.",
        "setting 'Seed': '2 3' holds more than one number; type one number with at most one unit in each cell.",
    ]


def test_a_cable_run_in_feet_by_its_prime_is_feet(make_workbook):
    """30' is 30 ft = 9.144 m (international foot), whatever the Length unit setting says."""
    sheets = basic_sheets()
    sheets["Circuits"][1][6] = "30'"
    sheets["Circuits"][2][6] = "30"
    p = read_project(make_workbook(sheets))
    assert [c.cable_length_m for c in p.circuits] == [pytest.approx(9.144), 30.0]
