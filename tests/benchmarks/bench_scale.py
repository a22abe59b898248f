"""Benchmark: a programme of national size end to end, stage by stage, with time and peak memory.

An invented programme (generated here, seeded) at ``--scale 1.0``: 2,000 stations in 40 sites (50 a site),
every station visited every season for 25 seasons (2000-2024), 20 target species (8 counts, 5 cover,
3 frequency of 25 cells, 2 pin hits of 10 pins, 2 presence), about 3 % of visits missed:
50,000 visits and about 970,000 stored values.  ``--scale 0.1`` is a tenth of the programme: 4 sites of
50 stations with the same seasons and species (about 97,000 values).

The generator writes the set-up files a user would prepare (programme.json, sites.geojson, stations.csv,
species.csv, observers.csv, panels.csv, windows.csv) and one wide field sheet per season; then each stage
runs in a process of its own, so that its peak memory is its own:

  setup      ``monitor.services.setup``: create the schema and load the set-up files
  import     ``monitor.services.imports.import_records`` on the 25 season sheets, one after another
             (the first and the last season's times are printed too: a growing gap would mean each
             import pays for what is already stored)
  quality    ``monitor.services.quality.run_checks`` on everything stored
  schedule   ``monitor.services.schedule.plan_season`` for the next season (2025), stored
  trends     ``monitor.services.trend.fit_programme``: every species, the full fit (profile-likelihood
             interval of the annual change and yearly indices), as ``monitor trend`` runs it
  report     ``monitor.services.report.write_report`` for 2024: fits every species again (full fit),
             season estimates, figures, HTML

Each stage's wall time and the process's peak resident memory (``resource.getrusage`` ``ru_maxrss``; the
interpreter with its libraries loaded is printed as ``base``) are printed; ``--tracemalloc`` adds the peak
of Python allocations (slower).  Two scales in one run print the ratio of each figure, side by side:
linear growth in the programme's size is 10x from 0.1 to 1.0.

    PYTHONPATH=. python tests/benchmarks/bench_scale.py --scale 0.1 --scale 1.0 --engine sqlite
    PYTHONPATH=. python tests/benchmarks/bench_scale.py --scale 0.1 --engine postgresql \\
        --pg-url postgresql+psycopg://postgres@127.0.0.1:55432/monitor_test

``--stages`` picks stages (setup and import always run first); ``--keep DIR`` keeps the files and the
SQLite database there; ``--json FILE`` writes the figures.  Everything is invented: no real reserve,
species or people.
"""

from __future__ import annotations

import argparse
import csv
import datetime as dt
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
import uuid
from pathlib import Path

import numpy as np

REPO_ROOT = Path(__file__).resolve().parents[2]
FIRST_YEAR, SEASONS = 2000, 25
STATIONS_PER_SITE, FULL_SITES = 50, 40
SPECIES = ([(f"CNT{i:02d}", "count", None) for i in range(1, 9)]
           + [(f"COV{i:02d}", "cover", None) for i in range(1, 6)]
           + [(f"FRQ{i:02d}", "frequency", 25) for i in range(1, 4)]
           + [(f"PIN{i:02d}", "pin_hits", 10) for i in range(1, 3)]
           + [(f"PRS{i:02d}", "presence", None) for i in range(1, 3)])
STAGES = ("setup", "import", "quality", "schedule", "trends", "report")
EPSG = 32630


# --- the invented programme ---------------------------------------------------------------------------------

