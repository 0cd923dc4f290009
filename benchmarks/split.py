"""Benchmark of the split planner on random houses and buildings (invented, seeded, reproducible).

    PYTHONPATH=. python benchmarks/split.py [--quick]

Instances:
- house-50: one dwelling, 6-8 rooms (some circuits serve two rooms), 50 loads drawn from the appliance catalogue's
  kitchen, bathroom, laundry, garage, outdoor and general rows; UL 943 Class A circuits, 20 A, 120 V 60 Hz; loads
  start on a random circuit of their room (many circuits over budget or rating), 15 % unplaced, some fixed.
- building-500 / building-5000: 10 / 100 such dwellings behind one panel schedule (room names per dwelling).
- open-floor-500 / open-floor-5000: one office floor, 30 mA RCD circuits, 16 A, 230 V 50 Hz, no room names
  (every load may go on every circuit: one room group, the heuristic's case), office catalogue rows, 60 % of the
  loads unplaced.

Every instance uses the ``Current rule`` given by ``--current-rule`` (default ``strict``, the hardest packing: every
load at once within 0.8 × rating, as the planner judged current before the rule existed; ``diversity``, the
workbook default, leaves far fewer moves). For each kind it prints: circuits after the plan against the lower bound (existing + lower bound on new; the
ratio, mean and worst), new circuits against their lower bound, moves, wall time (mean, worst; the whole
plan_split call, check and re-verification included) and the share of instances proven optimal (fewest new
circuits, then fewest moves) and proven best on headroom too.
"""

from __future__ import annotations

import argparse
import statistics
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from leakbudget.catalogue import built_in
from leakbudget.devices import device
from leakbudget.leakage import parse_leg
from leakbudget.model import Circuit, Load, Project
from leakbudget.planner.plan import SplitOptions
from leakbudget.planner.split import plan_split
from leakbudget.provenance import Source
from leakbudget.settings import Settings

HOUSE_ROOMS = {
    "Kitchen": "kitchen",
    "Pantry": "kitchen",
    "Laundry": "laundry",
    "Main bath": "bathroom",
    "Guest bath": "bathroom",
    "Garage": "garage",
    "Workshop": "garage",
    "Patio": "outdoor",
    "Basement": "general",
    "Mudroom": "general",
}
US_SUPPLY = (120.0, 60.0)
EU_SUPPLY = (230.0, 50.0)


@dataclass
class Kind:
    name: str
    loads: int
    instances: int
    time_limit_s: float


def _appliances(categories: set[str], voltage_v: float, max_current_a: float, max_leak_ma: float):
    cat = built_in()
    out = []
    for a in cat.appliances.values():
        if a.category not in categories or not a.typical_power_w:
            continue
        if a.typical_power_w / voltage_v > max_current_a or a.typical_ma > max_leak_ma:
            continue
        out.append(a)
    return sorted(out, key=lambda a: a.key)


def _circuit(
    cid: str, dev: str, supply: tuple[float, float], rating: float, length_m: float, rooms: tuple[str, ...], row: int
) -> Circuit:
    return Circuit(
        circuit_id=cid,
        device=device(dev),
        rcd_type=None,
        voltage_v=supply[0],
        frequency_hz=supply[1],
        supply_source=Source.measured("benchmark"),
        system="single",
        rating_a=rating,
        cable_length_m=length_m,
        cable_key="generic",
        rooms=rooms,
        note=None,
        row=row,
    )


def _load(
    name: str, circuit: str | None, appliance: str, power_w: float, room: str | None, fixed: bool, row: int
) -> Load:
    return Load(
        name=name,
        circuit_id=circuit,
        appliance_key=appliance,
        quantity=1,
        leakage_ma=None,
        y_capacitance_nf=None,
        insulation_resistance_mohm=None,
        power_w=power_w,
        current_a=None,
        leg=parse_leg("L1", "single"),
        leg_text="L1",
        room=room,
        stays=fixed,
        note=None,
        row=row,
    )


def _dwelling(rng: np.random.Generator, prefix: str, n_loads: int, circuits: list[Circuit], loads: list[Load]) -> None:
    names = list(HOUSE_ROOMS)
    rooms = [names[k] for k in sorted(rng.choice(len(names), size=int(rng.integers(6, 9)), replace=False))]
    serving: dict[str, list[str]] = {r: [] for r in rooms}
    for room in rooms:
        for _ in range(int(rng.integers(1, 4))):
            cid = f"{prefix}{room[:3].upper()}{len(serving[room]) + 1}"
            served = (f"{prefix}{room}",)
            if rng.random() < 0.15:
                other = rooms[int(rng.integers(len(rooms)))]
                if other != room:
                    served += (f"{prefix}{other}",)
                    serving[other].append(cid)
            serving[room].append(cid)
            circuits.append(
                _circuit(cid, "gfci-a", US_SUPPLY, 20.0, float(rng.uniform(5, 40)), served, len(circuits) + 2)
            )
    fixed_leak: dict[str, float] = {}
    for k in range(n_loads):
        room = rooms[int(rng.integers(len(rooms)))]
        pool = _appliances({HOUSE_ROOMS[room]}, 120.0, 14.0, 1.5) or _appliances({"general"}, 120.0, 14.0, 1.5)
        a = pool[int(rng.integers(len(pool)))]
        power = round(a.typical_power_w * float(rng.uniform(0.6, 1.1)), 0)
        cid = None if rng.random() < 0.15 else serving[room][int(rng.integers(len(serving[room])))]
        fixed = cid is not None and rng.random() < 0.08 and fixed_leak.get(cid, 0.0) + a.typical_ma < 0.6
        if fixed:
            fixed_leak[cid] = fixed_leak.get(cid, 0.0) + a.typical_ma
        loads.append(_load(f"{prefix}{a.key} {k + 1}", cid, a.key, power, f"{prefix}{room}", fixed, len(loads) + 2))


