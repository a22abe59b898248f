"""Read queries that return DataFrames with the canonical column names of ``monitor.columns``.

Each is one SQL statement run on the server: nothing loads a whole table into Python to filter it.
"""

from __future__ import annotations

import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.db.store import Store


def sites(store: Store, programme_id: int) -> pd.DataFrame:
    return store.frame(
        """
        SELECT s.code AS site, s.name, s.habitat, s.area_m2, s.boundary_geojson, s.base_x, s.base_y,
               s.access_until,
               (SELECT count(*) FROM station t WHERE t.site_id = s.id AND t.state = 'in_service') AS in_service,
               (SELECT count(*) FROM station t WHERE t.site_id = s.id AND t.state <> 'in_service') AS retired
        FROM site s WHERE s.programme_id = :p ORDER BY s.code
        """,
        p=programme_id,
    )


def stations(store: Store, programme_id: int) -> pd.DataFrame:
    return store.frame(
        f"""
        SELECT t.code AS {C.STATION}, s.code AS {C.SITE}, r.code AS {C.STRATUM}, p.code AS {C.PANEL},
               t.placement, t.placement_seed, t.x AS {C.X}, t.y AS {C.Y}, t.crs_epsg, t.fix_method, t.accuracy_m,
               t.quadrat_width_m AS {C.QUADRAT_WIDTH}, t.quadrat_length_m AS {C.QUADRAT_LENGTH},
               t.quadrat_width_m * t.quadrat_length_m AS {C.QUADRAT_AREA},
               t.transect AS {C.TRANSECT}, t.distance_m AS {C.DISTANCE}, t.established, t.state, t.retired,
               t.retired_reason, n.code AS replaced_by, t.marker, t.relocation_notes
        FROM station t
        JOIN site s ON s.id = t.site_id
        LEFT JOIN stratum r ON r.id = t.stratum_id
        LEFT JOIN panel p ON p.id = t.panel_id
        LEFT JOIN station n ON n.id = t.replaced_by_id
        WHERE t.programme_id = :p ORDER BY t.code
        """,
        p=programme_id,
    )


def species(store: Store, programme_id: int) -> pd.DataFrame:
    frame = store.frame(
        f"""
        SELECT sp.code AS {C.SPECIES}, sp.scientific_name, sp.common_name, sp.sensitive,
               g.measure AS {C.MEASURE}, g.n
        FROM species sp LEFT JOIN target g ON g.species_id = sp.id
        WHERE sp.programme_id = :p ORDER BY sp.code, g.measure
        """,
        p=programme_id,
    )
    frame["sensitive"] = frame["sensitive"].astype(bool)  # SQLite gives 0/1
    frame["n"] = frame["n"].astype("Int64")
    return frame


def visits_by_year(store: Store, programme_id: int) -> pd.DataFrame:
    """Visits per season by outcome (one row per year, one column per status)."""
    frame = store.frame(
        f"""
        SELECT r.year AS {C.YEAR}, v.status AS {C.VISIT_STATUS}, count(*) AS visits
        FROM visit v JOIN round r ON r.id = v.round_id
        WHERE r.programme_id = :p GROUP BY r.year, v.status ORDER BY r.year
        """,
        p=programme_id,
    )
    if frame.empty:
        return pd.DataFrame(columns=[C.YEAR, *C.VISIT_STATUSES, "total"])
    wide = frame.pivot(index=C.YEAR, columns=C.VISIT_STATUS, values="visits").fillna(0).astype(int)
    wide = wide.reindex(columns=list(C.VISIT_STATUSES), fill_value=0)
    wide["total"] = wide.sum(axis=1)
    return wide.reset_index()


def table_counts(store: Store) -> dict[str, int]:
    """Row count of every table (for summaries and for tests that compare two databases)."""
    from monitor.db.models import metadata

    out = {}
    with store.engine.connect() as connection:
        from sqlalchemy import func, select

        for table in metadata.sorted_tables:
            out[table.name] = connection.execute(select(func.count()).select_from(table)).scalar_one()
    return out


