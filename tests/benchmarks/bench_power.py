"""Benchmark: a power study's speed against a single full fit of the trend engine.

500 simulated data sets of 60 stations x 10 years (6 sites), Poisson-lognormal with station and
site intercepts, each fitted with the trend engine's fast path (profile=False, indices=False),
timed side by side in one run with full fits (profile-likelihood interval and yearly indices)
of the same kind of data.  Invented parameters.

Run from the worktree root:

    PYTHONPATH=. /work/venv/bin/python tests/benchmarks/bench_power.py [--replicates 500] [--workers 2]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import time

import numpy as np

from monitor.power import Design, Scenario, VarianceComponents, simulate_dataset, simulate_power
from monitor.trend import TrendModel

COMPONENTS = VarianceComponents.from_mean("poisson-lognormal", 5.0, station_sd=0.8, site_sd=0.4,
                                          observation_sd=0.3, stations_per_site=10)
DESIGN = Design(60, 10)
SCENARIO = Scenario.from_change(-0.5, 10)


def main(argv: list[str] | None = None) -> dict:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=500)
    parser.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    parser.add_argument("--full-fits", type=int, default=3, help="full fits timed (mean reported)")
    parser.add_argument("--seed", type=int, default=20261)
    args = parser.parse_args(argv)

    rng = np.random.default_rng(args.seed)
    samples = [simulate_dataset(COMPONENTS, DESIGN, SCENARIO, rng) for _ in range(args.full_fits)]

    full_times, fast_times = [], []
    for data in samples:
        t0 = time.perf_counter()
        TrendModel(data, measure="count", family="poisson-lognormal").fit(profile=True, indices=True)
        full_times.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        TrendModel(data, measure="count", family="poisson-lognormal").fit(profile=False, indices=False)
        fast_times.append(time.perf_counter() - t0)
    full = statistics.mean(full_times)
    fast = statistics.mean(fast_times)

    done = [0]

    def progress(n: int, total: int) -> None:
        if n - done[0] >= total // 10 or n == total:
            done[0] = n
            print(f"  {n}/{total}", file=sys.stderr)

    t0 = time.perf_counter()
    result = simulate_power(COMPONENTS, DESIGN, SCENARIO, rng=np.random.default_rng(args.seed + 1),
                            n_replicates=args.replicates, n_workers=args.workers, progress=progress)
    wall = time.perf_counter() - t0
    per_fit_wall = wall / args.replicates
    report = {
        "replicates": args.replicates,
        "workers": args.workers,
        "design": DESIGN.label(),
        "full_fit_s": round(full, 3),
        "fast_fit_s_in_process": round(fast, 3),
        "fast_over_full": round(fast / full, 4),
        "power_run_wall_s": round(wall, 1),
        "power_run_wall_per_data_set_s": round(per_fit_wall, 4),
        "power_run_cpu_per_data_set_s": round(per_fit_wall * args.workers, 4),
        "power_run_over_one_full_fit": round(wall / full, 1),
        "power": round(result.power, 4),
        "power_se": round(result.power_se, 4),
        "approximate_power": round(result.approximation.power, 4) if result.approximation else None,
        "n_failed": result.n_failed,
        "load_average_1min": round(os.getloadavg()[0], 2),
    }
    print(json.dumps(report, indent=2))
    return report


if __name__ == "__main__":
    main()
