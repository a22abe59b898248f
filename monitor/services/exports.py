"""Exports of the stored records: tidy CSV, GeoJSON of stations, Darwin Core Archive.

Each reads the programme's stored tables (``monitor.db.queries``) and hands canonical frames to a writer in
``monitor.io``.  Missing is never written as zero: missed and inaccessible visits appear as visits with no
values.  Stations where a species flagged sensitive has been recorded present are generalised in every
export that carries coordinates: the projected position is moved to the centre of a ``generalise_m`` grid
cell before conversion to WGS84, and the record says so (the same rule as :mod:`monitor.io.dwca`).
"""

from __future__ import annotations

import math
from pathlib import Path

import pandas as pd

from monitor import columns as C
from monitor.db import Store, one_snapshot, queries
from monitor.errors import DataError, InputError
from monitor.io import headers as H
from monitor.io.dwca import ProgrammeMetadata, write_dwca
from monitor.io.spatial import stations_geojson, write_geojson
from monitor.io.tidy import write_tidy_csv
from monitor.settings import DEFAULT_PROTOCOL_DESCRIPTION, GENERALISE_M, programme_settings

GEOJSON_PROPERTIES = [C.STATION, C.SITE, C.PANEL, "placement", C.TRANSECT, C.DISTANCE, C.QUADRAT_AREA, "state",
                      "established", "retired", "coordinate_uncertainty_m", "data_generalizations"]


def _records(store: Store, programme_id: int) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    visits = queries.visits_table(store, programme_id)
    observations = queries.observations_table(store, programme_id)
    covariates = queries.visit_covariates(store, programme_id)
    return visits, observations, covariates


@one_snapshot
def export_csv(db: str | None, folder: Path, *, programme_code: str | None = None) -> dict[str, Path]:
    """Write tidy ``visits.csv``, ``observations.csv`` and ``covariates.csv`` into ``folder``."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        visits, observations, covariates = _records(store, programme.id)
    finally:
        store.dispose()
    return write_tidy_csv(visits, observations, folder, covariates=covariates)


def generalised_stations(observations: pd.DataFrame, species: pd.DataFrame) -> set[str]:
    """Stations where a species flagged sensitive has a stored value above zero (recorded present)."""
    sensitive = set(species.loc[species[H.SENSITIVE].astype(bool), C.SPECIES])
    if not sensitive or observations.empty:
        return set()
    present = observations[C.SPECIES].isin(sensitive) & (observations["value"].astype(float) > 0)
    return set(observations.loc[present, C.STATION])


def generalise(x: float, y: float, cell_m: float) -> tuple[float, float]:
    """The centre of the ``cell_m`` grid cell holding (x, y) [m]."""
    return (math.floor(x / cell_m) * cell_m + cell_m / 2, math.floor(y / cell_m) * cell_m + cell_m / 2)


def generalise_m_of(programme) -> float:
    """The programme's own generalisation cell (settings ``generalise_m``), else :data:`GENERALISE_M`."""
    return programme_settings(programme).generalise_m


def generalised_positions(store: Store, programme_id: int, stations: pd.DataFrame, cell_m: float) -> pd.DataFrame:
    """``stations`` (columns station, x, y) with every station where a sensitive species has been recorded
    present moved to the centre of its ``cell_m`` grid cell, as every export does: the one rule for each
    place a position leaves the database (exports, report figures and numbers, field sheets for others)."""
    hidden = generalised_stations(queries.observations_table(store, programme_id), queries.species(store, programme_id))
    if not hidden or stations is None or stations.empty:
        return stations
    out = stations.copy()
    moved = out[C.STATION].isin(hidden).to_numpy()
    xs, ys = out[C.X].astype(float).to_numpy().copy(), out[C.Y].astype(float).to_numpy().copy()
    for i in moved.nonzero()[0]:
        xs[i], ys[i] = generalise(xs[i], ys[i], cell_m)
    out[C.X], out[C.Y] = xs, ys
    return out


