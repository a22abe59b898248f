"""The programme summary: what a coordinator checks first."""

from __future__ import annotations

from typing import Any

from monitor.db import Store, one_snapshot, queries


@one_snapshot
def programme_summary(db: str | None, programme_code: str | None = None) -> dict[str, Any]:
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        sites = queries.sites(store, programme.id).drop(columns=["boundary_geojson"])
        return {
            "programme": {
                "code": programme.code,
                "name": programme.name,
                "crs_epsg": programme.crs_epsg,
                "change_margin": programme.change_margin,
            },
            "sites": sites,
            "stations": {
                "in_service": int(sites["in_service"].sum()) if len(sites) else 0,
                "retired": int(sites["retired"].sum()) if len(sites) else 0,
            },
            "species": queries.species(store, programme.id),
            "visits_by_year": queries.visits_by_year(store, programme.id),
        }
    finally:
        store.dispose()