#: the columns of :func:`observations_long` and the SQL behind each (observer is joined in Python)
LONG_COLUMNS = {
    C.STATION: "t.code", C.SITE: "s.code", C.TRANSECT: "t.transect", C.DISTANCE: "t.distance_m", C.X: "t.x",
    C.Y: "t.y", "placement": "t.placement", C.QUADRAT_AREA: "t.quadrat_width_m * t.quadrat_length_m",
    C.YEAR: "r.year", C.DATE: "v.date", "visit_id": "v.id", "repeat_no": "v.repeat_no",
    C.VISIT_STATUS: "v.status", C.PROTOCOL: "pv.code", C.SPECIES: "sp.code", C.MEASURE: "o.measure",
    "value": "o.value", "n": "o.n",
}


def observations_long(store: Store, programme_id: int, *, species: str | None = None, measure: str | None = None,
                      sites: list[str] | None = None, first_year: int | None = None,
                      last_year: int | None = None, columns: list[str] | None = None) -> pd.DataFrame:
    """The long table that feeds the analyses: one row per stored value.

    Only done and partial visits carry values, so a missed or inaccessible visit is simply absent here:
    missing is never turned into zero.  A zero is a recorded absence.  Columns: station, site, transect,
    distance_m, x, y, placement, quadrat_area_m2, year, date, visit_id, repeat_no, status, protocol,
    observer (';'-joined codes), species, measure, value, n.  ``columns`` keeps only those named (a
    whole programme's values are a million rows: a check that needs six columns need not hold nineteen).
    """
    where = ["t.programme_id = :p"]
    params: dict[str, object] = {"p": programme_id}
    if species is not None:
        # by the species' id, so that the database starts from the observation's species index: with the code
        # alone SQLite walks every station's visits and values and keeps one species' (the whole programme's
        # values read once per species)
        where.append("o.species_id IN (SELECT id FROM species WHERE programme_id = :p AND code = :species)")
        params["species"] = species
    if measure is not None:
        where.append("o.measure = :measure")
        params["measure"] = measure
    if first_year is not None:
        where.append("r.year >= :y0")
        params["y0"] = first_year
    if last_year is not None:
        where.append("r.year <= :y1")
        params["y1"] = last_year
    if sites:
        names = []
        for i, code in enumerate(sites):
            params[f"s{i}"] = code
            names.append(f":s{i}")
        where.append(f"s.code IN ({', '.join(names)})")
    wanted = list(LONG_COLUMNS) + [C.OBSERVER] if columns is None else list(columns)
    unknown = set(wanted) - set(LONG_COLUMNS) - {C.OBSERVER}
    if unknown:
        raise ValueError(f"observations_long has no columns {sorted(unknown)}")
    chosen = [c for c in LONG_COLUMNS if c in wanted or (c == "visit_id" and C.OBSERVER in wanted)]
    select = ", ".join(f"{LONG_COLUMNS[c]} AS {c}" for c in chosen)
    frame = store.frame(
        f"""
        SELECT {select}
        FROM observation o
        JOIN visit v ON v.id = o.visit_id
        JOIN round r ON r.id = v.round_id
        JOIN station t ON t.id = v.station_id
        JOIN site s ON s.id = t.site_id
        JOIN species sp ON sp.id = o.species_id
        LEFT JOIN protocol_version pv ON pv.id = v.protocol_id
        WHERE {' AND '.join(where)}
        ORDER BY sp.code, o.measure, r.year, t.code, v.repeat_no
        """,
        **params,
    )
    if C.OBSERVER in wanted:
        frame[C.OBSERVER] = frame["visit_id"].map(visit_observers(store, programme_id))
    if C.YEAR in frame:
        frame[C.YEAR] = frame[C.YEAR].astype(int)
    if "n" in frame:
        frame["n"] = frame["n"].astype("Int64")
    return frame if columns is None else frame[list(columns)]


