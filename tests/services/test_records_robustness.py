"""An import is all or nothing even when its process is killed, and two imports at once both land.

* SIGKILL: ``python -m monitor records import`` on a generated sheet is killed (signal 9, which cannot be
  caught) while its transaction is open and its visits are written (run through
  tests/resilience/paused_monitor.py, which installs a pause at the services' fault-injection point); the database is then exactly as before
  (every row of every table, and on SQLite the file's bytes once its rollback journal is replayed, as
  SQLite's atomic commit guarantees: https://www.sqlite.org/atomiccommit.html).
* Concurrency: two processes import two different sheets of the same seasons into one database at the
  same time; both finish, and every visit and value of both files is stored once.  The pause holds
  the first import's transaction open while it has created the season's rounds, so the second must wait
  for or race it (round creation is ``INSERT ... ON CONFLICT DO NOTHING``; transient failures retried).

The programme and sheets are invented (tests/services/test_records_data.py).
"""

from __future__ import annotations

import os
import signal
import subprocess
from pathlib import Path

import numpy as np
import pytest

from monitor.errors import MonitorError
from monitor.services import setup
from monitor.services.common import run_with_retries
from monitor.services.imports import import_records
from tests.conftest import REPO_ROOT
from tests.resilience.paused_monitor import command, wait_for_pause
from tests.services.test_records_data import (
    Template,
    dump,
    make_programme,
    sheet_rows,
    skip_without_postgres,
    write_sheet,
)

N_STATIONS = 600


@pytest.fixture(scope="module", params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def generated(request, tmp_path_factory):
    """A generated programme of 600 annual stations, nothing imported yet."""
    if request.param == "postgresql":
        skip_without_postgres()
    folder = tmp_path_factory.mktemp(f"generated_{request.param}")
    codes = make_programme(folder / "programme", N_STATIONS, first_year=2000)
    template = Template(request.param, folder, lambda url: setup.setup_folder(url, folder / "programme"))
    yield template, codes, folder
    template.close()


def _monitor(db: str, *args: str, pause: float) -> subprocess.Popen:
    """``monitor records import ARGS`` pausing ``pause`` seconds once its visits are written (uncommitted)."""
    env = {**os.environ, "PYTHONPATH": str(REPO_ROOT)}
    return subprocess.Popen([*command(pause), "--db", db, "records", "import", *args],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env, cwd=REPO_ROOT)


def test_an_import_killed_mid_way_leaves_the_database_as_before(generated):
    template, codes, folder = generated
    db = template.copy()
    sheet = write_sheet(folder / f"big_{len(template.made)}.csv",
                        sheet_rows(codes, [2001, 2002, 2003, 2004, 2005], np.random.default_rng(7)))
    before = dump(db)
    before_bytes = Path(db).read_bytes() if template.engine == "sqlite" else None
    process = _monitor(db, str(sheet), pause=60)
    try:
        line = wait_for_pause(process)
        assert f"{5 * N_STATIONS} visits written" in line
        process.send_signal(signal.SIGKILL)
        process.wait(timeout=30)
    finally:
        if process.poll() is None:
            process.kill()
        process.stdout.close()
        process.stderr.close()
    assert process.returncode == -signal.SIGKILL
    if template.engine == "sqlite":
        assert os.path.exists(db + "-journal")  # the hot journal the killed writer left behind
    assert dump(db) == before  # reading replays (rolls back) the journal first
    if before_bytes is not None:
        assert Path(db).read_bytes() == before_bytes
    # and the same file imports completely afterwards
    report = import_records(db, sheet)
    assert report.visits_added == 5 * N_STATIONS


def test_two_imports_at_the_same_time_both_land_completely(generated):
    template, codes, folder = generated
    db = template.copy()
    half = len(codes) // 2
    years = [2010, 2011, 2012]
    sheets = [write_sheet(folder / f"part_{k}_{len(template.made)}.csv",
                          sheet_rows(part, years, np.random.default_rng(k)))
              for k, part in enumerate((codes[:half], codes[half:]))]
    first = _monitor(db, str(sheets[0]), pause=1.5)
    try:
        wait_for_pause(first)  # the first holds new rounds 2010-2012 in an open transaction ...
        second = _monitor(db, str(sheets[1]), pause=0.2)  # ... while the second starts
        outs = [p.communicate(timeout=180) for p in (first, second)]
    finally:
        for p in (first,):
            if p.poll() is None:
                p.kill()
    assert [p.returncode for p in (first, second)] == [0, 0], outs
    rows = dump(db)
    rounds = [r for r in rows["round"]]
    assert sorted(r[2] for r in rounds) == years  # one round per season, not two
    expected_visits = sum(len(sheet.read_text().splitlines()) - 1 for sheet in sheets)
    assert len(rows["visit"]) == expected_visits
    done = sum(line.count(",done,") for sheet in sheets for line in sheet.read_text().splitlines())
    assert len(rows["observation"]) == 5 * done
    assert len(rows["import_batch"]) == 2


class _FakeDriverError(Exception):
    """Stands in for a driver error carrying PostgreSQL's SQLSTATE (psycopg errors have .sqlstate)."""

    def __init__(self, sqlstate: str):
        super().__init__(f"sqlstate {sqlstate}")
        self.sqlstate = sqlstate


def _wrapped(sqlstate: str) -> MonitorError:
    try:
        try:
            raise _FakeDriverError(sqlstate)
        except _FakeDriverError as inner:
            raise MonitorError("database error, nothing was written") from inner
    except MonitorError as outer:
        return outer


def test_transient_failures_are_retried_and_others_are_not():
    # SQLSTATE 40001 serialization_failure and 40P01 deadlock_detected: PostgreSQL documentation,
    # Appendix A "PostgreSQL Error Codes"; both mean "run the transaction again"
    from monitor.db import queries

    assert queries.retryable(_wrapped("40001")) and queries.retryable(_wrapped("40P01"))
    assert not queries.retryable(_wrapped("23514"))  # check_violation: the data are wrong, no retry
    calls = []

    def flaky():
        calls.append(1)
        if len(calls) < 3:
            raise _wrapped("40P01")
        return "done"

    assert run_with_retries(flaky, first_wait=0.001) == "done" and len(calls) == 3
    calls.clear()

    def wrong():
        calls.append(1)
        raise _wrapped("23514")

    with pytest.raises(MonitorError):
        run_with_retries(wrong, first_wait=0.001)
    assert len(calls) == 1
