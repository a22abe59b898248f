"""Programme set-up: create or upgrade the database, then load sites, stations, species and the rest.

Every loader reads and checks its whole file first (``monitor.io``), then checks it against what the
database already holds, and only then writes, inside the caller's one transaction: a bad file leaves the
database exactly as it was.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd
from shapely.geometry import mapping, shape

from monitor import columns as C
from monitor.db import Session, Store, migrate, select
from monitor.db import models as M
from monitor.db.engine import make_engine
from monitor.errors import InputError, InputProblem
from monitor.io import headers as H
from monitor.io import programme as readers
from monitor.io.geojson import read_json
from monitor.io.settings import read_programme_json
from monitor.settings import DEFAULT_CHANGE_MARGIN

#: start year stored for an every-year panel given without one: it is due in every season on record
ALWAYS_SINCE = 1900

SETUP_FILES = {
    "programme": "programme.json",
    "sites": "sites.geojson",
    "stations": "stations.csv",
    "species": "species.csv",
    "panels": "panels.csv",
    "windows": "windows.csv",
    "observers": "observers.csv",
    "events": "management_events.csv",
}


def init_database(db: str | None) -> tuple[str | None, str]:
    """Create or upgrade the schema of the database at ``db``.  Returns (revision before, after)."""
    engine = make_engine(db)
    try:
        return migrate.upgrade(engine)
    finally:
        engine.dispose()


@dataclass
class LoadReport:
    """What a set-up command added, per kind of row."""

    added: dict[str, int] = field(default_factory=dict)

    def add(self, kind: str, n: int) -> None:
        self.added[kind] = self.added.get(kind, 0) + n


def _none(value: object) -> object:
    if value is None:
        return None
    try:
        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    return value


def _clash(file: str, row: object, fld: str, code: str, what: str) -> InputProblem:
    return InputProblem(file, int(row) if row is not None else None, fld, code, f"a {what} code not already in the programme")


def _refuse_existing(frame: pd.DataFrame, key: str, existing: dict[str, int], file: str, what: str) -> None:
    """Every row whose code the programme already holds, as one InputError (nothing is written)."""
    problems = [_clash(file, r["source_row"], "code", r[key], what)
                for r in frame.to_dict(orient="records") if r[key] in existing]
    if problems:
        raise InputError(problems)


def _existing(session: Session, model, programme_id: int) -> dict[str, int]:
    return {r.code: r.id for r in session.exec(select(model).where(model.programme_id == programme_id)).all()}


# --- programme ------------------------------------------------------------------------------------------


def create_programme(session: Session, path: Path) -> M.Programme:
    meta = read_programme_json(path)
    if session.exec(select(M.Programme).where(M.Programme.code == meta["code"])).first() is not None:
        raise InputError(InputProblem(path.name, None, "code", meta["code"], "a programme code not already in this database"))
    programme = M.Programme(
        code=meta["code"],
        name=meta["name"],
        description=meta.get("description", ""),
        organisation=meta.get("organisation", ""),
        contact=meta.get("contact", ""),
        crs_epsg=meta["crs_epsg"],
        default_quadrat_width_m=meta.get("default_quadrat_width_m", 1.0),
        default_quadrat_length_m=meta.get("default_quadrat_length_m", 1.0),
        blanks_mean_zero=meta.get("blanks_mean_zero", False),
        allow_lone_working=meta.get("allow_lone_working", False),
        change_margin=meta.get("change_margin", DEFAULT_CHANGE_MARGIN),
        settings_json=json.dumps({**meta.get("settings", {}),
                                  **({"time_zone": meta["time_zone"]} if meta.get("time_zone") else {}),
                                  **({"protocol_measures": meta["protocol_measures"]}
                                     if meta.get("protocol_measures") else {})},
                                 sort_keys=True),
    )
    session.add(programme)
    session.flush()
    for proto in meta["protocols"]:
        session.add(M.ProtocolVersion(programme_id=programme.id, **proto))
    session.flush()
    return programme


# --- sites ------------------------------------------------------------------------------------------------


def load_sites(session: Session, programme: M.Programme, path: Path, report: LoadReport) -> None:
    frame = readers.read_sites_geojson(path, epsg=None)
    file = frame.attrs.get("file", path.name)
    problems = []
    if frame.attrs.get("epsg") != programme.crs_epsg:
        problems.append(InputProblem(file, None, "crs", f"EPSG:{frame.attrs.get('epsg')}",
                                     f"the programme's CRS EPSG:{programme.crs_epsg}"))
    existing = _existing(session, M.Site, programme.id)
    raw_props = _feature_properties(path)
    for i, row in enumerate(frame.itertuples(index=False), start=1):
        code = getattr(row, C.SITE)
        if code in existing:
            problems.append(_clash(file, i, "code", code, "site"))
        region = raw_props[i - 1].get(C.REGION)
        if region is not None and not (isinstance(region, str) and 0 < len(region.strip()) <= 40):
            problems.append(InputProblem(file, i, C.REGION, region, "a region code of 1 to 40 characters, or none"))
    if problems:
        raise InputError(problems)
    for i, row in enumerate(frame.to_dict(orient="records"), start=1):
        props = raw_props[i - 1]
        session.add(M.Site(
            programme_id=programme.id,
            code=row[C.SITE],
            name=row[H.NAME] or "",
            habitat=row[H.HABITAT] or "",
            area_m2=float(row[C.AREA]),
            boundary_geojson=json.dumps(mapping(row[H.GEOMETRY])),
            access_until=_none(row[H.ACCESS_UNTIL]),
            base_x=_float_or_none(props.get("base_x")),
            base_y=_float_or_none(props.get("base_y")),
            access_notes=str(props.get("access_notes", "") or ""),
            region=props[C.REGION].strip() if props.get(C.REGION) is not None else None,
        ))
    session.flush()
    report.add("sites", len(frame))


def _feature_properties(path: Path) -> list[dict]:
    """Each feature's properties (the file itself was read and checked by ``read_sites_geojson``)."""
    _file, doc = read_json(path, "a GeoJSON file (valid UTF-8 JSON)")
    return [dict(f.get("properties") or {}) for f in doc["features"]]