def visit_observers(store: Store, programme_id: int) -> pd.Series:
    """Each visit's observers as ';'-joined codes in code order, by visit id (no entry: no observer).

    Inside a read snapshot the table is built once and kept for the snapshot (the analyses ask for it once
    per species; the snapshot's data cannot change under it).
    """
    key = ("visit_observers", programme_id)
    if store.shared and key in store.memo:
        return store.memo[key]
    observers = store.frame(
        """
        SELECT vo.visit_id, ob.code FROM visit_observer vo JOIN observer ob ON ob.id = vo.observer_id
        WHERE ob.programme_id = :p ORDER BY ob.code
        """,
        p=programme_id,
    )
    # one pass in plain Python: a pandas group per visit costs ~0.1 ms, tens of seconds for a programme
    codes: dict[int, list[str]] = {}
    for visit, code in zip(observers["visit_id"].tolist(), observers["code"].tolist(), strict=True):
        codes.setdefault(visit, []).append(code)
    joined = pd.Series({visit: ";".join(c) for visit, c in codes.items()}, dtype=object)
    if store.shared:
        store.memo[key] = joined
    return joined


def to_measure_columns(frame: pd.DataFrame, measure: str) -> pd.DataFrame:
    """Spread ``value`` and ``n`` into the measure's own columns (count; cover_pct; occupied+cells; ...)."""
    out = frame.copy()
    entry = measures.get(measure)
    value = out["value"].astype(float)
    # whole-number measures (count, k of n, presence) keep integer columns
    out[entry.value_column] = value.astype(int) if entry.rule.whole else value
    if entry.trials_column is not None:
        out[entry.trials_column] = out["n"].astype(int)
    return out


def visit_outcomes(store: Store, programme_id: int) -> pd.DataFrame:
    """Every visit with its outcome: station, site, year, date, status, repeat_no (for coverage tables)."""
    return store.frame(
        f"""
        SELECT t.code AS {C.STATION}, s.code AS {C.SITE}, r.year AS {C.YEAR}, v.date AS {C.DATE},
               v.status AS {C.VISIT_STATUS}, v.repeat_no
        FROM visit v JOIN round r ON r.id = v.round_id JOIN station t ON t.id = v.station_id
        JOIN site s ON s.id = t.site_id
        WHERE r.programme_id = :p ORDER BY r.year, t.code
        """,
        p=programme_id,
    )


def covariates_long(store: Store, programme_id: int) -> pd.DataFrame:
    """Covariate values: station, visit_id (None for a station-level value), year, name, unit, value."""
    return store.frame(
        f"""
        SELECT t.code AS {C.STATION}, c.visit_id, r.year AS {C.YEAR}, c.name, c.unit, c.value
        FROM covariate c JOIN station t ON t.id = c.station_id
        LEFT JOIN visit v ON v.id = c.visit_id LEFT JOIN round r ON r.id = v.round_id
        WHERE t.programme_id = :p
        """,
        p=programme_id,
    )


# --- design and season plans ------------------------------------------------------------------------------


def panels(store: Store, programme_id: int) -> pd.DataFrame:
    """Revisit panels: panel, rule (McDonald 2003 notation), start_year, description, stations in service."""
    return store.frame(
        f"""
        SELECT p.code AS {C.PANEL}, p.rule, p.start_year, p.description,
               (SELECT count(*) FROM station t WHERE t.panel_id = p.id AND t.state = 'in_service') AS stations
        FROM panel p WHERE p.programme_id = :p ORDER BY p.start_year, p.code
        """,
        p=programme_id,
    )


def season_windows(store: Store, programme_id: int) -> pd.DataFrame:
    """Season windows: species (None = programme-wide), year (None = every year), start_md, end_md."""
    return store.frame(
        f"""
        SELECT sp.code AS {C.SPECIES}, w.year AS {C.YEAR}, w.start_md, w.end_md
        FROM season_window w LEFT JOIN species sp ON sp.id = w.species_id
        WHERE w.programme_id = :p ORDER BY sp.code, w.year
        """,
        p=programme_id,
    )


