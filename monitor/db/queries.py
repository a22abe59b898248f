"""Read queries that return DataFrames with the canonical column names of ``monitor.columns``.

Each is one SQL statement run on the server: nothing loads a whole table into Python to filter it.
"""

from __future__ import annotations

import pandas as pd

from monitor import columns as C
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


def observations_long(store: Store, programme_id: int, *, species: str | None = None, measure: str | None = None,
                      sites: list[str] | None = None, first_year: int | None = None,
                      last_year: int | None = None) -> pd.DataFrame:
    """The long table that feeds the analyses: one row per stored value.

    Only done and partial visits carry values, so a missed or inaccessible visit is simply absent here:
    missing is never turned into zero.  A zero is a recorded absence.  Columns: station, site, transect,
    distance_m, x, y, placement, quadrat_area_m2, year, date, visit_id, repeat_no, status, protocol,
    observer (';'-joined codes), species, measure, value, n.
    """
    where = ["t.programme_id = :p"]
    params: dict[str, object] = {"p": programme_id}
    if species is not None:
        where.append("sp.code = :species")
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
    frame = store.frame(
        f"""
        SELECT t.code AS {C.STATION}, s.code AS {C.SITE}, t.transect AS {C.TRANSECT}, t.distance_m AS {C.DISTANCE},
               t.x AS {C.X}, t.y AS {C.Y}, t.placement, t.quadrat_width_m * t.quadrat_length_m AS {C.QUADRAT_AREA},
               r.year AS {C.YEAR}, v.date AS {C.DATE}, v.id AS visit_id, v.repeat_no, v.status AS {C.VISIT_STATUS},
               pv.code AS {C.PROTOCOL}, sp.code AS {C.SPECIES}, o.measure AS {C.MEASURE}, o.value, o.n
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
    observers = store.frame(
        """
        SELECT vo.visit_id, ob.code FROM visit_observer vo JOIN observer ob ON ob.id = vo.observer_id
        WHERE ob.programme_id = :p ORDER BY ob.code
        """,
        p=programme_id,
    )
    joined = observers.groupby("visit_id")["code"].agg(";".join) if len(observers) else pd.Series(dtype=str)
    frame[C.OBSERVER] = frame["visit_id"].map(joined)
    frame[C.YEAR] = frame[C.YEAR].astype(int)
    frame["n"] = frame["n"].astype("Int64")
    return frame


def to_measure_columns(frame: pd.DataFrame, measure: str) -> pd.DataFrame:
    """Spread ``value`` and ``n`` into the measure's own columns (count; cover_pct; occupied+cells; ...)."""
    out = frame.copy()
    if measure == C.MEASURE_COUNT:
        out[C.COUNT] = out["value"].astype(int)
    elif measure == C.MEASURE_COVER:
        out[C.COVER] = out["value"].astype(float)
    elif measure == C.MEASURE_FREQUENCY:
        out[C.OCCUPIED], out[C.CELLS] = out["value"].astype(int), out["n"].astype(int)
    elif measure == C.MEASURE_PIN_HITS:
        out[C.HITS], out[C.PINS] = out["value"].astype(int), out["n"].astype(int)
    elif measure == C.MEASURE_PRESENCE:
        out[C.PRESENT] = out["value"].astype(int)
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
