"""The command line through a runner: exit codes, exact messages, help and documentation of every command."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from leakbudget.cli.app import app
from leakbudget.input.schema import SHEETS
from leakbudget.settings import SETTING_SPECS
from tests.conftest import basic_sheets

ROOT = Path(__file__).resolve().parents[1]
runner = CliRunner()


def commands() -> list[str]:
    return sorted(c.name or c.callback.__name__ for c in app.registered_commands)


def test_every_command_has_help_and_is_documented():
    readme = documentation()
    for name in commands():
        result = runner.invoke(app, [name, "--help"])
        assert result.exit_code == 0, name
        assert "Usage:" in result.output
        assert f"leakbudget {name}" in readme, f"README does not document `leakbudget {name}`"


def documentation() -> str:
    """The user documentation: README.md."""
    return (ROOT / "README.md").read_text(encoding="utf-8")


def test_every_workbook_column_and_setting_is_documented():
    readme = documentation()
    for sheet in SHEETS:
        for column in sheet.columns:
            assert f"`{column.name}`" in readme, column.name
    for spec in SETTING_SPECS:
        assert f"`{spec.name}`" in readme, spec.name


def test_check_json_exit_codes(make_workbook):
    ok = runner.invoke(app, ["check", str(make_workbook()), "--json", "--no-write"])
    assert ok.exit_code == 0, ok.output
    doc = json.loads(ok.stdout)
    assert [c["circuit"] for c in doc["circuits"]] == ["K1", "E1"]
    assert doc["circuits"][1]["budget_ma"] == pytest.approx(9.0)  # BS 7671:2018 reg. 531.3.2, 30 % of 30 mA
    assert {load["basis"] for load in doc["loads"]} == {"computed", "measured"}

    sheets = basic_sheets()
    sheets["Loads"][2][4] = "5 mA"  # 2 × 5 mA on a 30 mA RCD: above 9 mA budget, below 15 mA no-trip
    bad = runner.invoke(app, ["check", str(make_workbook(sheets, "over.xlsx")), "--json", "--no-write"])
    assert bad.exit_code == 1
    assert json.loads(bad.stdout)["circuits"][1]["status"] == "over-budget"


def test_bad_input_exit_2_with_one_line(make_workbook):
    sheets = basic_sheets()
    sheets["Circuits"][1][1] = "gfci-z"
    path = make_workbook(sheets)
    before = path.read_bytes()
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2
    assert result.output.strip().startswith(
        "Error: plan.xlsx, sheet 'Circuits', row 2, column 'Device', cell B2: 'gfci-z' is not a known device key"
    )
    assert "Traceback" not in result.output
    assert path.read_bytes() == before


def test_every_bad_cell_is_listed_in_one_run_on_stderr(make_workbook):
    """Three bad cells on two sheets: one heading and one sentence a line on stderr, exit 2, nothing on stdout
    (so `--json` output stays a JSON document or nothing), the file untouched and no file beside it."""
    sheets = basic_sheets()
    sheets["Circuits"][1][2] = "240-10 V"
    sheets["Loads"][1][5] = "5/2 nF"
    sheets["Loads"][2][4] = "<0.1 mA"
    path = make_workbook(sheets)
    before = path.read_bytes()
    for args in ([], ["--json"], ["--no-write"]):
        result = runner.invoke(app, ["check", str(path), *args])
        assert result.exit_code == 2 and result.stdout == ""
        lines = result.stderr.splitlines()
        assert lines[0] == "Error: plan.xlsx: 3 problems; fix them all, then run again:"
        assert [line.split(": ")[0] for line in lines[1:]] == [
            "- plan.xlsx, sheet 'Circuits', row 2, column 'Voltage', cell C2",
            "- plan.xlsx, sheet 'Loads', row 2, column 'Y capacitance', cell F2",
            "- plan.xlsx, sheet 'Loads', row 3, column 'Leakage', cell E3",
        ]
        assert all(line.endswith(".") for line in lines[1:])
    assert path.read_bytes() == before and sorted(p.name for p in path.parent.iterdir()) == ["plan.xlsx"]


def test_missing_file_is_exit_2(tmp_path):
    result = runner.invoke(app, ["check", str(tmp_path / "nope.xlsx")])
    assert result.exit_code == 2
    assert "nope.xlsx: the file does not exist" in result.output


def test_appliances_search_json():
    result = runner.invoke(app, ["appliances", "kettle", "--json"])
    rows = json.loads(result.stdout)
    assert [r["key"] for r in rows] == ["kettle"]
    assert "IEC 60335-1" in rows[0]["upper_source"]


def test_devices_json_lists_levels():
    rows = {r["key"]: r for r in json.loads(runner.invoke(app, ["devices", "--json"]).stdout)}
    assert (rows["gfci-a"]["trip_ma"], rows["gfci-a"]["no_trip_ma"]) == (6.0, 4.0)  # UL 943 Class A


def test_template_then_check(tmp_path):
    path = tmp_path / "blank.xlsx"
    assert runner.invoke(app, ["template", str(path)]).exit_code == 0
    result = runner.invoke(app, ["check", str(path), "--no-write", "--json"])
    assert result.exit_code == 0, result.output
    assert json.loads(result.stdout)["circuits"] == []
    again = runner.invoke(app, ["template", str(path)])
    assert again.exit_code == 2 and "will not overwrite" in again.output


def test_the_workbook_format_tables_are_made_from_the_schema():
    # README's tables of sheets, columns and settings are generated (`python -m tests.readme_tables`).
    from tests import readme_tables

    assert readme_tables.current() == readme_tables.tables().strip()


def test_the_terminal_rounds_each_figure_once(make_workbook):
    """10.034989 mA is 10.03 mA to two decimals (arithmetic); rounding it first to the JSON document's four
    decimals (10.035) and then to two would print 10.04. The table and the sentences print it once rounded."""
    from tests.conftest import CIRCUITS_HEADER, LOADS_HEADER

    sheets = {
        "Circuits": [CIRCUITS_HEADER, ["E1", "rcd-30", 230, 50, "single", 32, None, "Office"]],
        "Loads": [LOADS_HEADER, ["Printer", "E1", None, 1, "10.034989 mA", None, None, None, "Office"]],
    }
    result = runner.invoke(app, ["check", str(make_workbook(sheets)), "--no-write"])
    row = next(line for line in result.output.splitlines() if line.lstrip().startswith("E1 "))
    assert row.split()[2:4] == ["10.03", "10.03"], row


def test_an_option_taken_for_a_file_name_is_refused(make_workbook, tmp_path):
    """`report x.xlsx --html --pdf r.pdf` forgot the HTML file's name: click would take `--pdf` for it."""
    path = make_workbook()
    result = runner.invoke(app, ["report", str(path), "--html", "--pdf", str(tmp_path / "r.pdf")])
    assert result.exit_code == 2
    assert "--pdf looks like an option, not a file name: give the file name after --html" in " ".join(
        result.output.split()
    )
    assert not (tmp_path / "r.pdf").exists() and not Path("--pdf").exists()
    for args in (["check", str(path), "--out", "--force"], ["check", str(path), "--summary", "-q"]):
        result = runner.invoke(app, args)
        assert result.exit_code == 2 and "looks like an option" in " ".join(result.output.split())