def visits_with_observers(store: Store, programme_id: int, *, before_year: int | None = None) -> pd.DataFrame:
    """First visits (repeat 0 and repeats) with their observers: station, year, date, status, repeat_no,
    observers (';'-joined codes, '' when none)."""
    where = "r.programme_id = :p" + ("" if before_year is None else " AND r.year < :y")
    params: dict[str, object] = {"p": programme_id}
    if before_year is not None:
        params["y"] = before_year
    frame = store.frame(
        f"""
        SELECT v.id AS visit_id, t.code AS {C.STATION}, r.year AS {C.YEAR}, v.date AS {C.DATE},
               v.status AS {C.VISIT_STATUS}, v.repeat_no
        FROM visit v JOIN round r ON r.id = v.round_id JOIN station t ON t.id = v.station_id
        WHERE {where} ORDER BY t.code, v.date
        """,
        **params,
    )
    observers = store.frame(
        """
        SELECT vo.visit_id, ob.code FROM visit_observer vo JOIN observer ob ON ob.id = vo.observer_id
        WHERE ob.programme_id = :p ORDER BY ob.code
        """,
        p=programme_id,
    )
    joined = observers.groupby("visit_id")["code"].agg(";".join) if len(observers) else pd.Series(dtype=str)
    frame["observers"] = frame["visit_id"].map(joined).fillna("")
    return frame


def planned_visits(store: Store, programme_id: int, year: int) -> pd.DataFrame:
    """A season's stored plan with each station's outcome read from the stored visits at read time.

    Columns: station, site, x, y, team, day, route_order, arrival (HH:MM), reason, stored_outcome (as
    stored in planned_visit), outcome (the round's first visit's status when one is stored, else the
    stored outcome), visit_date, seed.  Rows in team, day, route order; unscheduled stations last.
    """
    return store.frame(
        f"""
        SELECT t.code AS {C.STATION}, s.code AS {C.SITE}, t.x AS {C.X}, t.y AS {C.Y}, pv.team, pv.day,
               pv.route_order, pv.arrival, pv.reason, pv.outcome AS stored_outcome,
               COALESCE(v.status, pv.outcome) AS outcome, v.date AS visit_date, pv.seed
        FROM planned_visit pv
        JOIN round r ON r.id = pv.round_id
        JOIN station t ON t.id = pv.station_id
        JOIN site s ON s.id = t.site_id
        LEFT JOIN visit v ON v.station_id = pv.station_id AND v.round_id = pv.round_id AND v.repeat_no = 0
        WHERE r.programme_id = :p AND r.year = :y
        ORDER BY CASE WHEN pv.day IS NULL THEN 1 ELSE 0 END, pv.day, pv.team, pv.route_order, t.code
        """,
        p=programme_id,
        y=year,
    )


def relocations(store: Store, programme_id: int) -> pd.DataFrame:
    """Every recorded relocation: from_station, to_station (which continues it), date, reason, lost,
    distance_m, recorded_by, recorded_at (oldest first)."""
    return store.frame(
        """
        SELECT a.code AS from_station, b.code AS to_station, r.date, r.reason, r.lost, r.distance_m,
               r.recorded_by, r.recorded_at
        FROM station_relocation r JOIN station a ON a.id = r.from_station_id JOIN station b ON b.id = r.to_station_id
        WHERE r.programme_id = :p ORDER BY r.date, a.code
        """, p=programme_id)


def season_plan_record(store: Store, programme_id: int, year: int) -> dict | None:
    """A stored plan's own record (seed, routing, summary), its teams and its team-days; None when absent."""
    plan = store.frame(
        """
        SELECT sp.* FROM season_plan sp JOIN round r ON r.id = sp.round_id
        WHERE r.programme_id = :p AND r.year = :y
        """, p=programme_id, y=year)
    if plan.empty:
        return None
    plan_id = int(plan["id"].iloc[0])
    teams = store.frame("SELECT * FROM season_plan_team WHERE plan_id = :i ORDER BY id", i=plan_id)
    days = store.frame("SELECT * FROM season_plan_team_day WHERE plan_id = :i ORDER BY date, team", i=plan_id)
    return {"plan": plan.iloc[0].to_dict(), "teams": teams.to_dict(orient="records"),
            "team_days": days.to_dict(orient="records")}


