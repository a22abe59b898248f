"""Stored fits and the reports that showed them: lookups, writes and the history of calls."""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence

import pandas as pd
from sqlalchemy import select

from monitor import columns as C
from monitor.db import models as M
from monitor.db.store import Store

IDENTITY = ("species", "measure", "area_kind", "area", "spec_hash", "data_fingerprint")


def area_of_stations(store: Store, programme_id: int) -> pd.DataFrame:
    """Each station's site, stratum and region (the groupings trends by area use)."""
    return store.frame(
        f"""
        SELECT t.code AS {C.STATION}, s.code AS {C.SITE}, r.code AS {C.STRATUM}, s.region AS {C.REGION}
        FROM station t JOIN site s ON s.id = t.site_id LEFT JOIN stratum r ON r.id = t.stratum_id
        WHERE t.programme_id = :p ORDER BY t.code
        """,
        p=programme_id,
    )


def stored_fit_index(store: Store, programme_id: int, engine_version: str) -> pd.DataFrame:
    """The identity of every fit stored for the programme by this engine version (without the results)."""
    return store.frame(
        """
        SELECT f.id, sp.code AS species, f.measure, f.area_kind, f.area, f.spec_hash, f.data_fingerprint,
               f.fitted_at, f.fitted_by
        FROM stored_fit f JOIN species sp ON sp.id = f.species_id
        WHERE f.programme_id = :p AND f.engine_version = :e ORDER BY f.id
        """,
        p=programme_id, e=engine_version,
    )


def stored_results(store: Store, ids: Sequence[int]) -> dict[int, str]:
    """The result JSON of the fits named, by id."""
    out: dict[int, str] = {}
    ids = [int(i) for i in ids]
    for start in range(0, len(ids), 500):
        chunk = ids[start:start + 500]
        params = {f"i{k}": v for k, v in enumerate(chunk)}
        frame = store.frame(f"SELECT id, result_json FROM stored_fit WHERE id IN ({', '.join(':' + k for k in params)})",
                            **params)
        out.update(zip(frame["id"].astype(int), frame["result_json"], strict=True))
    return out


def save_fits(store: Store, programme_id: int, rows: Sequence[dict]) -> list[int]:
    """Store new fits in one transaction; returns their ids in the order given.

    Each row: species (code), measure, area_kind, area, spec_json, spec_hash, engine_version,
    data_fingerprint, result_json, n_obs, first_year, last_year, call, annual_change, annual_lower,
    annual_upper, fit_seconds, fitted_by, fitted_at.  A fit with the same identity stored meanwhile (by
    another run) is kept and its id returned instead.
    """
    if not rows:
        return []
    with store.session() as session:
        species_ids = dict(session.execute(select(M.Species.code, M.Species.id)
                                           .where(M.Species.programme_id == programme_id)).all())
        ids = []
        for row in rows:
            values = {k: v for k, v in row.items() if k != "species"}
            species_id = species_ids[row["species"]]
            existing = session.execute(select(M.StoredFit.id).where(
                M.StoredFit.programme_id == programme_id, M.StoredFit.species_id == species_id,
                M.StoredFit.measure == row["measure"], M.StoredFit.area_kind == row["area_kind"],
                M.StoredFit.area == row["area"], M.StoredFit.spec_hash == row["spec_hash"],
                M.StoredFit.engine_version == row["engine_version"],
                M.StoredFit.data_fingerprint == row["data_fingerprint"])).scalar()
            if existing is not None:
                ids.append(int(existing))
                continue
            fit = M.StoredFit(programme_id=programme_id, species_id=species_id, **values)
            session.add(fit)
            session.flush()
            ids.append(int(fit.id))  # type: ignore[arg-type]
    return ids


def record_report(store: Store, programme_id: int, year: int, fit_ids: Sequence[int], *, folder: str,
                  issued_by: str, issued_at: dt.datetime) -> int:
    """Record that a report for ``year`` was written showing these fits; returns its id."""
    with store.session() as session:
        issue = M.ReportIssue(programme_id=programme_id, year=year, folder=folder, issued_by=issued_by,
                              issued_at=issued_at)
        session.add(issue)
        session.flush()
        for fit_id in dict.fromkeys(int(i) for i in fit_ids):
            session.add(M.ReportFit(report_id=issue.id, fit_id=fit_id))
        return int(issue.id)  # type: ignore[arg-type]


_HISTORY_SQL = """
    SELECT ri.year AS report_year, ri.id AS report_id, ri.issued_at, ri.issued_by, sp.code AS species,
           f.measure, f.area_kind, f.area, f.call, f.annual_change, f.annual_lower, f.annual_upper,
           f.first_year, f.last_year, f.n_obs, f.fitted_at, f.id AS fit_id, f.result_json
    FROM report_issue ri
    JOIN report_fit rf ON rf.report_id = ri.id
    JOIN stored_fit f ON f.id = rf.fit_id
    JOIN species sp ON sp.id = f.species_id
    WHERE ri.programme_id = :p AND ri.id IN (
        SELECT max(r2.id) FROM report_issue r2 WHERE r2.programme_id = :p GROUP BY r2.year)
"""


def call_history(store: Store, programme_id: int, species: str | None = None, *, year: int | None = None,
                 with_results: bool = False) -> pd.DataFrame:
    """What each year's report told: for every season, the last report written for it and its calls.

    One row per (report year, species, measure, area); ``species`` or ``year`` narrow it.
    """
    sql = _HISTORY_SQL
    params: dict[str, object] = {"p": programme_id}
    if species is not None:
        sql += " AND sp.code = :species"
        params["species"] = species
    if year is not None:
        sql += " AND ri.year = :year"
        params["year"] = year
    sql += " ORDER BY ri.year, sp.code, f.measure, f.area_kind, f.area"
    frame = store.frame(sql, **params)
    if not with_results:
        frame = frame.drop(columns=["result_json"])
    return frame
