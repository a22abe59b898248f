"""Stored fits, local workers and a Dask LocalCluster, measured side by side in one run.

    PYTHONPATH=. python tests/benchmarks/bench_fits.py --scale 1.0 --parts report
    PYTHONPATH=. python tests/benchmarks/bench_fits.py --scale 0.1 --parts workers,cluster --repeats 3

Builds the invented national programme of ``bench_scale.py`` at ``--scale`` (1.0 = 2,000 stations,
25 seasons, 20 species, about a million values) in SQLite (or reuses the one kept in ``--keep DIR``), then:

report   the report refitting every trend (``--refit``), then with the stored fits into a new folder (every
         figure drawn), then again into that folder (figures reused from the report it replaces); the
         numbers and figures of the refitting and the stored report are compared (they must be the same),
         and the 20 trends alone are timed fitted and read back from ``stored_fit``;
workers  the 20 species' trends (full fits, nothing stored) with 1 and with 2 local worker processes,
         ``--repeats`` times in alternating order (1,2 / 2,1 / ...), with the CPU time used (this process and
         its worker processes) beside the wall time, and what the tasks cost to send (pickled size, time);
cluster  the same fits on a ``distributed.LocalCluster`` of ``--cluster-workers`` processes (one thread
         each), the cluster's start-up and its workers' first load of the engine timed apart.

Every figure is printed with the machine's load average (1, 5, 15 minutes) when it was taken: the
development machine is shared, so read the ratios and the load beside them rather than the seconds.  Every
run is checked to give the same numbers.
"""

from __future__ import annotations

import argparse
import json
import os
import pickle
import resource
import statistics
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.benchmarks.bench_scale import FIRST_YEAR, SEASONS, generate  # noqa: E402


def _same(a, b) -> bool:
    return [t.result.to_dict() for t in a] == [t.result.to_dict() for t in b]


def _load() -> str:
    return "load " + " ".join(f"{x:.1f}" for x in os.getloadavg())


def _cpu() -> float:
    """CPU seconds of this process and of its finished child processes (the pool's workers)."""
    own = resource.getrusage(resource.RUSAGE_SELF)
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


def build(work: Path, scale: float) -> str:
    from monitor.services import setup
    from monitor.services.imports import import_records

    db = work / "programme.sqlite"
    if db.exists():
        print(f"programme: reusing {db}")
        return str(db)
    t0 = time.perf_counter()
    size = generate(work / "files", scale)
    setup.init_database(str(db))
    setup.setup_folder(str(db), work / "files")
    for sheet in sorted((work / "files" / "records").glob("season_*.csv")):
        import_records(str(db), sheet, who="benchmark")
    print(f"programme: {size}, built in {time.perf_counter() - t0:.0f} s")
    return str(db)


def _numbers(folder: Path) -> dict:
    doc = json.loads((folder / "report.json").read_text())
    for fit in doc["fits"]:
        del fit["reused"], fit["fitted"]
    return doc


def _figures(folder: Path) -> dict:
    return {p.name: p.read_bytes() for p in (folder / "figures").iterdir()}


def part_report(db: str, work: Path) -> None:
    from monitor.services import report, trend

    year = FIRST_YEAR + SEASONS - 1
    rows = []

    def timed(label, function):
        before = _load()
        t0 = time.perf_counter()
        out = function()
        seconds = time.perf_counter() - t0
        rows.append((label, seconds, before, _load()))
        print(f"  {label}: {seconds:.1f} s ({before} before, {_load()} after)", flush=True)
        return out

    print("\nreport (no PDF):")
    refit_dir = timed("report, refitting every trend (--refit)",
                      lambda: report.write_report(db, year, work / "refit" / str(year), refit=True, pdf=False))
    stored_dir = timed("report, stored fits, figures drawn (a new folder)",
                       lambda: report.write_report(db, year, work / "stored" / str(year), pdf=False))
    first_numbers = _numbers(stored_dir)
    first_figures = _figures(stored_dir)
    timed("report, stored fits, figures reused (written again into its folder)",
          lambda: report.write_report(db, year, work / "stored" / str(year), pdf=False))
    same_report = _numbers(refit_dir) == first_numbers == _numbers(stored_dir)
    same_figures = _figures(refit_dir) == first_figures == _figures(stored_dir)
    reused = timed("the trends alone, read back from stored_fit", lambda: trend.fit_programme(db, last_year=year,
                                                                                             workers=1))
    assert all(t.reused for t in reused)
    base = rows[0][1]
    print("\n| what | time | ratio to the refitting report | load before | load after |")
    print("|---|---:|---:|---|---|")
    for label, seconds, before, after in rows:
        print(f"| {label} | {seconds:.1f} s | {seconds / base:.3f} | {before[5:]} | {after[5:]} |")
    print(f"\nstored against refitted: report.json numbers and words the same: {same_report}; figures byte for "
          f"byte the same: {same_figures}")
    print(f"{len(reused)} trends, {sum(t.result.n_obs for t in reused) / len(reused):.0f} visits a fit")


