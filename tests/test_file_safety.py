"""Nothing of the user's is ever lost: sheets of theirs, backups, existing --out files, links, read-only and
hard-linked files, owners, odd package names, and text that a spreadsheet program would take for a formula.

Independent references: python-calamine reads the cells back; Gnumeric's ssconvert re-saves a workbook the way a
spreadsheet program does; ECMA-376 Part 2 §6.2.2 (part names: relative, percent-encoded in relationship targets)
and Part 1 §18.8.45 (xf quotePrefix) for what a package may hold.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import zipfile
from pathlib import Path

import pytest
from python_calamine import CalamineWorkbook
from typer.testing import CliRunner

from leakbudget.cli.app import app
from leakbudget.errors import LeakbudgetError
from leakbudget.xlsx.package import SheetData, write_sheets
from tests.conftest import basic_sheets, write_workbook

runner = CliRunner()


def workbook(tmp_path: Path, extra: dict | None = None, name: str = "plan.xlsx") -> Path:
    return write_workbook(tmp_path / name, {**basic_sheets(), **(extra or {})})


def sheet_names(path: Path) -> list[str]:
    return list(CalamineWorkbook.from_path(str(path)).sheet_names)


def test_a_users_own_sheet_with_a_result_sheets_name_is_never_replaced(tmp_path: Path) -> None:
    path = workbook(tmp_path, {"Circuit results": [["My notes on the circuits"], ["K1 is the island"]]})
    before = path.read_bytes()
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2
    assert "sheet 'Circuit results' is a sheet of yours, not one leakbudget wrote" in " ".join(result.output.split())
    assert path.read_bytes() == before and not list(tmp_path.glob("*before-leakbudget*"))


def test_its_own_result_sheet_is_replaced_run_after_run(tmp_path: Path) -> None:
    path = workbook(tmp_path)
    for _ in range(3):
        assert runner.invoke(app, ["check", str(path)]).exit_code in (0, 1)
    assert sheet_names(path).count("Circuit results") == 1


@pytest.mark.slow
def test_a_result_sheet_resaved_by_a_spreadsheet_program_is_still_recognised(tmp_path: Path) -> None:
    # Gnumeric re-saves text as shared strings and renames the parts: the header row is what identifies the sheet
    path = workbook(tmp_path)
    assert runner.invoke(app, ["check", str(path)]).exit_code in (0, 1)
    resaved = tmp_path / "resaved.xlsx"
    subprocess.run(["ssconvert", str(path), str(resaved)], check=True, capture_output=True)
    with zipfile.ZipFile(resaved) as archive:
        assert any("sharedStrings" in n for n in archive.namelist())
    assert runner.invoke(app, ["check", str(resaved)]).exit_code in (0, 1)
    assert sheet_names(resaved).count("Circuit results") == 1


def test_out_onto_an_existing_file_needs_force_and_keeps_its_version(tmp_path: Path) -> None:
    path = workbook(tmp_path)
    out = tmp_path / "results.xlsx"
    out.write_bytes(b"somebody else's file")
    refused = runner.invoke(app, ["check", str(path), "--out", str(out)])
    assert refused.exit_code == 2 and "the file exists" in refused.output and "--force" in refused.output
    assert out.read_bytes() == b"somebody else's file"
    done = runner.invoke(app, ["check", str(path), "--out", str(out), "--force"])
    assert done.exit_code in (0, 1), done.output
    assert "Circuit results" in sheet_names(out)
    assert (tmp_path / "results.before-leakbudget.xlsx").read_bytes() == b"somebody else's file"


def test_a_lock_file_beside_a_symbolic_link_is_seen(tmp_path: Path) -> None:
    real = tmp_path / "store" / "panel.xlsx"
    real.parent.mkdir()
    write_workbook(real, basic_sheets())
    link = tmp_path / "panel.xlsx"
    link.symlink_to(real)
    (tmp_path / ".~lock.panel.xlsx#").write_text("someone,host,2026")  # LibreOffice's lock beside the link
    result = runner.invoke(app, ["check", str(link)])
    assert result.exit_code == 2 and "open in a spreadsheet program" in result.output


def test_a_read_only_workbook_is_refused(tmp_path: Path) -> None:
    path = workbook(tmp_path)
    path.chmod(0o444)
    before = path.read_bytes()
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2 and "the file is read-only" in result.output
    assert path.read_bytes() == before


def test_a_hard_linked_workbook_is_refused(tmp_path: Path) -> None:
    path = workbook(tmp_path)
    os.link(path, tmp_path / "other-name.xlsx")
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2 and "2 names (hard links)" in " ".join(result.output.split())


@pytest.mark.skipif(os.geteuid() != 0, reason="giving a file to another owner needs root")
def test_the_owner_and_group_of_a_replaced_workbook_are_kept(tmp_path: Path) -> None:
    path = workbook(tmp_path)
    os.chown(path, 1234, 2345)
    assert runner.invoke(app, ["check", str(path)]).exit_code in (0, 1)
    info = os.stat(path)
    assert (info.st_uid, info.st_gid) == (1234, 2345)


def test_demo_into_a_folder_that_does_not_exist_creates_it(tmp_path: Path) -> None:
    folder = tmp_path / "jobs" / "new"
    result = runner.invoke(app, ["demo", "--folder", str(folder)])
    assert result.exit_code in (0, 1), result.output
    assert f"Created the folder {folder}." in " ".join(result.output.split())
    assert (folder / "alder-quay-remodel.xlsx").exists()
    a_file = tmp_path / "a-file"
    a_file.write_text("x")
    bad = runner.invoke(app, ["demo", "--folder", str(a_file)])
    assert bad.exit_code == 2 and "this is a file, not a folder" in bad.output


def _rebuild(source: Path, dest: Path, rename: dict[str, str], replace: dict[str, tuple[bytes, bytes]]) -> Path:
    with zipfile.ZipFile(source) as zin, zipfile.ZipFile(dest, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename in replace:
                old, new = replace[info.filename]
                data = data.replace(old, new)
            zout.writestr(rename.get(info.filename, info.filename), data)
    return dest


def test_percent_encoded_relationship_targets_are_read_and_written(tmp_path: Path) -> None:
    # a part named "sheet 1.xml", reached through the target "worksheets/sheet%201.xml" (ECMA-376 Part 2 §6.2.2.1)
    plain = workbook(tmp_path, name="plain.xlsx")
    path = _rebuild(
        plain,
        tmp_path / "spaced.xlsx",
        {"xl/worksheets/sheet1.xml": "xl/worksheets/sheet 1.xml"},
        {
            "xl/_rels/workbook.xml.rels": (b"worksheets/sheet1.xml", b"worksheets/sheet%201.xml"),
            "[Content_Types].xml": (b"/xl/worksheets/sheet1.xml", b"/xl/worksheets/sheet%201.xml"),
        },
    )
    plain_check = runner.invoke(app, ["check", str(plain), "--no-write", "--json"])
    spaced_check = runner.invoke(app, ["check", str(path), "--no-write", "--json"])
    assert spaced_check.exit_code == plain_check.exit_code
    assert spaced_check.stdout.replace("spaced.xlsx", "plain.xlsx") == plain_check.stdout
    assert runner.invoke(app, ["check", str(path)]).exit_code in (0, 1)
    with zipfile.ZipFile(path) as archive:
        assert "xl/worksheets/sheet 1.xml" in archive.namelist()  # the user's part kept under its own name


@pytest.mark.parametrize("evil", ["../outside.xml", "/etc/owned.xml", "xl/../../up.xml"])
def test_zip_entries_with_absolute_or_dotdot_names_are_refused(tmp_path: Path, evil: str) -> None:
    plain = workbook(tmp_path, name="plain.xlsx")
    path = tmp_path / "evil.xlsx"
    shutil.copyfile(plain, path)
    with zipfile.ZipFile(path, "a") as archive:
        archive.writestr(evil, b"<x/>")
    before = path.read_bytes()
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2 and "has an absolute name or a '..' segment" in result.output
    assert path.read_bytes() == before


def test_text_that_reads_like_a_formula_carries_the_quote_prefix_style(tmp_path: Path) -> None:
    path = workbook(tmp_path)
    texts = ["=SUM(A1:A3)", "+44 20 7946 0000", "-3 mA", "@here", "\tindented", "plain"]
    write_sheets(path, [SheetData(name="Notes", header=["Text"], rows=[[t] for t in texts])])
    with zipfile.ZipFile(path) as archive:
        styles = archive.read("xl/styles.xml").decode()
        sheets = [n for n in archive.namelist() if "worksheets/" in n and n.endswith(".xml")]
        notes = next(archive.read(n).decode() for n in sheets if "=SUM(A1:A3)" in archive.read(n).decode())
    cell_xfs = re.search(r"<cellXfs[^>]*>(.*?)</cellXfs>", styles, re.S)
    assert cell_xfs is not None
    xfs = re.findall(r"<xf [^>]*?(?:/>|>.*?</xf>)", cell_xfs.group(1), re.S)
    quoted = {i for i, xf in enumerate(xfs) if 'quotePrefix="1"' in xf}
    cells = dict(re.findall(r'<c r="(A\d+)"(?: s="(\d+)")?', notes))
    for row, text in enumerate(texts, start=2):
        style = cells[f"A{row}"]
        assert (int(style) in quoted if style else False) == (text != "plain"), text
    # and the values still read back as the same text (python-calamine)
    grid = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("Notes").to_python()
    assert [r[0] for r in grid[1:]] == texts


def test_the_python_api_refuses_an_existing_out_too(tmp_path: Path) -> None:
    import leakbudget

    path = workbook(tmp_path)
    out = tmp_path / "copy.xlsx"
    leakbudget.check(path, out=out)
    with pytest.raises(LeakbudgetError, match="the file exists"):
        leakbudget.check(path, out=out)
    leakbudget.check(path, out=out, force=True)