@one_snapshot
def export_geojson(db: str | None, path: Path, *, programme_code: str | None = None,
                   generalise_m: float = GENERALISE_M) -> tuple[Path, int]:
    """Write the programme's stations as an RFC 7946 FeatureCollection (WGS84 longitude, latitude).

    Returns the path and how many stations were generalised.
    """
    if not generalise_m > 0:
        raise InputError(f"--generalise-m must be > 0, got {generalise_m!r}")
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        stations = queries.stations(store, programme.id)
        species = queries.species(store, programme.id)
        observations = queries.observations_table(store, programme.id)
    finally:
        store.dispose()
    if stations.empty:
        raise DataError(f"programme {programme.code} has no stations to export")
    hidden = generalised_stations(observations, species)
    epsgs = set(stations["crs_epsg"])
    if len(epsgs) != 1:
        raise DataError(f"stations are stored in several coordinate systems ({sorted(epsgs)}); export needs one")
    stations = stations.copy()
    uncertainty, notes, xs, ys = [], [], [], []
    for r in stations.to_dict(orient="records"):
        accuracy = r.get(H.ACCURACY)
        accuracy = None if accuracy is None or pd.isna(accuracy) else float(accuracy)
        x, y = float(r[C.X]), float(r[C.Y])
        note = None
        if r[C.STATION] in hidden:
            x, y = generalise(x, y, generalise_m)
            accuracy = (accuracy or 0.0) + generalise_m * math.sqrt(2) / 2
            note = (f"Coordinates generalised to the centre of a {generalise_m:g} m grid cell (EPSG:{r['crs_epsg']}) "
                    "because a sensitive species occurs here; uncertainty widened to cover the cell.")
        xs.append(x)
        ys.append(y)
        uncertainty.append(None if accuracy is None else round(accuracy, 2))
        notes.append(note)
    stations[C.X], stations[C.Y] = xs, ys
    stations["coordinate_uncertainty_m"] = uncertainty
    stations["data_generalizations"] = notes
    for column in ("established", "retired"):
        stations[column] = [None if v is None or (not isinstance(v, str) and pd.isna(v)) else str(v)[:10]
                            for v in stations[column]]
    collection = stations_geojson(stations, int(epsgs.pop()), properties=GEOJSON_PROPERTIES)
    path = write_geojson(collection, path)
    return path, len(hidden & set(stations[C.STATION]))


def programme_metadata(programme) -> ProgrammeMetadata:
    """The programme's description as the archive's metadata (eml.xml); ``settings`` may add an email,
    a licence and a protocol description."""
    settings = programme_settings(programme)
    extra = {"licence": settings.licence} if settings.licence else {}
    return ProgrammeMetadata(
        code=programme.code, title=programme.name,
        abstract=programme.description or programme.name,
        creator=programme.contact or programme.organisation or programme.code,
        organisation=programme.organisation or "", email=settings.email,
        protocol=settings.protocol_description or DEFAULT_PROTOCOL_DESCRIPTION,
        geographic_description=programme.name, **extra,
    )


@one_snapshot
def export_dwca(db: str | None, path: Path, *, programme_code: str | None = None,
                generalise_m: float = GENERALISE_M) -> Path:
    """Write a Darwin Core Archive of sampling events (see :mod:`monitor.io.dwca` for the standard followed)."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        visits, observations, covariates = _records(store, programme.id)
        stations = queries.stations(store, programme.id).rename(columns={"crs_epsg": H.EPSG})
        species = queries.species(store, programme.id)
        sites = queries.sites(store, programme.id).rename(columns={"site": C.SITE})
    finally:
        store.dispose()
    if visits.empty:
        raise DataError(f"programme {programme.code} has no stored visits to export")
    return write_dwca(path, metadata=programme_metadata(programme), stations=stations, species=species,
                      visits=visits, observations=observations, sites=sites, covariates=covariates,
                      generalise_m=generalise_m)