def part_workers(db: str, repeats: int, species: list[str] | None) -> None:
    from monitor.services import trend
    from monitor.services.analyses import FitTask

    print("\nlocal worker processes (full fits, nothing stored):")
    order = [(1, 2) if i % 2 == 0 else (2, 1) for i in range(repeats)]
    times: dict[int, list[float]] = {1: [], 2: []}
    cpus: dict[int, list[float]] = {1: [], 2: []}
    runs = {}
    print("| run | workers | wall s | CPU s (all processes) | CPU / wall | load before |")
    print("|---:|---:|---:|---:|---:|---|")
    for i, pair in enumerate(order, start=1):
        for workers in pair:
            before = _load()
            c0 = _cpu()
            t0 = time.perf_counter()
            runs[workers] = trend.fit_programme(db, workers=workers, refit=True, save=False, keep_data=True,
                                                species=species)
            wall = time.perf_counter() - t0
            cpu = _cpu() - c0
            times[workers].append(wall)
            cpus[workers].append(cpu)
            print(f"| {i} | {workers} | {wall:.1f} | {cpu:.1f} | {cpu / wall:.2f} | {before[5:]} |", flush=True)
        assert _same(runs[1], runs[2])
    m1, m2 = statistics.median(times[1]), statistics.median(times[2])
    print(f"\nmedians: 1 worker {m1:.1f} s, 2 workers {m2:.1f} s, ratio {m2 / m1:.2f}; CPU medians "
          f"{statistics.median(cpus[1]):.1f} s / {statistics.median(cpus[2]):.1f} s; same numbers: yes")
    # what the work costs to send: every task's table pickled (each is sent once, to the worker that fits it)
    tasks = [FitTask(t.species, t.measure, t.area_kind, t.area, {}, t.data) for t in runs[1]]
    t0 = time.perf_counter()
    sizes = [len(pickle.dumps(task, protocol=pickle.HIGHEST_PROTOCOL)) for task in tasks]
    dumps = time.perf_counter() - t0
    results = [len(pickle.dumps(t.result, protocol=pickle.HIGHEST_PROTOCOL)) for t in runs[1]]
    print(f"sending the {len(tasks)} tasks: {sum(sizes) / 2**20:.1f} MB pickled in {dumps:.2f} s (largest "
          f"{max(sizes) / 2**20:.2f} MB); results {sum(results) / 2**10:.0f} kB in all")


def part_cluster(db: str, counts: list[int], species: list[str] | None) -> None:
    import importlib

    from distributed import Client, LocalCluster

    from monitor.services import trend

    print("\nDask LocalCluster (worker processes, 1 thread each):")
    print("| workers | start s | load the engine s | fits s | ratio to 1 worker | same numbers | load before |")
    print("|--------:|--------:|--------:|-------:|------------------:|:------------:|---|")
    base = None
    local = trend.fit_programme(db, workers=1, refit=True, save=False, species=species) if counts else None
    for n in counts:
        before = _load()
        t0 = time.perf_counter()
        with LocalCluster(n_workers=n, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
            start_s = time.perf_counter() - t0
            # each worker process loads the engine (numpy, scipy, pandas, monitor) once: timed apart
            t0 = time.perf_counter()
            with Client(cluster.scheduler_address) as client:
                client.run(importlib.import_module, "monitor.services.trend")
            warm_s = time.perf_counter() - t0
            t0 = time.perf_counter()
            remote = trend.fit_programme(db, cluster=cluster.scheduler_address, refit=True, save=False,
                                         species=species)
            fits_s = time.perf_counter() - t0
        base = base or fits_s
        print(f"| {n} | {start_s:.1f} | {warm_s:.1f} | {fits_s:.1f} | {fits_s / base:.2f} | "
              f"{'yes' if _same(remote, local) else 'NO'} | {before[5:]} |", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--scale", type=float, default=0.05)
    parser.add_argument("--parts", default="report,workers,cluster")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--cluster-workers", default="1,2,4")
    parser.add_argument("--species", type=int, default=None, help="workers and cluster: the first N species only")
    parser.add_argument("--keep", type=Path, default=None, help="build (or reuse) the programme in this folder")
    args = parser.parse_args()
    parts = set(args.parts.split(","))

    work = args.keep or Path(tempfile.mkdtemp(prefix="bench_fits_"))
    work.mkdir(parents=True, exist_ok=True)
    print(f"{_load()}; {os.cpu_count()} cores")
    db = build(work, args.scale)
    if "report" in parts:
        part_report(db, work)
    species = None
    if args.species:
        from tests.benchmarks.bench_scale import SPECIES

        species = [code for code, _measure, _n in SPECIES[:args.species]]
    if "workers" in parts:
        part_workers(db, args.repeats, species)
    if "cluster" in parts:
        part_cluster(db, [int(x) for x in args.cluster_workers.split(",")], species)
    print(f"\n{_load()} at the end")


if __name__ == "__main__":
    main()
