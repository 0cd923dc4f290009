"""`split --apply --out NEW.xlsx`: the plan written into a copy of the workbook, and the copy checked.

Independent references: python-calamine reads source and copy cell by cell (only the planned cells may differ),
the leakage on each circuit of the copy is summed here from the copy's own Loads sheet and compared with the UL 943
Class A budget (0.30 × 6 mA = 1.8 mA, BS 7671:2018 reg. 531.3.2 by analogy) and the 30 mA RCD budget (0.30 × 30 mA =
9 mA, BS 7671:2018 reg. 531.3.2), zipfile compares the package entries byte by byte, os.stat the source's mtime,
and Gnumeric's ssconvert re-opens the copy.
"""

from __future__ import annotations

import json
import os
import zipfile
from pathlib import Path
from typing import Any

import pytest
import xlsxwriter
from python_calamine import CalamineWorkbook
from typer.testing import CliRunner

import leakbudget
from leakbudget.api import copy_example
from leakbudget.cli import app
from leakbudget.planner.plan import SplitOptions
from tests.test_planner import random_room, sheets
from tests.test_xlsx_package import real_program_csv

runner = CliRunner()
UL943_BUDGET_MA = 0.30 * 6.0  # UL 943 Class A trip level 6 mA; 30 % of it (BS 7671:2018 reg. 531.3.2, by analogy)
RCD30_BUDGET_MA = 0.30 * 30.0  # IΔn 30 mA (IEC 61008-1); 30 % of it (BS 7671:2018 reg. 531.3.2)
RESULT_SHEETS = {"Split plan", "Circuit results", "Load results", "Device results", "Reading results"}
REGISTRATION = {"[Content_Types].xml", "xl/workbook.xml", "xl/_rels/workbook.xml.rels", "xl/styles.xml"}
CIRCUITS = ["Circuit", "Device", "Voltage", "Frequency", "System", "Rating", "Cable length", "Rooms", "Breaker"]
LOADS = ["Load", "Circuit", "Leakage", "Current", "Room", "Stays"]


def kitchen_sheets() -> dict[str, list[list[Any]]]:
    """An invented kitchen (12 Wrenfield Row): K1 over its 1.8 mA budget, a kettle not yet on a circuit, and a
    title block above the Circuits header; the Circuits sheet has no Note column and a column of the user's own."""
    return {
        "About": [["12 Wrenfield Row, kitchen refit (invented)"], ["Drawn by the site team"]],
        "Circuits": [
            ["Panel P1 of 12 Wrenfield Row"],
            [],
            CIRCUITS,
            ["K1", "gfci-a", 120, 60, "single", 20, 14, "Kitchen", "slot 3"],
            ["K2", "gfci-a", 120, 60, "single", 20, 16, "Kitchen", "slot 5"],
        ],
        "Loads": [
            LOADS,
            ["Refrigerator", "K1", "0.9 mA", 3, "Kitchen", "yes"],
            ["Freezer", "K1", "0.6 mA", 3, "Kitchen", None],
            ["Toaster", "K1", "0.5 mA", 2, "Kitchen", None],
            ["Wine cooler", "K2", "0.9 mA", 2, "Kitchen", "yes"],
            ["Ice maker", "K2", "0.7 mA", 2, "Kitchen", "yes"],
            ["Kettle", None, "0.6 mA", 3, "Kitchen", None],
        ],
    }


def grids(path: Path) -> dict[str, list[list[Any]]]:
    book = CalamineWorkbook.from_path(str(path))
    return {name: book.get_sheet_by_name(name).to_python(skip_empty_area=False) for name in book.sheet_names}