def test_circuits_judged_by_an_over_budget_shared_device_say_so_and_fit_80_columns(tmp_path):
    """The example UK board: RCD1 carries 14.12 mA against its 9 mA budget (30 % of IΔn = 30 mA, BS 7671:2018
    reg. 531.3.2), while each of its five circuits alone is within it. The terminal names RCD1 as the reason, once,
    and no figure is cut short at 80 columns."""
    source = ROOT / "examples" / "tanners-row-flat.xlsx"
    result = runner.invoke(app, ["check", str(source), "--no-write"], terminal_width=80)
    assert result.exit_code == 1
    text = " ".join(result.output.split())
    assert "C1, C2, C3, C4 and C5 are over-budget because RCD1 above them is" in text
    assert "RCD1 carries 14.12 mA against its 9.00 mA budget" in text
    assert "C1 is over-budget: largest contributor" not in text
    assert "5 circuit(s) over budget, through RCD1. Move circuits from RCD1 to another device" in text
    assert "…" not in result.output and "9.00/15.00" in result.output
    assert all(len(line) <= 80 for line in result.output.splitlines())


def test_marginal_circuits_share_one_sentence_naming_the_likeliest(tmp_path):
    """Fifteen marginal circuits (an invented 600-load workbook): one sentence, the ten with the highest switch-on
    likelihood in falling order, and how many more, instead of a line each."""
    from benchmarks.workbooks import make_workbook
    from leakbudget import api

    path = make_workbook(tmp_path / "wing.xlsx", 600, seed=7)
    marginal = [c for c in api.check(path).result.circuits if c.status.value == "marginal"]
    assert len(marginal) == 15
    result = runner.invoke(app, ["check", str(path), "--no-write"], terminal_width=100)
    text = " ".join(result.output.split())
    assert "15 circuits are marginal: within their budget, but their switch-on trip likelihood is above" in text
    assert "5 more in the 'Circuit results' sheet." in text and " is marginal: within its budget" not in text
    likeliest = sorted(marginal, key=lambda c: -c.risk.switch_on)
    named = text.split("the highest: ")[1].split("; 5 more")[0].split("; ")
    assert [n.split()[0] for n in named] == [c.circuit.circuit_id for c in likeliest[:10]]


def test_the_budget_line_cites_what_each_device_kind_rests_on(make_workbook):
    """The 30 % budget is BS 7671:2018 reg. 531.3.2 for an RCD; for a UL 943 GFCI no US rule sets one, so the line
    must not present BS 7671 as its source, only the analogy (a modelling choice)."""
    result = runner.invoke(app, ["check", str(make_workbook()), "--no-write"])
    text = " ".join(result.output.split())
    line = text[text.index("Budget = ") : text.index("; gated by")]
    assert line == (
        "Budget = 0.3 × trip level (modelling choice: 30 % of the trip level, by analogy with BS 7671:2018 reg. "
        "531.3.2; no US rule sets a standing-leakage budget, and the Budget of setting offers a share of the no-trip "
        "level instead; BS 7671:2018 reg. 531.3.2 (30 % of IΔn))"
    ), line
