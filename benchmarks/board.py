"""Benchmark of the board plan (circuits moved between shared devices) on random house boards (invented, seeded).

    PYTHONPATH=. python benchmarks/board.py [--boards N]

Each board: 4 RCDs of 30 mA (budget 9 mA, BS 7671:2018 reg. 531.3.2) on one board, 40 single-phase 230 V 50 Hz
circuits (a third of them lighting), 150 loads with measured leakage drawn so that the board's total fits the four
budgets but two devices start over theirs. Prints, for the whole ``plan_split`` call (load plan, board plan, final
check and verification): the share of boards whose board plan was proven optimal, and the wall time against the
2 s target (ratio = time / 2 s; at most 1 is the target).
"""

from __future__ import annotations

import argparse
import statistics
import time
from pathlib import Path

import numpy as np

from leakbudget.catalogue import built_in
from leakbudget.devices import device
from leakbudget.model import Circuit, Load, Project, SharedDevice
from leakbudget.planner.plan import SplitOptions
from leakbudget.planner.split import plan_split
from leakbudget.provenance import Source
from leakbudget.settings import Settings

TARGET_S = 2.0


def board(seed: int) -> Project:
    rng = np.random.default_rng(seed)
    rcd = device("rcd-30")
    shared = [SharedDevice(f"RCD{k}", rcd, "A", None, 63, "Main board", "single", None, None, k) for k in range(1, 5)]
    circuits = []
    for i in range(40):
        # the first two devices start crowded, the last two nearly empty
        under = f"RCD{1 + (i % 2) if i < 30 else 3 + (i % 2)}"
        circuits.append(
            Circuit(
                circuit_id=f"C{i + 1}",
                device=device("none"),
                rcd_type=None,
                voltage_v=230.0,
                frequency_hz=50.0,
                supply_source=Source.measured("benchmark"),
                system="single",
                rating_a=32.0,
                cable_length_m=None,
                cable_key="generic",
                rooms=(),
                note=None,
                row=i + 2,
                protected_by=under,
                purpose="lighting" if i % 3 == 0 else "sockets",
            )
        )
    loads = []
    for j in range(150):
        c = circuits[j % 40]
        loads.append(
            Load(
                name=f"Load {j + 1}",
                circuit_id=c.circuit_id,
                appliance_key=None,
                quantity=1,
                leakage_ma=float(rng.uniform(0.05, 0.45)),
                y_capacitance_nf=None,
                insulation_resistance_mohm=None,
                power_w=100.0,
                current_a=None,
                leg=("L1",),
                leg_text="L1",
                room=None,
                stays=True,
                note=None,
                row=j + 2,
            )
        )
    return Project(Path(f"board-{seed}.xlsx"), circuits, loads, Settings(), built_in(), protection=shared)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--boards", type=int, default=10)
    args = parser.parse_args()
    times, proven, moved = [], 0, []
    for seed in range(args.boards):
        project = board(seed)
        started = time.perf_counter()
        plan = plan_split(project, SplitOptions(time_limit_s=10))
        times.append(time.perf_counter() - started)
        if plan.board is not None:
            proven += plan.board.optimal and plan.board.feasible
            moved.append(plan.board.circuit_moves)
    print(f"{args.boards} boards of 40 circuits under 4 RCDs, 150 loads")
    print(f"board plan proven optimal: {proven}/{len(moved)} boards that needed one")
    print(f"circuits moved: mean {statistics.mean(moved) if moved else 0:.1f}, worst {max(moved, default=0)}")
    print(
        f"time: mean {statistics.mean(times):.2f} s, worst {max(times):.2f} s; "
        f"ratio worst / {TARGET_S:g} s target = {max(times) / TARGET_S:.2f}"
    )


if __name__ == "__main__":
    main()