def entries(path: Path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as archive:
        return {info.filename: archive.read(info) for info in archive.infolist()}


def differing_cells(before: list[list[Any]], after: list[list[Any]]) -> dict[tuple[int, int], tuple[Any, Any]]:
    """(1-based row, 0-based column) -> (before, after) for every cell that reads differently."""
    out = {}
    for i in range(max(len(before), len(after))):
        a = before[i] if i < len(before) else []
        b = after[i] if i < len(after) else []
        for j in range(max(len(a), len(b))):
            x, y = (a[j] if j < len(a) else ""), (b[j] if j < len(b) else "")
            if x != y:
                out[(i + 1, j)] = (x, y)
    return out


def apply(path: Path, out: Path, *args: str) -> Any:
    return runner.invoke(app, ["split", str(path), "--apply", "--out", str(out), *args])


def test_the_copy_holds_the_plan_and_nothing_else(make_workbook, tmp_path: Path) -> None:
    source = make_workbook(kitchen_sheets(), "kitchen.xlsx")
    stat_before, bytes_before = os.stat(source), source.read_bytes()
    out = tmp_path / "kitchen-planned.xlsx"
    plan = leakbudget.split(source).plan
    assert plan.feasible and plan.new_count >= 1 and plan.placed == 1

    result = apply(source, out)
    assert result.exit_code == 0, result.output
    # the source: same bytes, same modification time, and nothing written beside it but the copy
    assert source.read_bytes() == bytes_before and os.stat(source).st_mtime_ns == stat_before.st_mtime_ns
    assert sorted(p.name for p in tmp_path.iterdir()) == ["kitchen-planned.xlsx", "kitchen.xlsx"]

    old, new = grids(source), grids(out)
    assert set(new) - set(old) <= RESULT_SHEETS and {"Split plan", "Circuit results", "Load results"} <= set(new)
    for name in set(old) - {"Loads", "Circuits"}:
        assert new[name] == old[name], name
    # Loads: only the Circuit cells (column B) of the loads the plan moves or places, each to its planned circuit
    planned = {a.load.row: a.to_id for a in plan.assignments if a.moved or a.placed}
    assert differing_cells(old["Loads"], new["Loads"]) == {
        (row, 1): (old["Loads"][row - 1][1], to) for row, to in planned.items()
    }
    # Circuits: the new circuits as rows below the table, and a Note header (the sheet had none) in the first free
    # column (J, right of the user's own Breaker column)
    diff = differing_cells(old["Circuits"], new["Circuits"])
    assert diff.pop((3, 9)) == ("", "Note")
    # a new circuit for plug loads is built as a sockets circuit, which a blank Purpose (mixed) would not say
    assert diff.pop((3, 10)) == ("", "Purpose")
    assert {r for r, _ in diff} == set(range(6, 6 + plan.new_count))
    rows = new["Circuits"][5 : 5 + plan.new_count]
    for n, row in zip(plan.new_circuits, rows):
        assert row[:6] == [n.circuit.circuit_id, "gfci-a", 120.0, 60.0, "single", 20.0]
        assert row[7] == "Kitchen" and row[8] == "" and "proposed" in row[9]
    # the copy passes check, and its own Loads sheet puts at most the budget on each circuit
    assert runner.invoke(app, ["check", str(out), "--no-write"]).exit_code == 0
    leak: dict[str, float] = {}
    for _load, circuit, leakage, *_ in new["Loads"][1:]:
        leak[circuit] = leak.get(circuit, 0.0) + float(leakage.split()[0])
    assert "" not in leak and all(total <= UL943_BUDGET_MA for total in leak.values()), leak


def test_every_other_package_entry_is_byte_identical(make_workbook, tmp_path: Path) -> None:
    source = make_workbook(kitchen_sheets(), "kitchen.xlsx")
    out = tmp_path / "copy.xlsx"
    assert apply(source, out).exit_code == 0
    old, new = entries(source), entries(out)
    assert [n for n in new if n in old] == list(old)  # same entries in the same order, new ones after
    changed = {n for n in old if old[n] != new[n]}
    # the two edited sheets (Circuits is sheet2, Loads sheet3 as XlsxWriter numbers them) and the registration parts
    assert changed <= REGISTRATION | {"xl/worksheets/sheet2.xml", "xl/worksheets/sheet3.xml"}, changed
    assert {"xl/worksheets/sheet2.xml", "xl/worksheets/sheet3.xml"} <= changed
    assert "xl/sharedStrings.xml" in old and new["xl/sharedStrings.xml"] == old["xl/sharedStrings.xml"]
    added = [n for n in new if n not in old]
    assert added and all(Path(n).name.startswith("leakbudget_") for n in added), added


@pytest.mark.parametrize("seed", range(8))
def test_any_feasible_plan_applied_passes_check(make_workbook, tmp_path: Path, seed: int) -> None:
    """Random kitchens (the planner tests' rooms): the copy's Loads sheet, read by calamine, puts every load on
    its planned circuit, and `check` of the copy exits 0."""
    circuits, _, rows = random_room(seed)  # type: ignore[misc]
    source = make_workbook(sheets(circuits, rows), f"room{seed}.xlsx")
    out = tmp_path / f"room{seed}-planned.xlsx"
    result = runner.invoke(app, ["split", str(source), "--apply", "--out", str(out), "--json"])
    doc = json.loads(result.stdout)
    assert doc["feasible"] and result.exit_code == 0, result.output
    loads = grids(out)["Loads"]
    for a in doc["assignments"]:
        assert loads[a["row"] - 1][:2] == [a["load"], a["to"]]
    assert runner.invoke(app, ["check", str(out), "--no-write"]).exit_code == 0
    applied = doc["applied"]
    assert applied["check"]["all_ok"] and applied["source_changed"] is False
    assert [r["row"] for r in applied["moved_rows"]] == [a["row"] for a in doc["assignments"] if a["change"] != "stays"]


def test_the_output_shows_rows_verdict_and_the_untouched_source(make_workbook, tmp_path: Path) -> None:
    source = make_workbook(kitchen_sheets(), "kitchen.xlsx")
    result = apply(source, tmp_path / "kitchen-planned.xlsx")
    text = " ".join(result.output.split())
    plan = leakbudget.split(source).plan
    for a in plan.assignments:
        if a.moved or a.placed:
            assert f"{a.load.row} B{a.load.row} {a.load.name} {a.from_id or '(unplaced)'} → {a.to_id}" in text
    assert "Written into kitchen-planned.xlsx, sheet 'Loads', column 'Circuit':" in text
    assert f"{plan.new_circuits[0].circuit.circuit_id} appended to sheet 'Circuits' as row 6" in text
    assert "Column 'Note' added to sheet 'Circuits' (cell J3)." in text
    assert "Check of kitchen-planned.xlsx: every protected circuit and shared device is within its budget." in text
    assert "kitchen.xlsx was not changed: --apply writes only the new file, no result sheets either." in text


def test_the_json_applied_object(make_workbook, tmp_path: Path) -> None:
    source = make_workbook(kitchen_sheets(), "kitchen.xlsx")
    out = tmp_path / "copy.xlsx"
    result = apply(source, out, "--json")
    assert result.exit_code == 0
    doc = json.loads(result.stdout)
    applied = doc["applied"]
    assert doc["written_to"] is None  # nothing went into the source
    assert applied["path"] == str(out) and applied["source"] == str(source) and applied["plan_feasible"]
    moved = {(r["row"], r["cell"], r["load"], r["from"], r["to"]) for r in applied["moved_rows"]}
    assert moved == {
        (a["row"], f"B{a['row']}", a["load"], a["from"], a["to"])
        for a in doc["assignments"]
        if a["moved"] or a["placed"]
    }
    assert [(c["circuit"], c["row"]) for c in applied["new_circuits"]] == [
        (n["circuit"], 6 + k) for k, n in enumerate(doc["new_circuit_details"])
    ]
    assert applied["added_columns"] == [
        {"sheet": "Circuits", "row": 3, "column": "Note", "cell": "J3", "value": "Note"},
        # the new circuit is built for plug loads (sockets), which a blank Purpose (mixed) would not say
        {"sheet": "Circuits", "row": 3, "column": "Purpose", "cell": "K3", "value": "Purpose"},
    ]
    assert applied["check"]["all_ok"] and applied["check"]["not_ok"] == []
    assert set(applied["sheets_written"]) == {"Split plan", "Circuit results", "Load results"}


def test_the_python_api_applies_a_plan(make_workbook, tmp_path: Path) -> None:
    source = make_workbook(kitchen_sheets(), "kitchen.xlsx")
    job = leakbudget.split(source)
    assert job.applied is None and "applied" not in job.document()
    copy = job.apply(tmp_path / "copy.xlsx")
    assert copy is job.applied and copy.all_ok and copy.path == tmp_path / "copy.xlsx"
    assert job.document()["applied"]["path"] == str(copy.path)
    assert set(copy.check.circuits_frame().circuit) == {
        "K1",
        "K2",
        *(n.circuit.circuit_id for n in job.plan.new_circuits),
    }
    again = leakbudget.split(source, SplitOptions(time_limit_s=5), apply_to=tmp_path / "again.xlsx")
    assert again.written is None and again.applied is not None and again.applied.all_ok
    assert grids(tmp_path / "again.xlsx")["Loads"] == grids(copy.path)["Loads"]


def test_the_demo_copy_reads_as_the_plan(tmp_path: Path) -> None:
    """The shipped demo: the copy's check gives the plan's figures; two circuits stay marginal (heating loads that
    are within budget), so the copy's check, and --apply, exit 1 although the plan is feasible."""
    source = copy_example(tmp_path)
    job = leakbudget.split(source)
    copy = job.apply(tmp_path / "planned.xlsx")
    after = {c.circuit.circuit_id: c for c in job.plan.after.circuits}
    for c in copy.check.result.circuits:
        assert c.leakage_ma == pytest.approx(after[c.circuit.circuit_id].leakage_ma, rel=1e-12)
        assert c.status == after[c.circuit.circuit_id].status
    assert {c["circuit"] for c in job.document()["applied"]["check"]["not_ok"]} == {"K-DW", "L-WASH"}
    result = apply(source, tmp_path / "planned-again.xlsx")
    assert result.exit_code == 1 and "2 marginal (K-DW, L-WASH)" in " ".join(result.output.split())


def test_the_board_plan_rewrites_protected_by(tmp_path: Path, monkeypatch) -> None:
    """The shipped UK flat: RCD1 carries more than 9 mA; the board plan moves two circuits to RCD2, and the copy
    has just those two Protected by cells changed, each device within 0.30 × 30 mA."""
    monkeypatch.chdir(tmp_path)
    source = copy_example(tmp_path, "tanners-row-flat.xlsx")
    result = apply(source, tmp_path / "flat-planned.xlsx", "--json")
    doc = json.loads(result.stdout)
    moved = [m for m in doc["circuit_assignments"] if m["moved"]]
    assert len(moved) == 2
    old, new = grids(source), grids(tmp_path / "flat-planned.xlsx")
    header = old["Circuits"][0]
    column = header.index("Protected by")
    rows = {r[0]: i + 1 for i, r in enumerate(old["Circuits"])}
    assert differing_cells(old["Circuits"], new["Circuits"]) == {
        (rows[m["circuit"]], column): (m["from"], m["to"]) for m in moved
    }
    assert differing_cells(old["Loads"], new["Loads"]) == {}
    for c in doc["applied"]["check"]["not_ok"]:
        assert c["status"] == "marginal"  # within budget; marginal is the switch-on likelihood
    check = json.loads(runner.invoke(app, ["check", "flat-planned.xlsx", "--no-write", "--json"]).stdout)
    by_device = {d["id"]: d["leakage_ma"] for d in check["devices"]}
    assert set(by_device) == {"RCD1", "RCD2"} and all(ma <= RCD30_BUDGET_MA for ma in by_device.values()), by_device


def rcbo_sheets() -> dict[str, list[list[Any]]]:
    """An invented dual-RCD board (7 Cobble Yard): 7 + 3 mA under RCD1 and 8 mA under RCD2 of 9 mA budgets; no
    move fits, so one circuit gets an RCBO of its own (a device of RCD1's kind)."""
    return {
        "Circuits": [
            ["Circuit", "Device", "Voltage", "Frequency", "Rating", "Rooms", "Protected by", "Note"],
            ["C1", "none", 230, 50, 32, "Kitchen", "RCD1", "Kitchen ring"],
            ["C2", "none", 230, 50, 32, "Lounge", "RCD1", "Lounge ring"],
            ["C3", "none", 230, 50, 32, "Study", "RCD2", "Study ring"],
        ],
        "Loads": [
            ["Load", "Circuit", "Leakage", "Current", "Room", "Stays"],
            ["Heat pump", "C1", "7 mA", 10, "Kitchen", "yes"],
            ["Server", "C2", "3 mA", 2, "Lounge", "yes"],
            ["Printer bank", "C3", "8 mA", 4, "Study", "yes"],
        ],
        "Protection": [
            ["Id", "Device", "RCD type", "Board"],
            ["RCD1", "rcd-30", "A", "Consumer unit"],
            ["RCD2", "rcd-30", "A", "Consumer unit"],
        ],
    }


def test_a_circuit_given_an_rcbo_gets_its_device(make_workbook, tmp_path: Path) -> None:
    source = make_workbook(rcbo_sheets(), "cobble.xlsx")
    out = tmp_path / "cobble-planned.xlsx"
    result = apply(source, out, "--json")
    doc = json.loads(result.stdout)
    own = [m for m in doc["circuit_assignments"] if m["own_device"]]
    assert len(own) == 1 and own[0]["own_device"] == "rcd-30", doc["circuit_assignments"]
    row = {"C1": 2, "C2": 3, "C3": 4}[own[0]["circuit"]]
    old, new = grids(source), grids(out)
    assert differing_cells(old["Circuits"], new["Circuits"]) == {
        (row, 1): ("none", "rcd-30"),  # Device
        (row, 6): (own[0]["from"], ""),  # Protected by: its own device, at the origin
        # the sheet has no RCD type column and RCD1's type (A) must read back: the column is added
        (1, 8): ("", "RCD type"),
        (row, 8): ("", "A"),
    }
    check = json.loads(runner.invoke(app, ["check", str(out), "--no-write", "--json"]).stdout)
    assert all(d["leakage_ma"] <= RCD30_BUDGET_MA for d in check["devices"]), check["devices"]
    mine = next(c for c in check["circuits"] if c["circuit"] == own[0]["circuit"])
    assert mine["device"] == "rcd-30" and mine["rcd_type"] == "A" and mine["leakage_ma"] <= RCD30_BUDGET_MA


def test_columns_a_new_circuit_needs_are_added(make_workbook, tmp_path: Path) -> None:
    """No Rating and no Voltage column: --new-rating 15 and --new-device rcd-30 give a new circuit whose rating
    and 120 V 60 Hz supply (copied from the room's circuit) a blank would not give (rcd-30 defaults to IEC 60038
    230 V 50 Hz), so those columns are added and the circuit reads back as planned."""
    data = {
        "Circuits": [["Circuit", "Device", "Rooms"], ["K1", "gfci-a", "Kitchen"]],
        "Loads": [
            ["Load", "Circuit", "Leakage", "Room"],
            ["Fridge", "K1", "1.2 mA", "Kitchen"],
            ["Freezer", "K1", "1.0 mA", "Kitchen"],
        ],
    }
    source = make_workbook(data, "narrow.xlsx")
    out = tmp_path / "narrow-planned.xlsx"
    result = apply(source, out, "--new-device", "rcd-30", "--new-rating", "15", "--json")
    doc = json.loads(result.stdout)
    assert result.exit_code == 0 and doc["new_circuits"] == 1, result.output
    header = grids(out)["Circuits"][0]
    assert header[:3] == ["Circuit", "Device", "Rooms"] and set(header[3:]) == {
        "Voltage",
        "Frequency",
        "Rating",
        "Note",
        "Purpose",
    }
    row = dict(zip(header, grids(out)["Circuits"][2]))
    assert (row["Device"], row["Voltage"], row["Frequency"], row["Rating"]) == ("rcd-30", 120.0, 60.0, 15.0)
    assert grids(out)["Circuits"][1][3:] == ["", "", "", "", ""]  # K1 keeps its blanks (and their defaults)


def test_an_infeasible_plan_is_applied_as_far_as_it_goes(make_workbook, tmp_path: Path) -> None:
    """Loads that must stay put K1 above its budget: the rest of the plan is applied, the output says so, and the
    copy's check (K1 still over budget) makes the exit code 1."""
    data = kitchen_sheets()
    data["Loads"].append(["Heater", "K1", "1.2 mA", 2, "Kitchen", "yes"])
    source = make_workbook(data, "stuck.xlsx")
    out = tmp_path / "stuck-planned.xlsx"
    result = apply(source, out)
    text = " ".join(result.output.split())
    assert result.exit_code == 1 and out.exists()
    assert "The plan does not meet every limit. The copy holds the changes it could make" in text
    assert "Check of stuck-planned.xlsx: 1 over budget (K1)" in text


def workbook_with(path: Path, merged: bool = False, formula_row: int | None = None) -> Path:
    """The kitchen, with the Loads Circuit cells of rows 3-4 (Freezer and Toaster, both on K1) merged, or a formula
    giving 'K1' in the Circuit cell of ``formula_row``."""
    book = xlsxwriter.Workbook(str(path))
    for name, rows in kitchen_sheets().items():
        sheet = book.add_worksheet(name)
        for i, row in enumerate(rows):
            for j, value in enumerate(row):
                if value is not None:
                    sheet.write(i, j, value)
        if name == "Loads" and merged:
            sheet.merge_range("B3:B4", "K1")
        if name == "Loads" and formula_row is not None:
            sheet.write_formula(f"B{formula_row}", '="K"&"1"', None, "K1")
    book.close()
    return path


@pytest.mark.parametrize(
    "args, message",
    [
        (
            [],
            "kitchen.xlsx: --apply writes the plan into a new copy and never into kitchen.xlsx; name the copy with "
            "--out, e.g. --out kitchen-planned.xlsx.",
        ),
        (
            ["--out", "SOURCE"],
            "kitchen.xlsx: this is the workbook the plan is made from, and a plan is applied only to a new copy "
            "(the workbook itself is never changed); give the copy another name, e.g. kitchen-planned.xlsx.",
        ),
        (
            ["--out", "copy.xlsx", "--no-write"],
            "kitchen.xlsx: --apply writes a planned copy and --no-write writes nothing; give one of them, not both.",
        ),
        (
            ["--out", "copy.xls"],
            "copy.xls: the planned copy is a workbook of the same kind as kitchen.xlsx, so its "
            "name must end in .xlsx; name it e.g. kitchen-planned.xlsx.",
        ),
    ],
)
def test_option_errors_exit_2_with_one_sentence(make_workbook, tmp_path: Path, args, message) -> None:
    source = make_workbook(kitchen_sheets(), "kitchen.xlsx")
    before = source.read_bytes()
    args = [str(source) if a == "SOURCE" else str(tmp_path / a) if a.startswith("copy") else a for a in args]
    result = runner.invoke(app, ["split", str(source), "--apply", *args])
    assert result.exit_code == 2
    assert " ".join(result.output.split()) == f"Error: {message}"
    assert source.read_bytes() == before and sorted(p.name for p in tmp_path.iterdir()) == ["kitchen.xlsx"]


def test_a_copy_in_a_missing_folder_is_refused_before_planning(make_workbook, tmp_path: Path) -> None:
    source = make_workbook(kitchen_sheets(), "kitchen.xlsx")
    result = apply(source, tmp_path / "nowhere" / "copy.xlsx")
    assert result.exit_code == 2
    text = " ".join(result.output.split())
    assert (
        text == f"Error: {tmp_path / 'nowhere'}: there is no such folder for the planned copy copy.xlsx; create it "
        "or choose another folder."
    )


def test_the_source_by_another_path_is_refused(make_workbook, tmp_path: Path, monkeypatch) -> None:
    source = make_workbook(kitchen_sheets(), "kitchen.xlsx")
    (tmp_path / "sub").mkdir()
    monkeypatch.chdir(tmp_path / "sub")
    result = runner.invoke(app, ["split", str(source), "--apply", "--out", "../kitchen.xlsx"])
    assert result.exit_code == 2 and "this is the workbook the plan is made from" in result.output


@pytest.mark.parametrize("kind", ["merged", "formula"])
def test_cells_that_cannot_take_the_plan_exit_2(tmp_path: Path, kind: str) -> None:
    """K1 is over budget, so the plan moves the Freezer (row 3) or the Toaster (row 4) off it; that load's
    Circuit cell is merged with the other's, or holds a formula."""
    moved = [a.load.row for a in leakbudget.split(workbook_with(tmp_path / "plain.xlsx")).plan.assignments if a.moved]
    assert len(moved) == 1 and moved[0] in (3, 4)
    row = moved[0]
    (tmp_path / "plain.xlsx").unlink()
    source = workbook_with(
        tmp_path / "kitchen.xlsx", merged=kind == "merged", formula_row=row if kind == "formula" else None
    )
    where = f"kitchen.xlsx, sheet 'Loads', row {row}, column 'Circuit', cell B{row}"
    message = {
        "merged": f"{where}: the cells B3:B4 are merged, so the planned value cannot be written into this one alone; "
        "unmerge the cells in your spreadsheet program (type the value in each row), save, and run again.",
        "formula": f'{where}: the cell holds a formula (="K"&"1"), which leakbudget does not replace, so the planned '
        "value cannot be written there; type the value in place of the formula in your spreadsheet program, save, "
        "and run again.",
    }[kind]
    result = apply(source, tmp_path / "copy.xlsx")
    assert result.exit_code == 2, result.output
    assert " ".join(result.output.split()) == f"Error: {message}"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["kitchen.xlsx"]


def test_a_copy_open_in_a_spreadsheet_program_is_refused_before_planning(make_workbook, tmp_path: Path) -> None:
    source = make_workbook(kitchen_sheets(), "kitchen.xlsx")
    (tmp_path / ".~lock.copy.xlsx#").write_text("someone,host", encoding="utf-8")
    result = apply(source, tmp_path / "copy.xlsx")
    assert result.exit_code == 2 and "lock file .~lock.copy.xlsx# beside it" in result.output
    assert not (tmp_path / "copy.xlsx").exists()


@pytest.mark.slow
def test_gnumeric_reads_the_copy(make_workbook, tmp_path: Path) -> None:
    """Gnumeric's ssconvert opens the copy: the user's sheets as calamine reads them, the planned cells included."""
    source = make_workbook(kitchen_sheets(), "kitchen.xlsx")
    out = tmp_path / "copy.xlsx"
    assert apply(source, out).exit_code == 0
    new = grids(out)

    def text(v: Any) -> str:
        return "" if v == "" else f"{v:g}" if isinstance(v, float) else str(v)

    for sheet in ("Loads", "Circuits"):
        expected = [[text(v) for v in row] for row in new[sheet] if any(v != "" for v in row)]
        width = max(len(r) for r in real_program_csv(out, sheet))
        assert real_program_csv(out, sheet) == [(r + [""] * width)[:width] for r in expected], sheet
    assert real_program_csv(out, "Split plan")[0][:3] == ["Load", "Row", "Room"]


# ------------------------------------------------------------------------ the workbook layer, on plain data alone


def test_a_new_circuit_reads_back_as_it_was_given(make_workbook, tmp_path: Path) -> None:
    """write_planned_copy without the planner: a circuit made by hand (every field off its default, the cable run
    in feet as the Length unit setting says: 55 ft = 16.764 m, 1 ft = 0.3048 m exactly) reads back field by field."""
    import dataclasses

    from leakbudget.input.schema import CIRCUITS as SCHEMA
    from leakbudget.workbook.apply import CircuitUpdate, PlannedChanges, circuit_cells, write_planned_copy
    from leakbudget.workbook.read import read_project

    data = kitchen_sheets()
    data["Settings"] = [["Setting", "Value"], ["Length unit", "ft"]]
    data["Protection"] = [["Id", "Device", "Board"], ["RCD1", "gfci-a", "P1"], ["RCD2", "gfci-a", "P1"]]
    data["Circuits"][2] += ["Protected by"]
    data["Circuits"][3] += ["", "RCD1"]
    source = make_workbook(data, "kitchen.xlsx")
    project = read_project(source)
    k1 = project.circuits[0]
    made = dataclasses.replace(
        k1,
        circuit_id="NEW-7",
        rcd_type="A",
        system="split",
        rating_a=15.0,
        cable_length_m=55 * 0.3048,
        cable_key="nm-b-14-2",
        rooms=("Kitchen", "Pantry"),
        shared_neutral=True,
        note="proposed: a circuit of my own",
        protected_by="RCD2",
        phase="L2",
        purpose="sockets",
        neutral_earth_bond=True,
    )
    assert [name for name, _, _ in circuit_cells(made, project.settings)] == [c.name for c in SCHEMA.columns]
    changes = PlannedChanges({7: "NEW-7"}, [made], [CircuitUpdate("K1", "RCD2")])
    out = tmp_path / "copy.xlsx"
    copy = write_planned_copy(source, changes, out)
    again = read_project(out)
    back = next(c for c in again.circuits if c.circuit_id == "NEW-7")
    fields = ("device", "rcd_type", "voltage_v", "frequency_hz", "system", "rating_a", "cable_key", "rooms", "note")
    fields += ("shared_neutral", "protected_by", "phase", "purpose", "neutral_earth_bond")
    assert {f: getattr(back, f) for f in fields} == {f: getattr(made, f) for f in fields}
    assert back.cable_length_m == pytest.approx(16.764, rel=1e-12)
    assert grids(out)["Circuits"][5][6] == 55.0  # written in the sheet's own unit
    assert again.circuits[0].protected_by == "RCD2" and again.loads[5].circuit_id == "NEW-7"
    assert copy.new_circuit_rows == {"NEW-7": 6} and copy.load_cells[7].cell == "B7"
    added = [c.value for c in copy.added_columns]
    assert added == ["RCD type", "Cable", "Shared neutral", "Note", "Phase", "Purpose", "Neutral-earth bond"]
