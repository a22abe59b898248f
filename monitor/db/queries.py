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
