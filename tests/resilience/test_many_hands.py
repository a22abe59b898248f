"""Many hands: eight crews import their sheets and correct values at the same moment, and nothing is lost.

The invented demo programme holds seasons 2015-2020.  Its seasons 2021-2023 are split into eight crews'
sheets (a crew is every eighth station), so all eight crews create and fill the same rounds at once.  Each
crew also corrects values it recorded before: a recount of one species through
``monitor records import --correct --reason`` and single values through ``monitor records set``.

Eight processes load their modules, wait at a barrier, and then run their commands at the same moment.
The test then checks, on PostgreSQL (and with ``-m slow`` on SQLite, where writers queue for the file's
lock):

* every command of every crew succeeded: none failed on a deadlock, a serialization failure or a busy
  file (the import and ``records set`` run their transaction again, with backoff, when the database asks);
* the final tables (rounds, import batches, visits, values, observers, covariates and the change log, by
  natural keys, without ids and times) equal those of a serial run of the same commands in one process;
* every value lands exactly once: the values equal those of the demo's own unsplit season files imported
  one after another, with the crews' corrections applied;
* every correction is in the change log once, with its old and new value, reason and who made it.

PostgreSQL's default isolation (read committed) and its SQLSTATE codes for a transaction to run again
(40001 serialization_failure, 40P01 deadlock_detected): PostgreSQL documentation, chapter 13.2 and
Appendix A.  The programme, people and values are invented (demo_programme/).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from tests.conftest import REPO_ROOT
from tests.resilience.tables import demo_stations, records_by_key, season_rows, write_rows
from tests.services.test_records_data import DEMO, Template, build_demo, skip_without_postgres

CREWS = 8
STORED = range(2015, 2021)     # in the database before the crews start
NEW = [2021, 2022, 2023]      # the seasons the crews import, split between them
FIX_SEASONS = (2019, 2020)     # stored seasons a crew recounts (import --correct)
SET_SEASON = 2018              # stored season a crew corrects value by value (records set)
RECOUNTED = "MARVIO:count"


# the default run takes PostgreSQL, where the many hands of a shared programme meet; SQLite (writers queue for
# the file's lock) runs with -m slow
@pytest.fixture(scope="module", params=[pytest.param("postgresql", marks=pytest.mark.postgres),
                                        pytest.param("sqlite", marks=pytest.mark.slow)])
def base(request, tmp_path_factory):
    """The demo with seasons 2015-2020 imported, built once per engine and copied for each run."""
    if request.param == "postgresql":
        skip_without_postgres()
    template = Template(request.param, tmp_path_factory.mktemp(f"hands_{request.param}"),
                        lambda url: build_demo(url, seasons=STORED))
    yield template
    template.close()


def _cell(row: dict, column: str) -> float | None:
    text = (row.get(column) or "").strip()
    return float(text) if text else None


def _work(folder: Path) -> tuple[list[list[dict]], list[tuple]]:
    """Each crew's commands, and every correction they make: (station, year, field, old, new, reason, who)."""
    folder.mkdir(parents=True, exist_ok=True)
    stations = demo_stations()
    crew_of = {code: i % CREWS for i, code in enumerate(stations)}
    jobs: list[list[dict]] = []
    corrections: list[tuple] = []
    for k in range(CREWS):
        user = f"crew{k}"
        commands: list[dict] = []

        def done_rows(year: int, column: str, k=k) -> list[dict]:
            _header, rows = season_rows(year)
            return [r for r in rows if crew_of[r["station"]] == k and r["status"] == "done" and _cell(r, column) is not None]

        # a pin count corrected before the crew's imports, a count after them
        pins = done_rows(SET_SEASON, "SILGRA:pin_hits/10")
        first = pins[0]
        old = _cell(first, "SILGRA:pin_hits/10")
        new = (old + 3) % 11
        reason = f"{user}: pins recounted from the photo"
        commands.append({"user": user, "argv": ["records", "set", first["station"], str(SET_SEASON), "SILGRA",
                                                "pin_hits", f"{new:g}", "--reason", reason]})
        corrections.append((first["station"], SET_SEASON, "SILGRA:pin_hits", old, new, reason, user))

        # a recount of one species on the crew's visits of two stored seasons, as one corrected sheet
        reason = f"{user}: violets recounted on the second sheet"
        fixed = []
        header = []
        for year in FIX_SEASONS:
            header, rows = season_rows(year)
            for r in rows:
                if crew_of[r["station"]] != k:
                    continue
                r = dict(r)
                value = _cell(r, RECOUNTED) if r["status"] == "done" else None
                if value is not None:
                    r[RECOUNTED] = f"{value + 1:g}"
                    corrections.append((r["station"], year, "MARVIO:count", value, value + 1, reason, user))
                fixed.append(r)
        sheet = write_rows(folder / f"crew{k}_recount.csv", header, fixed)
        commands.append({"user": user, "argv": ["records", "import", "--correct", "--reason", reason, str(sheet)]})

        # the crew's part of each new season, one sheet a season, starting at a different season per crew
        sheets = []
        for year in NEW[k % len(NEW):] + NEW[:k % len(NEW)]:
            header, rows = season_rows(year)
            mine = [r for r in rows if crew_of[r["station"]] == k]
            if mine:
                sheets.append(str(write_rows(folder / f"crew{k}_season_{year}.csv", header, mine)))
        commands.append({"user": user, "argv": ["records", "import", *sheets]})

        late = done_rows(SET_SEASON, "CHAORC:count")[-1]
        old = _cell(late, "CHAORC:count")
        reason = f"{user}: orchid count keyed wrongly"
        commands.append({"user": user, "argv": ["records", "set", late["station"], str(SET_SEASON), "CHAORC",
                                                "count", f"{old + 2:g}", "--reason", reason]})
        corrections.append((late["station"], SET_SEASON, "CHAORC:count", old, old + 2, reason, user))
        # and a value of a season the other crews are importing at the same time
        fresh = done_rows(NEW[k % len(NEW)], "GLASED:cover")[0]
        old = _cell(fresh, "GLASED:cover")
        new = round(min(old + 1.5, 100.0) if old < 98 else old - 1.5, 1)
        reason = f"{user}: cover re-estimated"
        commands.append({"user": user, "argv": ["records", "set", fresh["station"], str(NEW[k % len(NEW)]),
                                                "GLASED", "cover", f"{new:g}", "--reason", reason]})
        corrections.append((fresh["station"], NEW[k % len(NEW)], "GLASED:cover", old, new, reason, user))
        jobs.append(commands)
    return jobs, corrections


