"""Revision 0007: the shoot-height measure (its row and its CHECK), up and down on SQLite and PostgreSQL,
without touching the records already held; the downgrade refuses while a record uses the measure."""

from __future__ import annotations

import pytest
import sqlalchemy as sa
from sqlalchemy.exc import IntegrityError

from monitor.db import Store, migrate
from monitor.services import setup
from monitor.services.imports import import_records
from tests.db.test_migrations import _values

CODE = "shoot_height"


def _measure_codes(engine) -> list[str]:
    with engine.connect() as connection:
        return [r[0] for r in connection.execute(sa.text("SELECT code FROM measure ORDER BY code"))]


def _insert_height(engine, value: float, n: str = "NULL") -> None:
    with engine.begin() as connection:
        visit, species = connection.execute(sa.text(
            "SELECT v.id, s.id FROM visit v, species s WHERE v.status = 'done' ORDER BY v.id, s.id")).first()
        connection.execute(sa.text(
            f"INSERT INTO observation (visit_id, species_id, measure, value, n) VALUES ({visit}, {species}, "
            f"'{CODE}', {value}, {n})"))


def _observation_indexes(engine) -> list:
    with engine.connect() as connection:
        return sorted((i["name"], tuple(i["column_names"])) for i in sa.inspect(connection).get_indexes("observation"))


@pytest.fixture
def recorded_db(db_url, demo_source):
    setup.setup_folder(db_url, demo_source)
    import_records(db_url, demo_source / "records" / "season_2015.csv")
    return db_url


def test_shoot_height_down_and_up_keeps_every_record(recorded_db):
    store = Store.open(recorded_db)
    try:
        assert migrate.current_revision(store.engine) == "0007" == migrate.head_revision()
        assert CODE in _measure_codes(store.engine)
        values, indexes = _values(store), _observation_indexes(store.engine)
        assert values["observation"]
        migrate.downgrade(store.engine, "0003")
        assert migrate.current_revision(store.engine) == "0003"
        assert _measure_codes(store.engine) == ["count", "cover", "frequency", "pin_hits", "presence"]
        with pytest.raises(IntegrityError):   # the measure is unknown again (foreign key)
            _insert_height(store.engine, 12.5)
        down = _values(store)
        assert {k: v for k, v in down.items() if k != "measure"} == \
            {k: v for k, v in values.items() if k != "measure" and k in down}
        migrate.upgrade(store.engine)
        assert _values(store) == values
        assert _observation_indexes(store.engine) == indexes
        # the CHECK came back with the row: above 0 and no n
        with pytest.raises(IntegrityError):
            _insert_height(store.engine, 0)
        with pytest.raises(IntegrityError):
            _insert_height(store.engine, 12.5, "4")
        _insert_height(store.engine, 12.5)
    finally:
        store.dispose()


def test_downgrade_refuses_while_a_record_uses_shoot_height(recorded_db):
    store = Store.open(recorded_db)
    try:
        _insert_height(store.engine, 31.0)
        before = _values(store)
        with pytest.raises(RuntimeError, match="1 record"):
            migrate.downgrade(store.engine, "0003")
        assert migrate.current_revision(store.engine) == "0007"
        assert _values(store) == before
    finally:
        store.dispose()
