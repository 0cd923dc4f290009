"""The board plan: whole circuits moved between a board's shared devices, or given an RCBO of their own.

The exact MILP (scipy HiGHS) against brute force over every arrangement of small boards, and the shipped UK flat
(BS 7671:2018 reg. 531.3.2 on each RCD's total; reg. 314.1 lighting over both RCDs).
"""

from __future__ import annotations

import itertools
import json

import numpy as np
import pytest
from typer.testing import CliRunner

from leakbudget.cli import app
from leakbudget.planner.board import NEW_DEVICE_COST, _solve


def brute_force(load, fixed, budget, allowed, rcbo_ok, current, lighting):
    n, m = allowed.shape
    best = None
    for choice in itertools.product(range(m + 1), repeat=n):  # m = an RCBO of its own
        total = fixed.copy()
        cost = 0
        ok = True
        for c, d in enumerate(choice):
            if d == m:
                ok &= bool(rcbo_ok[c])
                cost += NEW_DEVICE_COST
            else:
                ok &= bool(allowed[c, d])
                total[d] += load[c]
                cost += d != current[c]
        ok &= bool(np.all(total <= budget + 1e-9))
        if lighting:
            ok &= len({choice[c] for c in lighting if choice[c] < m}) >= 2
        if ok and (best is None or cost < best):
            best = cost
    return best


def cost_of(solution, current):
    return sum(NEW_DEVICE_COST if rcbo else int(d != current[c]) for c, (d, rcbo) in enumerate(solution))


@pytest.mark.parametrize("seed", range(25))
def test_the_board_milp_is_the_brute_force_optimum(seed):
    rng = np.random.default_rng(seed)
    n, m = int(rng.integers(2, 6)), int(rng.integers(2, 4))
    load = rng.uniform(0.5, 5.0, n).round(2)
    fixed = rng.uniform(0.0, 2.0, m).round(2)
    budget = np.full(m, 9.0)
    allowed = rng.random((n, m)) > 0.2
    current = [int(rng.integers(0, m)) for _ in range(n)]
    for c in range(n):
        allowed[c, current[c]] = True
    rcbo_ok = load <= 9.0
    lighting = [c for c in range(n) if rng.random() < 0.4]
    lighting = lighting if len(lighting) >= 2 else []
    expected = brute_force(load, fixed, budget, allowed, rcbo_ok, current, lighting)
    solution = _solve(load, fixed, budget, allowed, rcbo_ok, current, lighting)
    if expected is None:
        assert solution is None
    else:
        assert solution is not None and cost_of(solution, current) == expected


def test_the_uk_flat_moves_two_circuits_to_rcd2(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    runner = CliRunner()
    shown = runner.invoke(app, ["demo", "--example", "tanners-row-flat"])
    assert shown.exit_code == 0 and "RCD1 is over-budget" in shown.stdout
    result = runner.invoke(app, ["split", "tanners-row-flat.xlsx", "--json", "--no-write"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    moved = {m["circuit"]: m["to"] for m in doc["circuit_assignments"] if m["moved"]}
    assert doc["circuit_moves"] == 2 and set(moved.values()) == {"RCD2"}
    for d in doc["devices"]:
        assert d["leakage_ma"] <= d["budget_ma"]  # every RCD within 0.30 × 30 mA = 9 mA
    lights = {m["circuit"]: m["to"] for m in doc["circuit_assignments"] if m["circuit"] in ("C4", "C5")}
    assert set(lights.values()) == {"RCD1", "RCD2"}  # one trip never darkens the whole flat


def _fill(path, sheets: dict[str, list[dict]]) -> None:  # noqa: ANN001
    """Rows appended under the template's headers, by column name."""
    import openpyxl

    book = openpyxl.load_workbook(path)
    for name, rows in sheets.items():
        sheet = book[name]
        header = [c.value for c in sheet[1]]
        first = sheet.max_row + 1 if sheet.max_row > 1 and sheet.cell(sheet.max_row, 1).value else 2
        for r, row in enumerate(rows, start=first):
            for column, value in row.items():
                sheet.cell(r, header.index(column) + 1, value)
    book.save(path)


def test_a_circuit_is_never_moved_under_a_less_sensitive_device(tmp_path, monkeypatch):
    """A board with a 100 mA time-delayed RCD above two 30 mA RCDs, the first over its budget: moving a circuit up
    under the 100 mA one alone would cure it with the fewest moves, but takes away its 30 mA protection (BS
    7671:2018 reg. 411.3.3); the plan keeps every circuit under a 30 mA RCD and brings both within budget."""
    monkeypatch.chdir(tmp_path)
    runner = CliRunner()
    assert runner.invoke(app, ["template", "board.xlsx"]).exit_code == 0
    circuit = {"Device": "none", "Voltage": 230, "Frequency": 50}
    _fill(
        tmp_path / "board.xlsx",
        {
            "Protection": [
                {"Id": "MAIN", "Device": "rcd-100s", "RCD type": "A", "Rating": 100, "Board": "CU1"},
                {"Id": "RCD1", "Device": "rcd-30", "RCD type": "A", "Upstream": "MAIN", "Rating": 63, "Board": "CU1"},
                {"Id": "RCD2", "Device": "rcd-30", "RCD type": "A", "Upstream": "MAIN", "Rating": 63, "Board": "CU1"},
            ],
            "Circuits": [
                {"Circuit": "C1", **circuit, "Rating": 32, "Rooms": "Kitchen", "Protected by": "RCD1"},
                {"Circuit": "C2", **circuit, "Rating": 32, "Rooms": "Lounge", "Protected by": "RCD1"},
                {"Circuit": "C3", **circuit, "Rating": 20, "Rooms": "Utility", "Protected by": "RCD2"},
            ],
            "Loads": [
                {"Load": "Freezer", "Circuit": "C1", "Leakage": "5 mA", "Room": "Kitchen"},
                {"Load": "Desktops", "Circuit": "C2", "Leakage": "4.5 mA", "Room": "Lounge"},
                {"Load": "Washer", "Circuit": "C3", "Leakage": "2 mA", "Room": "Utility"},
            ],
        },
    )
    result = runner.invoke(app, ["split", "board.xlsx", "--json", "--no-write"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    under = {m["circuit"]: m["to"] for m in doc["circuit_assignments"]}
    assert set(under.values()) <= {"RCD1", "RCD2"}, under  # nothing under MAIN alone
    assert all(d["leakage_ma"] <= d["budget_ma"] for d in doc["devices"])  # 9 mA each (0.3 × 30 mA)