def season_plans(store: Store, programme_id: int) -> pd.DataFrame:
    """Every stored season plan, one row a season, for comparing years: teams, team-days, stations planned
    and scheduled, route length, first and last field day, routing, seed."""
    return store.frame(
        f"""
        SELECT r.year AS {C.YEAR}, sp.seed, sp.routing, sp.path_factor,
               (SELECT count(*) FROM season_plan_team t WHERE t.plan_id = sp.id) AS teams,
               (SELECT count(*) FROM season_plan_team_day d WHERE d.plan_id = sp.id) AS team_days,
               (SELECT count(*) FROM planned_visit pv WHERE pv.round_id = r.id) AS stations_planned,
               (SELECT count(*) FROM planned_visit pv WHERE pv.round_id = r.id AND pv.day IS NOT NULL)
                   AS stations_scheduled,
               (SELECT COALESCE(sum(d.route_m), 0) FROM season_plan_team_day d WHERE d.plan_id = sp.id) / 1000.0
                   AS route_km,
               (SELECT min(d.date) FROM season_plan_team_day d WHERE d.plan_id = sp.id) AS first_day,
               (SELECT max(d.date) FROM season_plan_team_day d WHERE d.plan_id = sp.id) AS last_day,
               sp.extra_team_days
        FROM season_plan sp JOIN round r ON r.id = sp.round_id
        WHERE r.programme_id = :p ORDER BY r.year
        """, p=programme_id)


# --- field records: bulk writes, retries, and the tables behind history, quality and exports ----------------
# (added for the records, quality and export services; everything below stays inside one transaction that
# the caller's ``Store.session()`` opens)

#: unique keys that two imports racing each other may both try to fill; a clash is retried, not an error
RACE_CONSTRAINTS = ("uq_round_programme_year", "uq_visit_station_round_repeat", "uq_import_batch_programme_kind_hash",
                    "uq_observation_visit_species_measure", "pk_visit_observer")
_SQLITE_RACES = ("UNIQUE constraint failed: round.", "UNIQUE constraint failed: visit.",
                 "UNIQUE constraint failed: import_batch.", "UNIQUE constraint failed: observation.",
                 "UNIQUE constraint failed: visit_observer.")


def retryable(exc: BaseException) -> bool:
    """True when a failed transaction may succeed if run again: a serialization failure or deadlock
    (PostgreSQL SQLSTATE 40001, 40P01, 55P03), a busy SQLite file, or a unique key that a concurrent
    import filled first (its rows are then seen as stored on the next attempt)."""
    seen: set[int] = set()
    while exc is not None and id(exc) not in seen:
        seen.add(id(exc))
        orig = getattr(exc, "orig", None)
        for candidate in (orig, exc):
            if candidate is None:
                continue
            state = getattr(candidate, "sqlstate", None)
            if state in ("40001", "40P01", "55P03"):
                return True
            if state == "23505":
                diag = getattr(candidate, "diag", None)
                name = getattr(diag, "constraint_name", None) or ""
                if name in RACE_CONSTRAINTS:
                    return True
            text_ = str(candidate)
            if type(candidate).__module__ == "sqlite3" and (
                    "database is locked" in text_ or any(text_.startswith(s) for s in _SQLITE_RACES)):
                return True
        exc = exc.__cause__ or exc.__context__
    return False


def insert_rows(session, table: str, columns: list[str], rows: list[tuple]) -> None:
    """Insert many rows in bulk (no per-row ORM work; COPY on PostgreSQL, executemany on SQLite), inside the
    session's transaction.

    Dates are passed as ISO strings, which both SQLite (its Date storage form) and PostgreSQL accept.
    """
    if not rows:
        return
    connection = session.connection()
    if connection.dialect.name == "postgresql":
        # COPY streams the rows in one statement: several times faster than one prepared INSERT a row, even
        # pipelined; the server checks every constraint as for an INSERT, inside the same transaction
        from sqlalchemy.exc import DBAPIError

        sql = f"COPY {table} ({', '.join(columns)}) FROM STDIN"
        driver_error = connection.dialect.loaded_dbapi.Error
        cursor = connection.connection.dbapi_connection.cursor()
        try:
            with cursor.copy(sql) as copy:
                for row in rows:
                    copy.write_row(row)
        except driver_error as exc:  # as SQLAlchemy would raise it (IntegrityError, OperationalError, ...)
            raise DBAPIError.instance(sql, None, exc, driver_error) from exc
        finally:
            cursor.close()
        return
    style = connection.dialect.paramstyle
    marks = ", ".join("?" if style == "qmark" else "%s" for _ in columns)
    sql = f"INSERT INTO {table} ({', '.join(columns)}) VALUES ({marks})"
    connection.exec_driver_sql(sql, rows)