def _float_or_none(value: object) -> float | None:
    try:
        return None if value in (None, "") else float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return None


def _site_frame(session: Session, programme: M.Programme) -> pd.DataFrame:
    """Stored sites in the shape ``read_sites_geojson`` gives (for checking stations against them)."""
    rows = session.exec(select(M.Site).where(M.Site.programme_id == programme.id)).all()
    frame = pd.DataFrame({
        C.SITE: [s.code for s in rows],
        H.GEOMETRY: [shape(json.loads(s.boundary_geojson)) if s.boundary_geojson else None for s in rows],
    })
    frame.attrs["epsg"] = programme.crs_epsg
    return frame


# --- stations ------------------------------------------------------------------------------------------


def load_stations(session: Session, programme: M.Programme, path: Path, report: LoadReport) -> None:
    sites = _site_frame(session, programme)
    frame = readers.read_stations_csv(path, sites=sites, epsg=programme.crs_epsg)
    file = frame.attrs.get("file", path.name)
    site_ids = {s.code: s.id for s in session.exec(select(M.Site).where(M.Site.programme_id == programme.id))}
    panel_ids = _existing(session, M.Panel, programme.id)
    existing = _existing(session, M.Station, programme.id)
    in_file = set(frame[C.STATION])
    problems = []
    for row in frame.to_dict(orient="records"):
        n = row["source_row"]
        if row[C.STATION] in existing:
            problems.append(_clash(file, n, "station", row[C.STATION], "station"))
        if row[C.SITE] not in site_ids:
            problems.append(InputProblem(file, n, "site", row[C.SITE], "a site loaded in the programme (load sites first)"))
        panel = _none(row[C.PANEL])
        if panel is not None and panel not in panel_ids:
            problems.append(InputProblem(file, n, "panel", panel, "a panel loaded in the programme (load panels first)"))
        repl = _none(row[H.REPLACED_BY])
        if repl is not None and repl not in in_file and repl not in existing:
            problems.append(InputProblem(file, n, "replaced_by", repl, "the code of a station in this file or the programme"))
        if _none(row.get(C.STRATUM)) is not None:
            problems.append(InputProblem(file, n, "stratum", row[C.STRATUM], "no stratum (strata are set by `monitor design place SITE --method stratified`)"))
    if problems:
        raise InputError(problems)
    objects: dict[str, M.Station] = {}
    for row in frame.to_dict(orient="records"):
        retired = _none(row[H.RETIRED])
        station = M.Station(
            programme_id=programme.id,
            code=row[C.STATION],
            site_id=site_ids[row[C.SITE]],
            panel_id=panel_ids.get(_none(row[C.PANEL])) if _none(row[C.PANEL]) else None,
            placement=row[H.PLACEMENT],
            x=float(row[C.X]),
            y=float(row[C.Y]),
            crs_epsg=int(_none(row[H.EPSG]) or programme.crs_epsg),
            fix_method=_none(row[H.FIX_METHOD]) or "",
            accuracy_m=_none(row[H.ACCURACY]),
            quadrat_width_m=float(row[C.QUADRAT_WIDTH]),
            quadrat_length_m=float(row[C.QUADRAT_LENGTH]),
            transect=_none(row[C.TRANSECT]),
            distance_m=_none(row[C.DISTANCE]),
            established=_none(row[H.ESTABLISHED]),
            state="retired" if retired is not None else "in_service",
            retired=retired,
            retired_reason=_none(row[H.RETIRED_REASON]) or "",
            marker=_none(row[H.MARKER]) or "",
            relocation_notes=_none(row[H.RELOCATION_NOTES]) or "",
        )
        session.add(station)
        objects[station.code] = station
    session.flush()
    for row in frame.to_dict(orient="records"):
        repl = _none(row[H.REPLACED_BY])
        if repl is not None:
            objects[row[C.STATION]].replaced_by_id = objects[repl].id if repl in objects else existing[repl]
    session.flush()
    report.add("stations", len(frame))


