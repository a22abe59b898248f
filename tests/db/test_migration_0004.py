"""Revision 0004: season plans move from the programme settings into tables of their own and back,
value for value, on SQLite and PostgreSQL."""

from __future__ import annotations

import json

import pytest
import sqlalchemy as sa

from monitor.db import Store, migrate
from monitor.services import schedule, setup
from monitor.services.imports import import_records

PLAN_TABLES = ("season_plan", "season_plan_team", "season_plan_team_day")


def _rows(store: Store, table: str) -> list[dict]:
    with store.engine.connect() as connection:
        rows = connection.execute(sa.text(f"SELECT * FROM {table} ORDER BY id")).mappings().all()
    return [{k: v for k, v in r.items() if k != "created_at"} for r in rows]


def _before_0004() -> str:
    from alembic.script import ScriptDirectory

    from monitor.config import migrations_dir

    return ScriptDirectory(str(migrations_dir())).get_revision("0004").down_revision


def _settings(store: Store) -> dict:
    with store.engine.connect() as connection:
        return json.loads(connection.execute(sa.text("SELECT settings_json FROM programme")).scalar())


@pytest.fixture
def planned_db(db_url, demo_source):
    setup.setup_folder(db_url, demo_source)
    import_records(db_url, demo_source / "records" / "season_2026.csv")
    schedule.plan_season(db_url, 2027, teams=2, seed=5)
    schedule.plan_season(db_url, 2028, teams=2, seed=6, hours_per_day=6.0)
    return db_url


def test_plans_go_back_into_settings_on_downgrade_and_into_tables_on_upgrade(planned_db):
    store = Store.open(planned_db)
    try:
        tables = {t: _rows(store, t) for t in PLAN_TABLES}
        assert len(tables["season_plan"]) == 2 and len(tables["season_plan_team"]) == 4
        assert "season_plans" not in _settings(store)
        plan_2027 = schedule.stored_plan(store, store.programme(), 2027)
        # down to the revision before 0004 (later revisions go first), then back up to head
        before = _before_0004()
        migrate.downgrade(store.engine, before)
        assert migrate.current_revision(store.engine) == before
        with store.engine.connect() as connection:
            present = set(sa.inspect(connection).get_table_names())
        assert not present & set(PLAN_TABLES)
        # the earlier layout: settings["season_plans"][YEAR] with crews and team-days
        old = _settings(store)["season_plans"]
        assert sorted(old) == ["2027", "2028"]
        assert [t["code"] for t in old["2027"]["crews"]["teams"]] == ["T1", "T2"]
        assert old["2028"]["seed"] == 6
        days = old["2027"]["team_days"]
        assert [(d["team"], d["date"], d["site"], d["route_m"], d["start_time"]) for d in days] == [
            (td.team, td.date.isoformat(), td.site, td.route_m, td.start_time.isoformat())
            for td in plan_2027.team_days]
        assert all(d["members"] == list(next(td.members for td in plan_2027.team_days if td.team == d["team"]))
                   for d in days)
        migrate.upgrade(store.engine)
        assert "season_plans" not in _settings(store)
        assert {t: _rows(store, t) for t in PLAN_TABLES} == tables
        again = schedule.stored_plan(store, store.programme(), 2027)
        assert again.team_days == plan_2027.team_days and again.seed == plan_2027.seed == 5
    finally:
        store.dispose()


def test_plans_compared_between_years(planned_db):
    store = Store.open(planned_db)
    try:
        from monitor.db import queries

        table = queries.season_plans(store, store.programme().id)
    finally:
        store.dispose()
    assert list(table["year"]) == [2027, 2028]
    assert list(table["teams"]) == [2, 2]
    assert (table["team_days"] > 0).all() and (table["route_km"] > 0).all()


def test_replanning_replaces_the_plan_record(planned_db):
    schedule.plan_season(planned_db, 2027, teams=1, seed=9, replace=True)
    store = Store.open(planned_db)
    try:
        plans = _rows(store, "season_plan")
        teams = _rows(store, "season_plan_team")
    finally:
        store.dispose()
    assert sorted(p["seed"] for p in plans) == [6, 9]
    assert len(teams) == 3  # 1 team for 2027 now, 2 for 2028