def ensure_round(session, programme_id: int, year: int, window_start, window_end) -> int:
    """The id of the programme's round for ``year``, creating it if absent, safe against a concurrent import
    creating the same round (``INSERT ... ON CONFLICT DO NOTHING``, understood by SQLite and PostgreSQL)."""
    from sqlalchemy import text as sql_text

    params = {"p": programme_id, "y": year}
    found = session.execute(sql_text("SELECT id FROM round WHERE programme_id = :p AND year = :y"), params).first()
    if found is not None:
        return int(found[0])
    session.execute(sql_text(
        "INSERT INTO round (programme_id, year, window_start, window_end, status) "
        "VALUES (:p, :y, :s, :e, 'open') ON CONFLICT (programme_id, year) DO NOTHING"),
        {**params, "s": window_start.isoformat(), "e": window_end.isoformat()})
    return int(session.execute(sql_text("SELECT id FROM round WHERE programme_id = :p AND year = :y"),
                               params).scalar_one())


def _observer_teams(store: Store, programme_id: int) -> pd.Series:
    observers = store.frame(
        """
        SELECT vo.visit_id, ob.code FROM visit_observer vo JOIN observer ob ON ob.id = vo.observer_id
        WHERE ob.programme_id = :p ORDER BY ob.code
        """,
        p=programme_id,
    )
    if observers.empty:
        return pd.Series(dtype=object)
    return observers.groupby("visit_id")["code"].agg(tuple)


def _as_date(value: object):
    import datetime as dt

    if value is None or isinstance(value, dt.date):
        return value
    return dt.date.fromisoformat(str(value)[:10])


def visits_table(store: Store, programme_id: int, *, station: str | None = None) -> pd.DataFrame:
    """Every stored visit in the canonical visit frame: station, date, year, observers (tuple), status,
    repeat (bool), protocol, notes, plus visit_id and repeat_no.  Ordered by station, date."""
    where, params = "t.programme_id = :p", {"p": programme_id}
    if station is not None:
        where += " AND t.code = :station"
        params["station"] = station
    frame = store.frame(
        f"""
        SELECT v.id AS visit_id, t.code AS {C.STATION}, v.date AS {C.DATE}, r.year AS {C.YEAR},
               v.status AS {C.VISIT_STATUS}, v.repeat_no, pv.code AS {C.PROTOCOL}, v.notes
        FROM visit v JOIN round r ON r.id = v.round_id JOIN station t ON t.id = v.station_id
        LEFT JOIN protocol_version pv ON pv.id = v.protocol_id
        WHERE {where} ORDER BY t.code, v.date, v.repeat_no
        """,
        **params,
    )
    teams = _observer_teams(store, programme_id)
    frame["observers"] = [teams.get(v, ()) for v in frame["visit_id"]]
    frame[C.DATE] = [_as_date(d) for d in frame[C.DATE]]
    frame["repeat"] = frame["repeat_no"] > 0
    frame["notes"] = frame["notes"].map(lambda s: s or None)
    frame[C.YEAR] = frame[C.YEAR].astype(int)
    return frame[[C.STATION, C.DATE, C.YEAR, "observers", C.VISIT_STATUS, "repeat", C.PROTOCOL, "notes",
                  "visit_id", "repeat_no"]]


def observations_table(store: Store, programme_id: int) -> pd.DataFrame:
    """Every stored value in the canonical observation frame: station, date, species, measure, value, n,
    plus visit_id.  Missed and inaccessible visits have none (missing is never zero)."""
    frame = store.frame(
        f"""
        SELECT v.id AS visit_id, t.code AS {C.STATION}, v.date AS {C.DATE}, sp.code AS {C.SPECIES},
               o.measure AS {C.MEASURE}, o.value, o.n
        FROM observation o JOIN visit v ON v.id = o.visit_id JOIN station t ON t.id = v.station_id
        JOIN species sp ON sp.id = o.species_id
        WHERE t.programme_id = :p ORDER BY t.code, v.date, v.repeat_no, sp.code, o.measure
        """,
        p=programme_id,
    )
    frame[C.DATE] = [_as_date(d) for d in frame[C.DATE]]
    frame["value"] = frame["value"].astype(float)
    frame["n"] = frame["n"].astype("Int64")
    return frame


