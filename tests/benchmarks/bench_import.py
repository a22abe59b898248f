"""Benchmark: import 1,000,000 observation rows into SQLite, validation included, against raw inserts.

An invented programme of 10,000 annual stations gets a 20-season wide field sheet (200,000 visits with
five target values each = 1,000,000 observation rows).  Two copies of the same freshly set-up database
are used side by side in one run:

* import: ``monitor.services.imports.import_records`` on the CSV: hashing, reading, whole-file
  validation against the programme, planning, writing, commit;
* raw: Python's ``sqlite3`` ``executemany`` of the same rows (import batch, rounds, visits, observers of
  each visit, observations) into the same tables, the tuples prepared before the clock starts.

Printed: both times and their ratio (target: within 3x).  Row counts of the two databases are compared.

Run:  PYTHONPATH=. python tests/benchmarks/bench_import.py [--stations 10000] [--years 20] [--keep DIR]
"""

from __future__ import annotations

import argparse
import csv
import datetime as dt
import shutil
import sqlite3
import tempfile
import time
from pathlib import Path

import numpy as np

from monitor.services import setup
from monitor.services.imports import import_records
from tests.services.test_records_data import SPECIES_COLUMNS, make_programme, sheet_rows, write_sheet

MEASURES = [(c.split(":")[0], c.split(":")[1].split("/")[0], int(c.split("/")[1]) if "/" in c else None)
            for c in SPECIES_COLUMNS]


def raw_rows(con: sqlite3.Connection, sheet: Path) -> tuple[list, list, list, list]:
    """The rows an import of ``sheet`` writes, as tuples for executemany (built before timing)."""
    station = dict(con.execute("SELECT code, id FROM station"))
    species = dict(con.execute("SELECT code, id FROM species"))
    observer = dict(con.execute("SELECT code, id FROM observer"))
    protocol = con.execute("SELECT id FROM protocol_version").fetchone()[0]
    first_visit = (con.execute("SELECT coalesce(max(id), 0) FROM visit").fetchone()[0] or 0) + 1
    years, visits, observations, teams = set(), [], [], []
    with open(sheet, newline="") as handle:
        reader = csv.reader(handle)
        next(reader)
        for k, row in enumerate(reader):
            year = int(row[1][:4])
            years.add(year)
            visit_id = first_visit + k
            visits.append((station[row[0]], year, row[1], row[3], 0, protocol, row[6], 1))
            if row[3] == "done":
                for j, (code, measure, n) in enumerate(MEASURES):
                    observations.append((visit_id, species[code], measure, float(row[7 + j]), n))
                teams.extend((visit_id, observer[o]) for o in dict.fromkeys(row[2].split(";")))
    return sorted(years), visits, observations, teams


def raw_insert(db: Path, years: list[int], visits: list, observations: list, teams: list) -> float:
    con = sqlite3.connect(db)
    con.execute("PRAGMA foreign_keys = ON")  # as the application connects
    start = time.perf_counter()
    with con:
        con.execute("INSERT INTO import_batch (programme_id, kind, file_name, content_hash, row_count, imported_by, "
                    "imported_at) VALUES (1, 'records', 'raw', 'raw', ?, 'bench', ?)",
                    (len(visits), dt.datetime.now(dt.UTC).isoformat()))
        round_id = {}
        for year in years:
            cursor = con.execute("INSERT INTO round (programme_id, year, window_start, window_end, status) "
                                 "VALUES (1, ?, ?, ?, 'open')", (year, f"{year}-05-01", f"{year}-09-15"))
            round_id[year] = cursor.lastrowid
        con.executemany("INSERT INTO visit (station_id, round_id, date, status, repeat_no, protocol_id, notes, "
                        "import_batch_id) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                        [(s, round_id[y], *rest) for s, y, *rest in visits])
        con.executemany("INSERT INTO observation (visit_id, species_id, measure, value, n) VALUES (?, ?, ?, ?, ?)",
                        observations)
        con.executemany("INSERT INTO visit_observer (visit_id, observer_id) VALUES (?, ?)", teams)
    elapsed = time.perf_counter() - start
    con.close()
    return elapsed


def counts(db: Path) -> dict[str, int]:
    con = sqlite3.connect(db)
    try:
        return {t: con.execute(f"SELECT count(*) FROM {t}").fetchone()[0]
                for t in ("round", "visit", "observation", "visit_observer", "import_batch")}
    finally:
        con.close()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stations", type=int, default=10_000)
    parser.add_argument("--years", type=int, default=20)
    parser.add_argument("--seed", type=int, default=20260501)
    parser.add_argument("--keep", type=Path, default=None, help="work in this folder and keep it")
    args = parser.parse_args()
    work = args.keep or Path(tempfile.mkdtemp(prefix="bench_import_"))
    work.mkdir(parents=True, exist_ok=True)
    try:
        codes = make_programme(work / "programme", args.stations, first_year=2000)
        base = work / "base.sqlite"
        setup.init_database(str(base))
        setup.setup_folder(str(base), work / "programme")
        rows = sheet_rows(codes, list(range(2001, 2001 + args.years)), np.random.default_rng(args.seed),
                          missed_share=0.0)
        sheet = write_sheet(work / "sheet.csv", rows)
        imported, raw = work / "import.sqlite", work / "raw.sqlite"
        shutil.copy(base, imported)
        shutil.copy(base, raw)
        con = sqlite3.connect(raw)
        years, visits, observations, teams = raw_rows(con, sheet)
        con.close()
        print(f"sheet: {len(visits):,} visits, {len(observations):,} observation rows, {len(teams):,} observer links; "
              f"{sheet.stat().st_size / 1e6:.0f} MB")

        raw_seconds = raw_insert(raw, years, visits, observations, teams)
        start = time.perf_counter()
        report = import_records(str(imported), sheet, who="bench")
        import_seconds = time.perf_counter() - start
        assert report.observations_added == len(observations), (report.observations_added, len(observations))
        a, b = counts(imported), counts(raw)
        assert a == b, (a, b)
        print(f"raw sqlite3 executemany: {raw_seconds:8.1f} s")
        print(f"monitor records import:  {import_seconds:8.1f} s  (read, validate, plan, write, commit)")
        print(f"ratio import / raw:      {import_seconds / raw_seconds:8.2f}  (target <= 3)")
    finally:
        if args.keep is None:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
