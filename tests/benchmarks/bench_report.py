"""Benchmark: the annual report for a large programme, whole run with the share of each stage.

    PYTHONPATH=. python tests/benchmarks/bench_report.py                 # 30 species, 500 stations, 15 years
    PYTHONPATH=. python tests/benchmarks/bench_report.py --species 5     # quicker look
    PYTHONPATH=. python tests/benchmarks/bench_report.py --family poisson --no-site-effect

Stages timed side by side in one run: simulating the invented data, fitting (``TrendModel.fit`` with
profile interval and yearly indices, plus ``station_changes``), building the context, drawing the figures
(PNG and SVG) and writing the page (templates, JSON, files).  Prints seconds and shares of the whole run.
Not part of the test run (pytest ignores tests/benchmarks).
"""

from __future__ import annotations

import argparse
import math
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "report"))

from report_testdata import simulate_programme  # noqa: E402

import monitor.report.render as render_module  # noqa: E402
from monitor import columns as C  # noqa: E402
from monitor.report import GradientData, Trigger, build_report_context, render_report  # noqa: E402


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--species", type=int, default=30)
    parser.add_argument("--stations", type=int, default=500)
    parser.add_argument("--years", type=int, default=15)
    parser.add_argument("--sites", type=int, default=5)
    parser.add_argument("--family", default=None, help="trend family (default: the engine's default for counts)")
    parser.add_argument("--no-site-effect", action="store_true")
    parser.add_argument("--no-profile", action="store_true", help="Wald intervals only (skip the profile)")
    parser.add_argument("--seed", type=int, default=2025)
    args = parser.parse_args(argv)

    from monitor.trend import TrendModel, station_changes

    rng = np.random.default_rng(args.seed)
    per_site = math.ceil(args.stations / args.sites)
    last = 2025
    first = last - args.years + 1
    timings = {"simulate": 0.0, "fit": 0.0, "context": 0.0, "draw": 0.0, "write": 0.0}

    t0 = time.perf_counter()
    data = {}
    stations = sites = None
    for i in range(args.species):
        counts, stations, sites = simulate_programme(
            rng, n_sites=args.sites, stations_per_site=per_site, first_year=first, last_year=last,
            annual_change=float(rng.uniform(-0.06, 0.05)))
        data[(f"SP{i + 1:02d}", C.MEASURE_COUNT)] = counts
    timings["simulate"] = time.perf_counter() - t0

    t0 = time.perf_counter()
    results, changes, gradients = {}, {}, {}
    for key, counts in data.items():
        model = TrendModel(counts, measure=C.MEASURE_COUNT, family=args.family,
                           site_effect=not args.no_site_effect)
        results[key] = model.fit(profile=not args.no_profile, indices=True)
        changes[key] = station_changes(counts, C.MEASURE_COUNT)
    timings["fit"] = time.perf_counter() - t0
    for key, counts in data.items():
        season = counts[counts[C.YEAR] == last].merge(stations, on=[C.STATION, C.SITE])
        gradients[key] = GradientData(pd.DataFrame({"gradient": season[C.Y] - season[C.Y].min(),
                                                    "value": season[C.COUNT]}),
                                      "Distance from the southern edge (m)", "Count per quadrat")

    t0 = time.perf_counter()
    triggers = [Trigger(sp, ms, "Keep at or above the first year's level", "decline", 0.3, "Review management",
                        years=10) for sp, ms in results]
    context = build_report_context(
        {"name": "Benchmark programme (invented)"}, last, results, triggers=triggers, stations=stations,
        sites=sites, station_changes=changes, gradients=gradients, generated="benchmark")
    timings["context"] = time.perf_counter() - t0

    original = render_module.draw_figures

    def timed_draw(*a, **k):
        start = time.perf_counter()
        try:
            return original(*a, **k)
        finally:
            timings["draw"] += time.perf_counter() - start

    render_module.draw_figures = timed_draw
    try:
        with tempfile.TemporaryDirectory() as tmp:
            t0 = time.perf_counter()
            folder = render_report(context, Path(tmp) / "report")
            total_render = time.perf_counter() - t0
            size = (folder / "index.html").stat().st_size
            n_figures = len(list((folder / "figures").glob("*.png")))
    finally:
        render_module.draw_figures = original
    timings["write"] = total_render - timings["draw"]

    whole = sum(timings.values())
    rows = len(next(iter(data.values())))
    print(f"report benchmark: {args.species} species x {rows} rows ({len(stations)} stations, {args.years} years), "
          f"family {args.family or 'default'}, site effect {not args.no_site_effect}, "
          f"profile {not args.no_profile}")
    print(f"{'stage':<10}{'seconds':>10}{'share':>8}")
    for stage, seconds in timings.items():
        print(f"{stage:<10}{seconds:>10.1f}{seconds / whole:>8.1%}")
    print(f"{'whole':<10}{whole:>10.1f}")
    print(f"fitting : drawing = {timings['fit'] / timings['draw']:.2f} : 1; {n_figures} figures; "
          f"index.html {size / 1e6:.1f} MB")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
