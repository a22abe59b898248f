"""What the programme holds, one kind at a time: stations, sites, species; and adding one station.

A station added at the command line goes through the same reader and checks as a stations file
(inside its site, a known panel, a unique code), so the two ways in cannot disagree.
"""

from __future__ import annotations

import csv
import datetime as dt
import tempfile
from pathlib import Path

import pandas as pd

from monitor import columns as C
from monitor.db import Store, queries, select
from monitor.db import models as M
from monitor.db.models import utcnow
from monitor.io import headers as H

STATION_LIST_COLUMNS = [C.STATION, C.SITE, "site_name", C.PANEL, C.TRANSECT, C.X, C.Y, "crs_epsg",
                        C.QUADRAT_AREA, "placement", "established", "state", "retired"]
SITE_LIST_COLUMNS = ["site", "name", "habitat", "area_m2", "in_service", "retired", "access_until"]
SPECIES_LIST_COLUMNS = [C.SPECIES, "common_name", "scientific_name", C.MEASURE, "n", "sensitive"]


def list_stations(db: str | None, *, programme_code: str | None = None, site: str | None = None,
                  include_retired: bool = True) -> pd.DataFrame:
    """Stations of the programme with their site's name, panel, position and state."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        stations = queries.stations(store, programme.id)
        names = queries.sites(store, programme.id).set_index("site")["name"]
    finally:
        store.dispose()
    stations["site_name"] = stations[C.SITE].map(names)
    if site is not None:
        stations = stations[stations[C.SITE] == site]
    if not include_retired:
        stations = stations[stations["state"] == "in_service"]
    return stations[STATION_LIST_COLUMNS].reset_index(drop=True)


def list_sites(db: str | None, *, programme_code: str | None = None) -> pd.DataFrame:
    """Sites of the programme: code, name, habitat, area and stations in service and retired."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        return queries.sites(store, programme.id)[SITE_LIST_COLUMNS]
    finally:
        store.dispose()


def list_species(db: str | None, *, programme_code: str | None = None) -> pd.DataFrame:
    """Target species with common and scientific names and their measures."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        return queries.species(store, programme.id)[SPECIES_LIST_COLUMNS]
    finally:
        store.dispose()


# the label a station added at the command line carries in messages (in place of a file name)
ADD_LABEL = "station add"


def add_station(db: str | None, code: str, *, site: str, x: float, y: float, placement: str,
                quadrat: tuple[float, float] | None = None, panel: str | None = None,
                transect: str | None = None, distance_m: float | None = None, epsg: int | None = None,
                established: dt.date | None = None, fix_method: str | None = None,
                accuracy_m: float | None = None, marker: str | None = None, relocation_notes: str | None = None,
                programme_code: str | None = None) -> dict:
    """Add one station, checked exactly as a row of a stations file would be; logged in the change log."""
    from monitor.services import setup
    from monitor.services.common import current_user, log_change

    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        width, length = quadrat if quadrat else (programme.default_quadrat_width_m,
                                                 programme.default_quadrat_length_m)
        row = {
            C.STATION: code, C.SITE: site, C.X: repr(float(x)), C.Y: repr(float(y)),
            C.QUADRAT_WIDTH: "" if width is None else repr(float(width)),
            C.QUADRAT_LENGTH: "" if length is None else repr(float(length)),
            H.PLACEMENT: placement, C.PANEL: panel or "", C.TRANSECT: transect or "",
            C.DISTANCE: "" if distance_m is None else repr(float(distance_m)),
            H.EPSG: "" if epsg is None else str(epsg),
            H.ESTABLISHED: established.isoformat() if established else "",
            H.FIX_METHOD: fix_method or "", H.ACCURACY: "" if accuracy_m is None else repr(float(accuracy_m)),
            H.MARKER: marker or "", H.RELOCATION_NOTES: relocation_notes or "",
        }
        with tempfile.TemporaryDirectory() as folder:
            path = Path(folder) / ADD_LABEL
            with path.open("w", newline="", encoding="utf-8") as handle:
                writer = csv.DictWriter(handle, fieldnames=list(row))
                writer.writeheader()
                writer.writerow(row)
            report = setup.LoadReport()
            with store.session() as session:
                prog = session.get(M.Programme, programme.id)
                setup.load_stations(session, prog, path, report)
                station = session.exec(select(M.Station).where(M.Station.programme_id == programme.id,
                                                               M.Station.code == code)).one()
                log_change(session, programme.id, "station", station.id, "station", None, code,
                           "added at the command line", current_user(), utcnow())
        return {"station": code, "site": site, "x": float(x), "y": float(y)}
    finally:
        store.dispose()