# --- species, targets and species windows ----------------------------------------------------------------


def load_species(session: Session, programme: M.Programme, path: Path, report: LoadReport) -> None:
    frame = readers.read_species_csv(path)
    file = frame.attrs.get("file", path.name)
    existing = _existing(session, M.Species, programme.id)
    _refuse_existing(frame, C.SPECIES, existing, file, "species")
    for row in frame.to_dict(orient="records"):
        species = M.Species(programme_id=programme.id, code=row[C.SPECIES], scientific_name=row[H.SCIENTIFIC_NAME],
                            common_name=row[H.COMMON_NAME] or "", sensitive=bool(row[H.SENSITIVE]))
        session.add(species)
        session.flush()
        n = _none(row[H.N])
        session.add(M.Target(programme_id=programme.id, species_id=species.id, measure=row[C.MEASURE],
                             n=int(n) if n is not None else None))
        if _none(row[H.WINDOW_START]) is not None:
            session.add(M.SeasonWindow(programme_id=programme.id, species_id=species.id,
                                       start_md=row[H.WINDOW_START], end_md=row[H.WINDOW_END]))
    session.flush()
    report.add("species", len(frame))


# --- panels, windows, observers, events -------------------------------------------------------------------


def load_panels(session: Session, programme: M.Programme, path: Path, report: LoadReport) -> None:
    frame = readers.read_panels_csv(path)
    file = frame.attrs.get("file", path.name)
    existing = _existing(session, M.Panel, programme.id)
    _refuse_existing(frame, C.PANEL, existing, file, "panel")
    for row in frame.to_dict(orient="records"):
        start = _none(row[H.START_YEAR])
        session.add(M.Panel(programme_id=programme.id, code=row[C.PANEL], rule=row[H.RULE],
                            # only a rule that never rests may omit its start (the reader checks): due every year
                            start_year=int(start) if start is not None else ALWAYS_SINCE,
                            description=str(row.get("description") or "")))
    session.flush()
    report.add("panels", len(frame))


