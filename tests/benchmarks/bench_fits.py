"""Stored fits, local workers and a Dask LocalCluster, measured side by side in one run.

    PYTHONPATH=. python tests/benchmarks/bench_fits.py --scale 0.05 --cluster-workers 1,2,4

Builds the invented national programme of ``bench_scale.py`` at ``--scale`` (1.0 = 2,000 stations,
25 seasons, 20 species) in SQLite, then times:

1. the report refitting every trend (``--refit``) against the report reusing the stored fits;
2. the 20 species' trends (full fits, nothing stored) with 1 and with 2 local worker processes;
3. the same fits on a ``distributed.LocalCluster`` of 1, 2 and 4 worker processes (one thread each),
   with the cluster's start-up timed apart;
and checks that every run gives the same numbers.  The machine's other load shows in the figures: run
it when the machine is quiet, and read the ratios rather than the seconds.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.benchmarks.bench_scale import FIRST_YEAR, SEASONS, generate  # noqa: E402


def _same(a, b) -> bool:
    return [t.result.to_dict() for t in a] == [t.result.to_dict() for t in b]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--scale", type=float, default=0.05)
    parser.add_argument("--cluster-workers", default="1,2,4")
    parser.add_argument("--keep", type=Path, default=None)
    args = parser.parse_args()

    from monitor.services import report, setup, trend
    from monitor.services.imports import import_records

    work = args.keep or Path(tempfile.mkdtemp(prefix="bench_fits_"))
    size = generate(work / "files", args.scale)
    db = str(work / "programme.sqlite")
    setup.init_database(db)
    setup.setup_folder(db, work / "files")
    for sheet in sorted((work / "files" / "records").glob("season_*.csv")):
        import_records(db, sheet, who="benchmark")
    print(f"programme: {size}")
    year = FIRST_YEAR + SEASONS - 1

    # 1. the report: refitting everything, then reusing the stored fits
    t0 = time.perf_counter()
    report.write_report(db, year, work / "r1" / str(year), refit=True, pdf=False)
    refit_s = time.perf_counter() - t0
    t0 = time.perf_counter()
    report.write_report(db, year, work / "r2" / str(year), pdf=False)
    stored_s = time.perf_counter() - t0
    t0 = time.perf_counter()
    fitted = trend.fit_programme(db, last_year=year, workers=1, refit=True, save=False)
    fit_only_s = time.perf_counter() - t0
    t0 = time.perf_counter()
    reused = trend.fit_programme(db, last_year=year, workers=1)
    reuse_only_s = time.perf_counter() - t0
    assert all(t.reused for t in reused) and _same(fitted, reused)
    print(f"\nreport, refitting {len(fitted)} trends: {refit_s:.1f} s; with stored fits: {stored_s:.1f} s "
          f"(ratio {stored_s / refit_s:.3f})")
    print(f"  of which the trends: fitted {fit_only_s:.1f} s, read back {reuse_only_s:.2f} s "
          f"(ratio {reuse_only_s / fit_only_s:.3f}); mean fit {fit_only_s / len(fitted):.2f} s, "
          f"{sum(t.result.n_obs for t in fitted) / len(fitted):.0f} visits a fit")

    # 2. local workers
    times = {}
    runs = {}
    for workers in (1, 2):
        t0 = time.perf_counter()
        runs[workers] = trend.fit_programme(db, workers=workers, refit=True, save=False)
        times[workers] = time.perf_counter() - t0
    assert _same(runs[1], runs[2])
    print(f"\ntrends of {len(runs[1])} species, local processes: 1 worker {times[1]:.1f} s, 2 workers "
          f"{times[2]:.1f} s (ratio {times[2] / times[1]:.2f}); same numbers")

    # 3. a LocalCluster of 1, 2, 4 worker processes
    from distributed import LocalCluster

    print("\nDask LocalCluster (worker processes, 1 thread each):")
    print("| workers | start s | fits s | ratio to 1 worker | same numbers |")
    print("|--------:|--------:|-------:|------------------:|:------------:|")
    base = None
    for n in [int(x) for x in args.cluster_workers.split(",")]:
        t0 = time.perf_counter()
        with LocalCluster(n_workers=n, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
            start_s = time.perf_counter() - t0
            t0 = time.perf_counter()
            remote = trend.fit_programme(db, cluster=cluster.scheduler_address, refit=True, save=False)
            fits_s = time.perf_counter() - t0
        base = base or fits_s
        print(f"| {n} | {start_s:.1f} | {fits_s:.1f} | {fits_s / base:.2f} | {'yes' if _same(remote, runs[1]) else 'NO'} |")


if __name__ == "__main__":
    main()