def generate(folder: Path, scale: float, seed: int = 20240601) -> dict:
    """Write the set-up files and season sheets of the invented programme; return its size."""
    rng = np.random.default_rng(seed)
    folder.mkdir(parents=True, exist_ok=True)
    n_sites = max(1, round(FULL_SITES * scale))
    (folder / "programme.json").write_text(json.dumps({
        "code": "BIG", "name": "Broadland Uplands invented national programme", "crs_epsg": EPSG,
        "description": "Generated for the scale benchmark (invented).", "organisation": "Invented Trust",
        "contact": "benchmark officer (invented)", "blanks_mean_zero": False, "change_margin": 0.02,
        "settings": {"minutes_per_quadrat": {"count": 1, "cover": 1, "frequency": 2, "pin_hits": 1, "presence": 0.5},
                     "setup_minutes": 3},
        "protocols": [{"code": "P1", "description": "generated protocol", "effective_from": f"{FIRST_YEAR}-01-01"}],
    }, indent=1))
    features, sites = [], []
    for k in range(n_sites):
        x0, y0 = 400000.0 + (k % 8) * 3000.0, 5600000.0 + (k // 8) * 3000.0
        code = f"S{k + 1:02d}"
        sites.append((code, x0, y0))
        ring = [[x0, y0], [x0 + 1000.0, y0], [x0 + 1000.0, y0 + 1000.0], [x0, y0 + 1000.0], [x0, y0]]
        features.append({"type": "Feature", "properties": {"code": code, "name": f"Invented site {code}",
                                                           "habitat": "invented grassland", "base_x": x0 - 20.0,
                                                           "base_y": y0 - 20.0},
                         "geometry": {"type": "Polygon", "coordinates": [ring]}})
    (folder / "sites.geojson").write_text(json.dumps({
        "type": "FeatureCollection", "crs": {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{EPSG}"}},
        "features": features}))
    stations = []
    with open(folder / "stations.csv", "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["code", "site", "x", "y", "quadrat_width_m", "quadrat_length_m", "placement", "panel",
                         "established"])
        for code, x0, y0 in sites:
            xy = rng.uniform(20.0, 980.0, (STATIONS_PER_SITE, 2))
            for j in range(STATIONS_PER_SITE):
                station = f"{code}-{j + 1:03d}"
                stations.append(station)
                writer.writerow([station, code, f"{x0 + xy[j, 0]:.1f}", f"{y0 + xy[j, 1]:.1f}", "1.0", "1.0",
                                 "random", "ANNUAL", f"{FIRST_YEAR}-04-01"])
    with open(folder / "species.csv", "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["code", "scientific_name", "common_name", "measure", "n", "sensitive", "window_start",
                         "window_end"])
        for i, (code, measure, n) in enumerate(SPECIES):
            writer.writerow([code, f"Plantago inventa-{i + 1} (invented)", f"invented plant {i + 1}", measure,
                             "" if n is None else n, "no", "", ""])
    observers = [f"OB{i:02d}" for i in range(1, 21)]
    with open(folder / "observers.csv", "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["code", "name", "trained"])
        for i, code in enumerate(observers):
            writer.writerow([code, f"Invented Recorder {i + 1}", f"{FIRST_YEAR - 1}-04-01"])
    (folder / "panels.csv").write_text(f"code,rule,start_year\nANNUAL,[1-0],{FIRST_YEAR}\n")
    (folder / "windows.csv").write_text("scope,start,end\nprogramme,05-01,09-15\n")

    # values: a station level and a yearly trend per species, seeded
    n = len(stations)
    site_of = np.repeat(np.arange(n_sites), STATIONS_PER_SITE)
    header = ["station", "date", "observers", "status", "repeat", "protocol", "notes",
              *[f"{code}:{measure}" + (f"/{k}" if k else "") for code, measure, k in SPECIES]]
    level = rng.normal(0.0, 0.6, (len(SPECIES), n)) + rng.normal(0.0, 0.4, (len(SPECIES), n_sites))[:, site_of]
    slope = rng.normal(-0.01, 0.03, len(SPECIES))
    values = 0
    sheets = []
    for t in range(SEASONS):
        year = FIRST_YEAR + t
        start = dt.date(year, 5, 20)
        days = rng.integers(0, 100, n)
        missed = rng.random(n) < 0.03
        team = rng.integers(0, len(observers) - 1, n)
        eta = level + slope[:, None] * (t - SEASONS / 2) + rng.normal(0.0, 0.2, (len(SPECIES), n))
        columns = []
        for s, (_code, measure, k) in enumerate(SPECIES):
            if measure == "count":
                columns.append([str(v) for v in rng.poisson(np.exp(1.2 + eta[s]))])
            elif measure == "cover":
                p = 1.0 / (1.0 + np.exp(-(eta[s] - 1.5)))
                columns.append([f"{v:.1f}" for v in np.round(100.0 * p, 1)])
            elif measure in ("frequency", "pin_hits"):
                columns.append([str(v) for v in rng.binomial(k, 1.0 / (1.0 + np.exp(-(eta[s] - 0.5))))])
            else:
                columns.append([str(v) for v in (rng.random(n) < 1.0 / (1.0 + np.exp(-eta[s]))).astype(int)])
        path = folder / "records" / f"season_{year}.csv"
        path.parent.mkdir(exist_ok=True)
        with open(path, "w", newline="", encoding="utf-8") as handle:
            writer = csv.writer(handle)
            writer.writerow(header)
            for i, station in enumerate(stations):
                date = (start + dt.timedelta(days=int(days[i]))).isoformat()
                if missed[i]:
                    writer.writerow([station, date, "", "missed", "no", "", "not reached", *[""] * len(SPECIES)])
                else:
                    crew = f"{observers[team[i]]};{observers[team[i] + 1]}"
                    writer.writerow([station, date, crew, "done", "no", "", "", *[c[i] for c in columns]])
                    values += len(SPECIES)
        sheets.append(path)
    return {"sites": n_sites, "stations": n, "seasons": SEASONS, "species": len(SPECIES),
            "visits": n * SEASONS, "values": values}


# --- one stage in its own process -----------------------------------------------------------------------------

def _maxrss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # kilobytes on Linux


def run_stage(stage: str, db: str, folder: Path, use_tracemalloc: bool) -> dict:
    from monitor.services import quality, report, schedule, setup, trend  # noqa: F401 (loaded: base)
    from monitor.services.imports import import_records

    base = _maxrss_mb()
    if use_tracemalloc:
        import tracemalloc

        tracemalloc.start()
    extra: dict = {}
    started = time.perf_counter()
    if stage == "setup":
        setup.init_database(db)
        setup.setup_folder(db, folder)
    elif stage == "import":
        times = []
        for sheet in sorted((folder / "records").glob("season_*.csv")):
            t0 = time.perf_counter()
            got = import_records(db, sheet, who="benchmark")
            times.append(time.perf_counter() - t0)
            assert got.visits_added > 0, got
        extra = {"first_season_s": round(times[0], 2), "last_season_s": round(times[-1], 2)}
    elif stage == "quality":
        run = quality.run_checks(db, current_year=FIRST_YEAR + SEASONS)
        extra = {"flags": run.found}
    elif stage == "schedule":
        n_sites = max(1, len(json.loads((folder / "sites.geojson").read_text())["features"]))
        plan = schedule.plan_season(db, FIRST_YEAR + SEASONS, teams=max(2, n_sites // 4), seed=1)
        extra = {"due": len(plan.due), "teams": max(2, n_sites // 4)}
    elif stage == "trends":
        fits = trend.fit_programme(db)
        extra = {"fits": len(fits), "rows_per_fit": int(np.mean([f.result.n_obs for f in fits]))
                 if fits and hasattr(fits[0].result, "n_obs") else None}
    elif stage == "report":
        out = report.write_report(db, FIRST_YEAR + SEASONS - 1, folder / "reports" / str(FIRST_YEAR + SEASONS - 1))
        extra = {"report_mb": round(sum(p.stat().st_size for p in out.rglob("*") if p.is_file()) / 2**20, 1)}
    else:
        raise SystemExit(f"unknown stage {stage}")
    seconds = time.perf_counter() - started
    out = {"stage": stage, "seconds": round(seconds, 2), "base_mb": round(base, 1), "peak_mb": round(_maxrss_mb(), 1),
           **extra}
    if use_tracemalloc:
        out["python_peak_mb"] = round(tracemalloc.get_traced_memory()[1] / 2**20, 1)
    return out


# --- the driver -----------------------------------------------------------------------------------------------

def _postgres_database(admin_url: str) -> str:
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url

    url = make_url(admin_url)
    name = f"monitor_bench_{uuid.uuid4().hex[:10]}"
    engine = create_engine(url, isolation_level="AUTOCOMMIT")
    with engine.connect() as connection:
        connection.execute(text(f'CREATE DATABASE "{name}"'))
    engine.dispose()
    return url.set(database=name).render_as_string(hide_password=False)


def _drop_postgres(db_url: str, admin_url: str) -> None:
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url

    engine = create_engine(make_url(admin_url), isolation_level="AUTOCOMMIT")
    with engine.connect() as connection:
        connection.execute(text(f'DROP DATABASE IF EXISTS "{make_url(db_url).database}"'))
    engine.dispose()


def _database_size_mb(db: str) -> float | None:
    if "://" not in db:
        return round(os.path.getsize(db) / 2**20, 1)
    from sqlalchemy import create_engine, text

    engine = create_engine(db)
    with engine.connect() as connection:
        size = connection.execute(text("SELECT pg_database_size(current_database())")).scalar_one()
    engine.dispose()
    return round(size / 2**20, 1)


def run_scale(scale: float, engine: str, work: Path, stages: list[str], pg_url: str | None, use_tracemalloc: bool,
              timeout: float) -> dict:
    folder = work / f"scale_{scale:g}"
    t0 = time.perf_counter()
    size = generate(folder, scale)
    size["generate_s"] = round(time.perf_counter() - t0, 1)
    print(f"\nscale {scale:g} on {engine}: {size}", flush=True)
    db = str(folder / "programme.sqlite") if engine == "sqlite" else _postgres_database(pg_url)
    results = []
    try:
        for stage in stages:
            command = [sys.executable, __file__, "--stage", stage, "--db", db, "--folder", str(folder)]
            if use_tracemalloc:
                command.append("--tracemalloc")
            env = {**os.environ, "PYTHONPATH": str(REPO_ROOT)}
            try:
                done = subprocess.run(command, capture_output=True, text=True, env=env, cwd=REPO_ROOT, timeout=timeout)
            except subprocess.TimeoutExpired:
                results.append({"stage": stage, "seconds": None, "error": f"stopped after {timeout:g} s"})
                print(f"  {stage:<9} stopped after {timeout:g} s", flush=True)
                break
            if done.returncode != 0:
                results.append({"stage": stage, "seconds": None, "error": done.stderr.strip().splitlines()[-1:]})
                print(f"  {stage:<9} FAILED: {done.stderr[-2000:]}", flush=True)
                break
            row = json.loads(done.stdout.strip().splitlines()[-1])
            results.append(row)
            print("  " + "  ".join(f"{k}={v}" for k, v in row.items()), flush=True)
        size["database_mb"] = _database_size_mb(db)
    finally:
        if engine == "postgresql":
            _drop_postgres(db, pg_url)
    return {"scale": scale, "engine": engine, "size": size, "stages": results}


def print_table(runs: list[dict]) -> None:
    print("\n" + "stage".ljust(10) + "".join(f"{'s @' + format(r['scale'], 'g'):>12}{'MB @' + format(r['scale'], 'g'):>12}"
                                            for r in runs) + ("   time ratio  memory ratio" if len(runs) == 2 else ""))
    names = [s["stage"] for s in runs[0]["stages"]]
    for name in names:
        rows = [next((s for s in r["stages"] if s["stage"] == name), {}) for r in runs]
        line = name.ljust(10) + "".join(f"{row.get('seconds') if row.get('seconds') is not None else '-':>12}"
                                        f"{row.get('peak_mb', '-'):>12}" for row in rows)
        if len(rows) == 2 and all(row.get("seconds") for row in rows):
            grow = rows[1]["peak_mb"] - rows[1]["base_mb"], rows[0]["peak_mb"] - rows[0]["base_mb"]
            line += f"{rows[1]['seconds'] / rows[0]['seconds']:>13.1f}x"
            line += f"{grow[0] / grow[1]:>13.1f}x" if grow[1] > 1 else f"{'-':>14}"
        print(line)
    if len(runs) == 2:
        print("(memory ratio: peak above the loaded interpreter's base, larger run over smaller; "
              f"the programme grows {runs[1]['size']['values'] / runs[0]['size']['values']:.1f}x in values)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--scale", type=float, action="append", help="1.0 = 2,000 stations (repeatable)")
    parser.add_argument("--engine", choices=("sqlite", "postgresql"), default="sqlite")
    parser.add_argument("--pg-url", default=os.environ.get("MONITOR_TEST_POSTGRES_URL"),
                        help="server where a database may be created (default MONITOR_TEST_POSTGRES_URL)")
    parser.add_argument("--stages", default=",".join(STAGES))
    parser.add_argument("--keep", type=Path, default=None, help="keep the generated files and databases here")
    parser.add_argument("--json", type=Path, default=None, help="write the figures here")
    parser.add_argument("--tracemalloc", action="store_true", help="also trace Python allocations (slower)")
    parser.add_argument("--timeout", type=float, default=1200.0, help="seconds a stage may take")
    # internal: run one stage in this process
    parser.add_argument("--stage", help=argparse.SUPPRESS)
    parser.add_argument("--db", help=argparse.SUPPRESS)
    parser.add_argument("--folder", type=Path, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.stage:
        print(json.dumps(run_stage(args.stage, args.db, args.folder, args.tracemalloc)))
        return
    if args.engine == "postgresql" and not args.pg_url:
        raise SystemExit("--engine postgresql needs --pg-url or MONITOR_TEST_POSTGRES_URL")
    stages = [s for s in STAGES if s in args.stages.split(",") or s in ("setup", "import")]
    work = args.keep or Path(tempfile.mkdtemp(prefix="monitor_bench_scale_"))
    runs = [run_scale(scale, args.engine, work, stages, args.pg_url, args.tracemalloc, args.timeout)
            for scale in (args.scale or [0.1])]
    print_table(runs)
    if args.json:
        args.json.write_text(json.dumps(runs, indent=1))
    if args.keep is None:
        import shutil

        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