def load_windows(session: Session, programme: M.Programme, path: Path, report: LoadReport) -> None:
    species_ids = _existing(session, M.Species, programme.id)
    known = pd.DataFrame({C.SPECIES: sorted(species_ids)})
    frame = readers.read_season_windows_csv(path, species=known)
    for row in frame.to_dict(orient="records"):
        scope = row[H.SCOPE]
        year = _none(row[C.YEAR])
        session.add(M.SeasonWindow(programme_id=programme.id,
                                   species_id=None if scope == H.SCOPE_PROGRAMME else species_ids[scope],
                                   year=int(year) if year is not None else None,
                                   start_md=row[H.START], end_md=row[H.END]))
    session.flush()
    report.add("windows", len(frame))


def load_observers(session: Session, programme: M.Programme, path: Path, report: LoadReport) -> None:
    frame = readers.read_observers_csv(path)
    file = frame.attrs.get("file", path.name)
    existing = _existing(session, M.Observer, programme.id)
    _refuse_existing(frame, C.OBSERVER, existing, file, "observer")
    for row in frame.to_dict(orient="records"):
        session.add(M.Observer(programme_id=programme.id, code=row[C.OBSERVER], name=row[H.NAME],
                               trained=_none(row[H.TRAINED])))
    session.flush()
    report.add("observers", len(frame))


def load_events(session: Session, programme: M.Programme, path: Path, report: LoadReport) -> None:
    from monitor.io.events import read_management_events_csv

    site_ids = {s.code: s.id for s in session.exec(select(M.Site).where(M.Site.programme_id == programme.id))}
    station_ids = _existing(session, M.Station, programme.id)
    frame = read_management_events_csv(path, sites=set(site_ids), stations=set(station_ids))
    for row in frame.to_dict(orient="records"):
        session.add(M.ManagementEvent(
            programme_id=programme.id,
            site_id=site_ids.get(_none(row[C.SITE])) if _none(row[C.SITE]) else None,
            station_id=station_ids.get(_none(row[C.STATION])) if _none(row[C.STATION]) else None,
            kind=row["kind"], start_date=row["start_date"], end_date=_none(row["end_date"]),
            notes=row["notes"] or "",
        ))
    session.flush()
    report.add("management events", len(frame))


LOADERS = {
    "sites": load_sites,
    "stations": load_stations,
    "species": load_species,
    "panels": load_panels,
    "windows": load_windows,
    "observers": load_observers,
    "events": load_events,
}
# the order a folder is loaded in: what a file refers to must be there first
FOLDER_ORDER = ("sites", "panels", "stations", "species", "windows", "observers", "events")


def load_file(db: str | None, kind: str, path: Path, programme_code: str | None = None) -> LoadReport:
    """Load one set-up file into an existing programme, in one transaction."""
    store = Store.open(db)
    report = LoadReport()
    try:
        programme = store.programme(programme_code)
        with store.session() as session:
            programme = session.get(M.Programme, programme.id)
            LOADERS[kind](session, programme, Path(path), report)
    finally:
        store.dispose()
    return report


def setup_folder(db: str | None, folder: Path) -> tuple[str, LoadReport]:
    """Create a programme from a folder of set-up files (see SETUP_FILES), all in one transaction."""
    folder = Path(folder)
    if not (folder / SETUP_FILES["programme"]).is_file():
        raise InputError(InputProblem(str(folder), None, None, None,
                                      f"a folder holding {SETUP_FILES['programme']} (and the other set-up files)"))
    store = Store.open(db)
    report = LoadReport()
    try:
        with store.session() as session:
            programme = create_programme(session, folder / SETUP_FILES["programme"])
            report.add("programme", 1)
            for kind in FOLDER_ORDER:
                path = folder / SETUP_FILES[kind]
                if path.is_file():
                    LOADERS[kind](session, programme, path, report)
                elif kind in ("sites", "stations", "species"):
                    raise InputError(InputProblem(str(path), None, None, None, "this file (required in a set-up folder)"))
            code = programme.code
    finally:
        store.dispose()
    return code, report

