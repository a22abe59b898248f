"""Integrity lives in the database: each CHECK, unique and foreign-key rule rejects a bad row.

Run on SQLite and, with MONITOR_TEST_POSTGRES_URL set, on PostgreSQL.  The rules come from the
foundation issue (count >= 0; 0 <= cover <= 100; 0 <= k <= n; quadrat sides > 0; one observation per
visit, species and measure; one visit per station and round unless marked a repeat; no cascade that
deletes observations).
"""

from __future__ import annotations

import pytest
from sqlalchemy import text
from sqlalchemy.exc import IntegrityError

BASE = [
    "INSERT INTO programme (id, code, name, description, organisation, contact, crs_epsg, default_quadrat_width_m,"
    " default_quadrat_length_m, blanks_mean_zero, allow_lone_working, change_margin, settings_json, created_at)"
    " VALUES (1, 'P', 'Programme', '', '', '', 32630, 1, 1, false, false, 0.02, '{}', '2026-01-01 00:00:00')",
    "INSERT INTO site (id, programme_id, code, name, habitat, area_m2, access_notes) VALUES (1, 1, 'S', '', '', 1000, '')",
    "INSERT INTO station (id, programme_id, code, site_id, placement, x, y, crs_epsg, fix_method, quadrat_width_m,"
    " quadrat_length_m, state, retired_reason, marker, relocation_notes)"
    " VALUES (1, 1, 'Q1', 1, 'random', 0, 0, 32630, '', 1, 1, 'in_service', '', '', '')",
    "INSERT INTO species (id, programme_id, code, scientific_name, common_name, sensitive) VALUES (1, 1, 'SP', '', '', false)",
    "INSERT INTO round (id, programme_id, year, window_start, window_end, status) VALUES (1, 1, 2026, '2026-05-01', '2026-09-01', 'open')",
    "INSERT INTO visit (id, station_id, round_id, date, status, repeat_no, notes) VALUES (1, 1, 1, '2026-06-01', 'done', 0, '')",
]


def _observation(value: float, measure: str = "count", n: str = "NULL", obs_id: int = 10, visit: int = 1) -> str:
    return (
        f"INSERT INTO observation (id, visit_id, species_id, measure, value, n) "
        f"VALUES ({obs_id}, {visit}, 1, '{measure}', {value}, {n})"
    )


@pytest.fixture
def engine(store):
    with store.engine.begin() as connection:
        for sql in BASE:
            connection.execute(text(sql))
    return store.engine


def _rejected(engine, sql: str) -> bool:
    try:
        with engine.begin() as connection:
            connection.execute(text(sql))
    except IntegrityError:
        return True
    return False


@pytest.mark.parametrize(
    "sql",
    [
        _observation(3),
        _observation(0),
        _observation(42.5, "cover"),
        _observation(0, "cover"),
        _observation(100, "cover"),
        _observation(25, "frequency", "25"),
        _observation(0, "pin_hits", "10"),
        _observation(1, "presence"),
        _observation(12.5, "shoot_height"),
        _observation(0.1, "shoot_height"),
    ],
)
def test_good_values_are_accepted(engine, sql):
    assert not _rejected(engine, sql)