def _start(folder: Path, name: str, db: str, commands: list[dict]) -> tuple[subprocess.Popen, Path]:
    job = folder / f"{name}.json"
    ready = folder / f"{name}.ready"
    job.write_text(json.dumps({"db": db, "ready": str(ready), "go": str(folder / "go"), "commands": commands}))
    env = {**os.environ, "PYTHONPATH": str(REPO_ROOT)}
    process = subprocess.Popen([sys.executable, "-m", "tests.resilience.crew", str(job)], cwd=REPO_ROOT, env=env,
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    return process, ready


def _run(folder: Path, jobs: dict[str, tuple[str, list[dict]]]) -> dict[str, tuple[int, list[dict], str]]:
    """Start one process per job, release them together, and collect (returncode, results, stderr)."""
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "go").unlink(missing_ok=True)
    started = {name: _start(folder, name, db, commands) for name, (db, commands) in jobs.items()}
    try:
        deadline = time.monotonic() + 120
        while not all(ready.exists() for _p, ready in started.values()):
            dead = [name for name, (p, _r) in started.items() if p.poll() is not None]
            assert not dead, {name: started[name][0].communicate() for name in dead}
            assert time.monotonic() < deadline, "the crews never reached the barrier"
            time.sleep(0.01)
        (folder / "go").write_text("go")
        out = {}
        for name, (process, _ready) in started.items():
            stdout, stderr = process.communicate(timeout=300)
            out[name] = (process.returncode, json.loads(stdout) if stdout.strip() else [], stderr)
        return out
    finally:
        for process, _ready in started.values():
            if process.poll() is None:
                process.kill()
                process.communicate()


def test_eight_crews_at_once_equal_a_serial_run(base, tmp_path, monkeypatch):
    jobs, corrections = _work(tmp_path / "sheets")
    together = base.copy()
    serial = base.copy()

    outcome = _run(tmp_path / "together", {f"crew{k}": (together, commands) for k, commands in enumerate(jobs)})
    for name, (returncode, results, stderr) in outcome.items():
        assert returncode == 0, (name, stderr)
        assert [r["code"] for r in results] == [0] * len(jobs[0]), (name, results, stderr)
        for word in ("deadlock", "could not serialize", "database is locked", "Traceback", "error:"):
            assert word not in stderr, (name, stderr)

    # the crews worked at the same time: every crew started before any crew had finished
    spans = [(results[0]["start"], results[-1]["end"]) for _rc, results, _err in outcome.values()]
    assert max(start for start, _end in spans) < min(end for _start, end in spans)

    # the same commands, crew after crew, in this process
    from monitor.cli.main import main

    for command in (c for commands in jobs for c in commands):
        monkeypatch.setenv("MONITOR_USER", command["user"])
        assert main(["--db", serial, *command["argv"]]) == 0, command

    got = records_by_key(together)
    assert got == records_by_key(serial)

    # every value exactly once: the demo's unsplit season files imported one after another, corrected
    from monitor.services.imports import import_records

    reference = base.copy()
    for year in NEW:
        import_records(reference, DEMO / "records" / f"season_{year}.csv", who="reference")
    expected = {row[:5]: row[5:] for row in records_by_key(reference)["observation"]}
    for station, year, field, _old, new, _reason, _who in corrections:
        species, measure = field.split(":")
        key = (station, year, 0, species, measure)
        assert key in expected, key
        expected[key] = (new, expected[key][1])
    stored = {row[:5]: row[5:] for row in got["observation"]}
    assert len(stored) == len(got["observation"])  # one row per visit, species and measure
    assert stored == expected
    assert len(got["visit"]) == sum(len(season_rows(y)[1]) for y in [*STORED, *NEW])

    # every correction once in the change log, with old and new value, reason and who
    logged = sorted((key[0], key[1], f"{key[3]}:{key[4]}", float(old), float(new), reason, who)
                    for table, key, field, old, new, reason, who in got["change_log"] if table == "observation")
    assert logged == sorted(corrections)
    assert len(got["change_log"]) == len(corrections)  # nothing else was logged
