"""Reading commands read one consistent snapshot, on SQLite and PostgreSQL.

An import that commits while a reading command runs is either wholly visible to it or not at all: inside
``read_snapshot`` every read sees the database as at its start (PostgreSQL REPEATABLE READ; an SQLite
read transaction, during which the writer waits to commit).
"""

from __future__ import annotations

import threading
import time

from monitor.db import Store, queries, read_snapshot
from monitor.services import trend
from monitor.services.imports import import_records
from tests.conftest import REPO_ROOT

SEASONS = REPO_ROOT / "demo_programme" / "records"


def _visits(store: Store) -> int:
    return int(store.frame("SELECT count(*) AS n FROM visit")["n"].iloc[0])


def test_reads_inside_a_snapshot_do_not_see_an_import_committed_meanwhile(programme_db):
    import_records(programme_db, SEASONS / "season_2024.csv")
    done = threading.Event()
    errors: list[BaseException] = []

    def importer():
        try:
            import_records(programme_db, SEASONS / "season_2025.csv")
        except BaseException as exc:  # noqa: BLE001 - reported by the test
            errors.append(exc)
        finally:
            done.set()

    with read_snapshot(programme_db) as outer:
        before = _visits(outer)
        thread = threading.Thread(target=importer)
        thread.start()
        done.wait(timeout=5 if "://" in programme_db else 1.5)  # PostgreSQL commits; SQLite waits for us
        inner = Store.open(programme_db)  # a service opening the database inside the snapshot shares it
        assert inner is outer
        assert _visits(inner) == before
        inner.dispose()  # a no-op for the shared store
        assert _visits(outer) == before
    thread.join(timeout=60)
    assert not errors, errors
    fresh = Store.open(programme_db)
    try:
        assert _visits(fresh) > before  # the import landed, whole, once the snapshot ended
    finally:
        fresh.dispose()


def test_a_trend_run_fits_every_species_from_the_same_snapshot(programme_db):
    import_records(programme_db, SEASONS / "season_2023.csv")
    import_records(programme_db, SEASONS / "season_2024.csv")
    started = []

    def progress(i, n, species):
        if i == 1 and not started:  # after the first species is fitted, another user imports a season
            thread = threading.Thread(target=import_records,
                                      args=(programme_db, SEASONS / "season_2025.csv"))
            thread.start()
            started.append(thread)
            time.sleep(2.0 if "://" in programme_db else 0.3)

    fits = trend.fit_programme(programme_db, progress=progress)
    started[0].join(timeout=60)
    years = {tuple(f.result.years) for f in fits}
    assert years == {(2023, 2024)}, years  # no species saw 2025, though it was committed mid-run on PostgreSQL
    store = Store.open(programme_db)
    try:
        assert 2025 in set(queries.visits_table(store, store.programme().id)["year"])
    finally:
        store.dispose()