@pytest.mark.parametrize(
    "sql, rule",
    [
        (_observation(-1), "count >= 0"),
        (_observation(2.5), "count is a whole number"),
        (_observation(100.5, "cover"), "cover <= 100"),
        (_observation(-0.1, "cover"), "cover >= 0"),
        (_observation(26, "frequency", "25"), "k <= n (cells)"),
        (_observation(11, "pin_hits", "10"), "k <= n (pins)"),
        (_observation(-1, "pin_hits", "10"), "k >= 0"),
        (_observation(3, "frequency", "NULL"), "n required for k of n"),
        (_observation(3, "frequency", "0"), "n > 0"),
        (_observation(2, "presence"), "presence is 0 or 1"),
        (_observation(3, "count", "25"), "n only for k of n"),
        (_observation(3, "biomass"), "measure must be known (foreign key)"),
        (_observation(0, "shoot_height"), "shoot height > 0"),
        (_observation(-2, "shoot_height"), "shoot height > 0"),
        (_observation(12, "shoot_height", "10"), "no n for shoot height"),
        (
            "INSERT INTO station (id, programme_id, code, site_id, placement, x, y, crs_epsg, fix_method, quadrat_width_m,"
            " quadrat_length_m, state, retired_reason, marker, relocation_notes)"
            " VALUES (2, 1, 'Q2', 1, 'random', 0, 0, 32630, '', 0, 1, 'in_service', '', '', '')",
            "quadrat side > 0",
        ),
        (
            "INSERT INTO station (id, programme_id, code, site_id, placement, x, y, crs_epsg, fix_method, quadrat_width_m,"
            " quadrat_length_m, state, retired_reason, marker, relocation_notes)"
            " VALUES (2, 1, 'Q2', 1, 'thrown', 0, 0, 32630, '', 1, 1, 'in_service', '', '', '')",
            "placement from the known methods",
        ),
        (
            "INSERT INTO station (id, programme_id, code, site_id, placement, x, y, crs_epsg, fix_method, quadrat_width_m,"
            " quadrat_length_m, state, retired_reason, marker, relocation_notes)"
            " VALUES (2, 1, 'Q1', 1, 'random', 0, 0, 32630, '', 1, 1, 'in_service', '', '', '')",
            "station code unique",
        ),
        (
            "INSERT INTO station (id, programme_id, code, site_id, placement, x, y, crs_epsg, fix_method, quadrat_width_m,"
            " quadrat_length_m, state, retired_reason, marker, relocation_notes)"
            " VALUES (2, 1, 'Q2', 99, 'random', 0, 0, 32630, '', 1, 1, 'in_service', '', '', '')",
            "site must exist (foreign key)",
        ),
        (
            "INSERT INTO station (id, programme_id, code, site_id, placement, x, y, crs_epsg, fix_method, quadrat_width_m,"
            " quadrat_length_m, state, retired_reason, marker, relocation_notes)"
            " VALUES (2, 1, 'Q2', 1, 'random', 0, 0, 32630, '', 1, 1, 'retired', '', '', '')",
            "a retired station has a retired date",
        ),
        (
            "INSERT INTO visit (id, station_id, round_id, date, status, repeat_no, notes) VALUES (2, 1, 1, '2026-06-02', 'done', 0, '')",
            "one visit per station and round unless a repeat",
        ),
        (
            "INSERT INTO visit (id, station_id, round_id, date, status, repeat_no, notes) VALUES (2, 1, 1, '2026-06-02', 'skipped', 1, '')",
            "visit status from the known outcomes",
        ),
        (
            "INSERT INTO round (id, programme_id, year, window_start, window_end, status) VALUES (2, 1, 2025, '2025-09-01', '2025-05-01', 'open')",
            "a window opens before it closes",
        ),
        ("INSERT INTO site (id, programme_id, code, name, habitat, area_m2, access_notes) VALUES (2, 1, 'T', '', '', 0, '')",
         "site area > 0"),
        (
            "INSERT INTO change_log (programme_id, table_name, row_id, field, old_value, new_value, reason, changed_by, changed_at)"
            " VALUES (1, 'observation', 10, 'value', '1', '2', '', 'me', '2026-01-01 00:00:00')",
            "a correction carries a reason",
        ),
    ],
)
def test_bad_rows_are_rejected(engine, sql, rule):
    assert _rejected(engine, sql), f"the database accepted a row breaking: {rule}"


def test_repeat_visit_is_allowed_when_marked(engine):
    sql = "INSERT INTO visit (id, station_id, round_id, date, status, repeat_no, notes) VALUES (2, 1, 1, '2026-06-02', 'done', 1, '')"
    assert not _rejected(engine, sql)


def test_one_observation_per_visit_species_measure(engine):
    assert not _rejected(engine, _observation(3, obs_id=10))
    assert _rejected(engine, _observation(4, obs_id=11))
    assert not _rejected(engine, _observation(40, "cover", obs_id=12))


def test_deleting_a_visit_never_cascades_to_its_observations(engine):
    assert not _rejected(engine, _observation(3))
    assert _rejected(engine, "DELETE FROM visit WHERE id = 1")
    assert _rejected(engine, "DELETE FROM station WHERE id = 1")
    assert _rejected(engine, "DELETE FROM species WHERE id = 1")
    with engine.connect() as connection:
        assert connection.execute(text("SELECT count(*) FROM observation")).scalar_one() == 1
