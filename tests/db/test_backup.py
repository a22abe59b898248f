"""Backup and restore: every value round-trips, between SQLite and PostgreSQL too; damage is refused."""

from __future__ import annotations

import pytest

from monitor.db import Store
from monitor.db.models import metadata
from monitor.errors import DataError, InputError
from monitor.services import backup
from tests.conftest import POSTGRES_URL, _postgres_database


def _values(db: str) -> dict[str, list[tuple]]:
    store = Store.open(db)
    try:
        with store.engine.connect() as connection:
            out = {}
            for table in metadata.sorted_tables:
                rows = connection.execute(table.select().order_by(*table.primary_key.columns)).fetchall()
                out[table.name] = [tuple(_normal(v) for v in r) for r in rows]
            return out
    finally:
        store.dispose()


def _normal(value):
    import datetime as dt

    if isinstance(value, dt.datetime) and value.tzinfo is not None:
        return value.astimezone(dt.UTC).replace(tzinfo=None)  # the same instant, whichever engine stored it
    return value


def test_round_trip_into_an_empty_database(demo_db, empty_db_url, tmp_path):
    manifest = backup.backup_database(demo_db, tmp_path / "b")
    assert manifest["tables"]["observation"]["rows"] > 1000
    loaded, _revision = backup.restore_database(empty_db_url, tmp_path / "b")
    assert loaded["observation"] == manifest["tables"]["observation"]["rows"]
    assert _values(empty_db_url) == _values(demo_db)


@pytest.mark.postgres
def test_demo_moves_sqlite_to_postgresql_and_back(demo_db, tmp_path):
    if not POSTGRES_URL:
        pytest.skip("PostgreSQL run skipped: set MONITOR_TEST_POSTGRES_URL (.ci/run does)")
    generator = _postgres_database()
    pg = next(generator)
    try:
        backup.backup_database(demo_db, tmp_path / "from_sqlite")
        backup.restore_database(pg, tmp_path / "from_sqlite")
        backup.backup_database(pg, tmp_path / "from_pg")
        back = str(tmp_path / "back.sqlite")
        backup.restore_database(back, tmp_path / "from_pg")
        original = _values(demo_db)
        assert _values(pg) == original
        assert _values(back) == original
        # the sequences continue after the restored ids: a new row gets a fresh id
        store = Store.open(pg)
        with store.engine.begin() as connection:
            from sqlalchemy import text

            new_id = connection.execute(text(
                "INSERT INTO observer (programme_id, code, name) VALUES (1, 'NEW1', 'New Person') RETURNING id"
            )).scalar_one()
        store.dispose()
        assert new_id > max(r[0] for r in original["observer"])
    finally:
        next(generator, None)


def test_damaged_backup_is_refused_before_anything_is_written(demo_db, empty_db_url, tmp_path):
    backup.backup_database(demo_db, tmp_path / "b")
    path = tmp_path / "b" / "observation.csv"
    data = path.read_bytes()
    path.write_bytes(data.replace(b",3.0,", b",4.0,", 1))
    with pytest.raises(InputError, match="checksum"):
        backup.restore_database(empty_db_url, tmp_path / "b")


def test_restore_refuses_a_database_holding_data(demo_db, tmp_path):
    import shutil

    backup.backup_database(demo_db, tmp_path / "b")
    copy = tmp_path / "copy.sqlite"
    shutil.copy(demo_db, copy)
    before = copy.read_bytes()
    with pytest.raises(DataError, match="not empty"):
        backup.restore_database(str(copy), tmp_path / "b")
    assert copy.read_bytes() == before
