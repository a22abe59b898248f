"""Benchmark: plan a season for 5,000 stations over 20 sites with 6 teams.

Reports the planning time and the total route length against walking each team-day's
stations in nearest-neighbour order, measured side by side in one run.  Invented reserve.

Run:  PYTHONPATH=. python tests/benchmarks/bench_schedule.py [--seed N]
"""

from __future__ import annotations

import argparse
import datetime as dt
import time

import numpy as np
import pandas as pd
from shapely.geometry import box

from monitor.design import balanced_acceptance
from monitor.schedule import CrewSettings, Team, nearest_neighbour_length, plan_season


def build(seed: int) -> tuple[pd.DataFrame, CrewSettings]:
    rng = np.random.default_rng(seed)
    frames, starts = [], {}
    for s in range(20):
        col, row = divmod(s, 5)
        x0, y0 = col * 3000.0, row * 2500.0
        site = box(x0, y0, x0 + 1800, y0 + 1500)
        st = balanced_acceptance(site, 250, rng, prefix=f"S{s:02d}-").stations
        st["site"] = f"S{s:02d}"
        frames.append(st)
        starts[f"S{s:02d}"] = (x0 + 20.0, y0 + 20.0)
    due = pd.concat(frames, ignore_index=True)
    due["window_start"] = dt.date(2026, 5, 1)
    due["window_end"] = dt.date(2026, 8, 31)
    due["effort_min"] = 18.0
    due["overdue_years"] = 0
    teams = tuple(Team(f"T{k}", (f"OBS{2 * k}", f"OBS{2 * k + 1}")) for k in range(6))
    return due, CrewSettings(teams, starts)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seed", type=int, default=2026)
    args = ap.parse_args()
    due, crews = build(args.seed)
    t0 = time.perf_counter()
    plan = plan_season(due, crews, year=2026, rng=args.seed, randomise_site_order=True)
    t_plan = time.perf_counter() - t0
    t0 = time.perf_counter()
    nn = nearest_neighbour_length(plan)
    t_nn = time.perf_counter() - t0
    total = plan.total_route_m
    print(f"stations: {len(due)}  sites: 20  teams: 6")
    print(f"plan: {plan.summary()}")
    print(f"planning time: {t_plan:.2f} s  (re-ordering by nearest neighbour alone: {t_nn:.2f} s)")
    print(f"total route: planned {total / 1000:.1f} km, nearest-neighbour order {nn / 1000:.1f} km, "
          f"ratio {total / nn:.3f} ({100 * (1 - total / nn):.1f} % shorter)")


if __name__ == "__main__":
    main()