def visit_covariates(store: Store, programme_id: int) -> pd.DataFrame:
    """Visit-level covariate values: station, date, year, name, unit, value, visit_id."""
    frame = store.frame(
        f"""
        SELECT t.code AS {C.STATION}, v.date AS {C.DATE}, r.year AS {C.YEAR}, c.name, c.unit, c.value,
               c.visit_id
        FROM covariate c JOIN visit v ON v.id = c.visit_id JOIN round r ON r.id = v.round_id
        JOIN station t ON t.id = c.station_id
        WHERE t.programme_id = :p ORDER BY t.code, v.date, c.name
        """,
        p=programme_id,
    )
    frame[C.DATE] = [_as_date(d) for d in frame[C.DATE]]
    frame["value"] = frame["value"].astype(float)
    return frame


def quality_flag_rows(store: Store, programme_id: int, *, states: tuple[str, ...] | None = None) -> pd.DataFrame:
    """Stored quality flags: id, kind, station, species, year, detail, severity, state, note, raised_at."""
    frame = store.frame(
        f"""
        SELECT q.id, q.kind, t.code AS {C.STATION}, sp.code AS {C.SPECIES}, q.year AS {C.YEAR}, q.detail,
               q.severity, q.state, q.note, q.raised_at
        FROM quality_flag q LEFT JOIN station t ON t.id = q.station_id LEFT JOIN species sp ON sp.id = q.species_id
        WHERE q.programme_id = :p ORDER BY q.kind, t.code, q.year, q.id
        """,
        p=programme_id,
    )
    if states is not None:
        frame = frame[frame["state"].isin(states)].reset_index(drop=True)
    frame[C.YEAR] = frame[C.YEAR].astype("Int64")
    return frame


def station_change_log(store: Store, station_id: int) -> pd.DataFrame:
    """Change-log rows about a station, its visits and their values (oldest first)."""
    return store.frame(
        """
        SELECT c.changed_at, c.table_name, c.row_id, c.field, c.old_value, c.new_value, c.reason, c.changed_by
        FROM change_log c
        WHERE (c.table_name = 'station' AND c.row_id = :s)
           OR (c.table_name = 'visit' AND c.row_id IN (SELECT id FROM visit WHERE station_id = :s))
           OR (c.table_name = 'observation' AND c.row_id IN (
                SELECT o.id FROM observation o JOIN visit v ON v.id = o.visit_id WHERE v.station_id = :s))
           OR (c.table_name = 'photo' AND c.row_id IN (SELECT id FROM photo WHERE station_id = :s))
        ORDER BY c.changed_at, c.id
        """,
        s=station_id,
    )


def station_events(store: Store, station_id: int) -> pd.DataFrame:
    """Management events at a station or at its whole site."""
    return store.frame(
        """
        SELECT e.kind, e.start_date, e.end_date, CASE WHEN e.station_id IS NULL THEN 'site' ELSE 'station' END
               AS scope, e.notes
        FROM management_event e JOIN station t ON t.id = :s
        WHERE e.station_id = t.id OR (e.station_id IS NULL AND e.site_id = t.site_id)
        ORDER BY e.start_date
        """,
        s=station_id,
    )


def station_photos(store: Store, station_id: int) -> pd.DataFrame:
    """Photos of a station: id, visit date, path, bearing, height, notes."""
    return store.frame(
        """
        SELECT p.id, v.date AS visit_date, p.path, p.bearing_deg, p.height_m, p.notes
        FROM photo p LEFT JOIN visit v ON v.id = p.visit_id
        WHERE p.station_id = :s ORDER BY v.date, p.id
        """,
        s=station_id,
    )


def batch_visits(session, batch_id: int) -> list[tuple[int, int, int, int]]:
    """(id, station_id, round_id, repeat_no) of the visits an import batch wrote (inside its transaction)."""
    from sqlalchemy import text as sql_text

    return [tuple(r) for r in session.execute(
        sql_text("SELECT id, station_id, round_id, repeat_no FROM visit WHERE import_batch_id = :b"),
        {"b": batch_id}).all()]
