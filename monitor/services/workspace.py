"""Reads the browser workspace needs that no other service gives: the seasons with their status, the season
to show first, the reserve's geometry with its stations, a season's stored team-days, and the measures
recorded for the programme's species.  Read only."""

from __future__ import annotations

import json
from typing import Any

import pandas as pd

from monitor import columns as C
from monitor.db import Store, queries
from monitor.services.design import as_date, default_first_year


def _open(db: str | None, programme_code: str | None):
    store = Store.open(db)
    return store, store.programme(programme_code)


def seasons(db: str | None, programme_code: str | None = None) -> pd.DataFrame:
    """Every round: year, status (planned, open, certified), who certified it and when, visits stored."""
    store, programme = _open(db, programme_code)
    try:
        return store.frame(
            "SELECT r.year, r.status, r.certified_by, r.certified_at, "
            "(SELECT count(*) FROM visit v WHERE v.round_id = r.id) AS visits "
            "FROM round r WHERE r.programme_id = :p ORDER BY r.year DESC", p=programme.id)
    finally:
        store.dispose()


def next_season(db: str | None, programme_code: str | None = None) -> int:
    """The season to plan: the year after the last round with visits, or this year if that is later."""
    store, programme = _open(db, programme_code)
    try:
        return default_first_year(store, programme.id)
    finally:
        store.dispose()


def reserve(db: str | None, programme_code: str | None = None) -> dict[str, Any]:
    """Sites (code, name, GeoJSON boundary) and stations (code, site, x, y, state, panel, last visit)."""
    store, programme = _open(db, programme_code)
    try:
        sites = queries.sites(store, programme.id)
        stations = queries.stations(store, programme.id)
        last = store.frame(
            "SELECT t.code AS station, max(v.date) AS last_visit, count(v.id) AS visits FROM station t "
            "LEFT JOIN visit v ON v.station_id = t.id WHERE t.programme_id = :p GROUP BY t.code", p=programme.id)
    finally:
        store.dispose()
    stations = stations.merge(last, on=C.STATION, how="left")
    stations["last_visit"] = [as_date(v) for v in stations["last_visit"]]
    geometry = {r[C.SITE]: json.loads(r["boundary_geojson"]) for r in sites.to_dict(orient="records")
                if r["boundary_geojson"]}
    return {"programme": programme, "sites": sites.drop(columns=["boundary_geojson"]), "geometry": geometry,
            "stations": stations}


def season_plan(db: str | None, year: int, programme_code: str | None = None) -> pd.DataFrame:
    """A season's stored plan, one row per station (team, day, route order, arrival, outcome)."""
    store, programme = _open(db, programme_code)
    try:
        plan = queries.planned_visits(store, programme.id, year)
    finally:
        store.dispose()
    plan["day"] = [as_date(v) for v in plan["day"]]
    return plan


def targets(db: str | None, programme_code: str | None = None) -> pd.DataFrame:
    """The programme's species with the measure each is recorded by (species, names, measure, n)."""
    store, programme = _open(db, programme_code)
    try:
        frame = queries.species(store, programme.id)
    finally:
        store.dispose()
    return frame[frame[C.MEASURE].notna()].reset_index(drop=True)


def records_fingerprint(db: str | None, programme_code: str | None = None) -> tuple:
    """A cheap mark that changes whenever stored values change (added, corrected, or a visit added), so that
    a result computed from the records can be reused until then, whoever changed them."""
    store, programme = _open(db, programme_code)
    try:
        row = store.frame(
            "SELECT (SELECT count(*) FROM observation o JOIN visit v ON v.id = o.visit_id JOIN round r "
            "ON r.id = v.round_id WHERE r.programme_id = :p) AS n, "
            "(SELECT max(id) FROM visit) AS last_visit, "
            "(SELECT max(id) FROM change_log WHERE programme_id = :p) AS last_change", p=programme.id).iloc[0]
    finally:
        store.dispose()
    return tuple(None if pd.isna(v) else int(v) for v in row)