CURRENT_RULE = ["strict"]  # the hardest packing: every load at once within 0.8 × rating (--current-rule)


def _project(circuits: list[Circuit], loads: list[Load], supply: tuple[float, float]) -> Project:
    settings = Settings()
    settings.values["Voltage"], settings.values["Frequency"] = supply
    settings.values["Current rule"] = CURRENT_RULE[0]
    return Project(Path("benchmark.xlsx"), circuits, loads, settings, built_in())


def house(rng: np.random.Generator, n_loads: int) -> Project:
    circuits: list[Circuit] = []
    loads: list[Load] = []
    dwellings = max(1, n_loads // 50)
    for d in range(dwellings):
        _dwelling(rng, f"A{d + 1} " if dwellings > 1 else "", n_loads // dwellings, circuits, loads)
    return _project(circuits, loads, US_SUPPLY)


def open_floor(rng: np.random.Generator, n_loads: int) -> Project:
    pool = _appliances({"office"}, 230.0, 10.0, 2.5)
    weights = np.array([4.0 if a.key in ("desktop-pc", "monitor", "laptop-supply") else 1.0 for a in pool])
    weights /= weights.sum()
    n_circuits = max(4, n_loads // 25)
    circuits = [
        _circuit(f"F{k + 1}", "rcd-30", EU_SUPPLY, 16.0, float(rng.uniform(10, 60)), (), k + 2)
        for k in range(n_circuits)
    ]
    loads = []
    for k in range(n_loads):
        a = pool[int(rng.choice(len(pool), p=weights))]
        power = round(a.typical_power_w * float(rng.uniform(0.6, 1.1)), 0)
        cid = None if rng.random() < 0.6 else circuits[int(rng.integers(n_circuits))].circuit_id
        loads.append(_load(f"{a.key} {k + 1}", cid, a.key, power, None, False, k + 2))
    return _project(circuits, loads, EU_SUPPLY)


KINDS = {
    "house-50": (house, Kind("house-50", 50, 100, 2.0)),
    "building-500": (house, Kind("building-500", 500, 5, 10.0)),
    "building-5000": (house, Kind("building-5000", 5000, 2, 25.0)),
    "open-floor-500": (open_floor, Kind("open-floor-500", 500, 5, 10.0)),
    "open-floor-5000": (open_floor, Kind("open-floor-5000", 5000, 2, 25.0)),
}


def run(kind_name: str, instances: int | None = None, seed: int = 20261201) -> dict[str, float]:
    make, kind = KINDS[kind_name]
    rng = np.random.default_rng(seed)
    ratios, new_ratio_gaps, moves, times, proven, headroom, feasible = [], [], [], [], 0, 0, 0
    count = instances or kind.instances
    for _ in range(count):
        project = make(rng, kind.loads)
        existing = sum(c.device.protected for c in project.circuits)
        t0 = time.perf_counter()
        plan = plan_split(project, SplitOptions(time_limit_s=kind.time_limit_s))
        times.append(time.perf_counter() - t0)
        used = existing + plan.new_count
        bound = existing + plan.lower_bound_new_circuits
        ratios.append(used / bound)
        new_ratio_gaps.append(plan.gap)
        moves.append(plan.moves)
        proven += plan.optimal
        headroom += plan.optimal and plan.headroom_optimal
        feasible += plan.feasible
    return {
        "instances": count,
        "loads": kind.loads,
        "ratio_mean": statistics.fmean(ratios),
        "ratio_max": max(ratios),
        "gap_new_max": max(new_ratio_gaps),
        "moves_mean": statistics.fmean(moves),
        "time_mean_s": statistics.fmean(times),
        "time_max_s": max(times),
        "proven": proven / count,
        "headroom_proven": headroom / count,
        "feasible": feasible / count,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer instances (a smoke run)")
    parser.add_argument("--kind", choices=list(KINDS), action="append", help="run only these kinds")
    parser.add_argument(
        "--current-rule",
        choices=("strict", "all-on", "diversity"),
        default="strict",
        help="the Current rule setting of every instance (default strict: every load at once within 0.8 × rating, "
        "a limit the plan must meet, the hardest packing)",
    )
    args = parser.parse_args()
    CURRENT_RULE[0] = args.current_rule
    print(f"Current rule: {args.current_rule}")
    header = (
        f"{'kind':<16}{'n':>4}{'loads':>7}{'used/LB mean':>14}{'worst':>8}{'new gap':>9}{'moves':>8}"
        f"{'time mean':>11}{'worst':>8}{'optimal':>9}{'+headroom':>11}"
    )
    print(header)
    for name in args.kind or list(KINDS):
        r = run(name, instances=(10 if name == "house-50" else 1) if args.quick else None)
        print(
            f"{name:<16}{r['instances']:>4}{r['loads']:>7}{r['ratio_mean']:>14.4f}{r['ratio_max']:>8.4f}"
            f"{r['gap_new_max']:>9}{r['moves_mean']:>8.1f}{r['time_mean_s']:>10.2f}s{r['time_max_s']:>7.2f}s"
            f"{100 * r['proven']:>8.0f}%{100 * r['headroom_proven']:>10.0f}%",
            flush=True,
        )


if __name__ == "__main__":
    main()
