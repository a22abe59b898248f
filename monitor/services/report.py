"""The annual report: gather everything a land manager reads from the store, fit, and render.

The report folder is written to a temporary sibling and moved into place at the end
(``monitor.report.render_report``), so an interrupted run leaves the previous report as it was.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import json
from pathlib import Path

import pandas as pd

from monitor import __version__
from monitor import columns as C
from monitor import measures
from monitor.db import Store, one_snapshot, queries
from monitor.errors import DataError, InputError, InputProblem
from monitor.report import GradientData, ProgrammeInfo, Trigger, build_report_context, render_report
from monitor.report.fits import FittedEntry, fit_rows, fits_note
from monitor.report.render import report_files_in
from monitor.services import analyses, estimate, trend
from monitor.services.common import current_user
from monitor.services.exports import generalise_m_of, generalised_positions
from monitor.settings import programme_settings
from monitor.trend import station_changes

REPORT_JSON = "report.json"


def default_folder(year: int) -> Path:
    return Path("reports") / str(year)


def triggers_of(programme) -> list[Trigger]:
    """Management triggers set in advance, from the programme's settings ("triggers": [...], checked when
    the settings are loaded)."""
    return [Trigger(**dataclasses.asdict(t)) for t in programme_settings(programme).triggers]


def _estimate_rows(table: pd.DataFrame) -> pd.DataFrame:
    """The season table in the report's shape: one row per species, measure, site and quantity."""
    rows = []
    for r in table.to_dict(orient="records"):
        base = {"species": r["species"], "measure": r["measure"], "site": r["site"], "n_stations": r["n"]}
        entry = measures.get(r["measure"])
        if entry.estimator == measures.ESTIMATOR_DENSITY:   # a density, and the site's total
            rows.append({**base, "quantity": entry.quantity, "estimate": r["estimate"], "lower": r["lower"],
                         "upper": r["upper"]})
            if pd.notna(r.get("total")):
                rows.append({**base, "quantity": "total", "estimate": r["total"], "lower": r["total_lower"],
                             "upper": r["total_upper"], "counted": r.get("counted")})
        else:
            rows.append({**base, "quantity": entry.quantity, "estimate": r["estimate"],
                         "lower": r["lower"], "upper": r["upper"]})
    return pd.DataFrame(rows)


def _coverage(store: Store, programme_id: int, year: int) -> pd.DataFrame:
    visits = queries.visit_outcomes(store, programme_id)
    visits = visits[(visits[C.YEAR] == year) & (visits["repeat_no"] == 0)]
    if visits.empty:
        return pd.DataFrame(columns=["site", "due", "visited", "missed", "inaccessible"])
    status = visits[C.VISIT_STATUS]
    frame = pd.DataFrame({
        "site": visits[C.SITE],
        "due": 1,
        "visited": status.isin(C.STATUSES_WITH_VALUES).astype(int),
        "missed": (status == C.STATUS_MISSED).astype(int),
        "inaccessible": (status == C.STATUS_INACCESSIBLE).astype(int),
    })
    return frame.groupby("site", as_index=False).sum()


def _scoped(frame: pd.DataFrame, site: str | None) -> pd.DataFrame:
    return frame if site is None else frame[frame["site"] == site]


def _events(store: Store, programme_id: int) -> pd.DataFrame:
    frame = store.frame(
        """
        SELECT e.start_date, e.kind, s.code AS site, t.code AS station, e.notes
        FROM management_event e LEFT JOIN site s ON s.id = e.site_id LEFT JOIN station t ON t.id = e.station_id
        WHERE e.programme_id = :p ORDER BY e.start_date
        """,
        p=programme_id,
    )
    if frame.empty:
        return pd.DataFrame(columns=["year", "kind", "site", "description"])
    frame["year"] = pd.to_datetime(frame["start_date"]).dt.year
    # a yearly routine (grazing every autumn) is context, not an event to mark on every plot
    counts = frame.groupby(["kind", "site"])["year"].transform("nunique")
    frame = frame[counts < 3]
    return pd.DataFrame({"year": frame["year"], "kind": frame["kind"], "site": frame["site"].fillna(""),
                         "description": frame["notes"].fillna("")})


def _method_changes(store: Store, programme_id: int, first: int, last: int,
                    measures_of: dict | None = None) -> pd.DataFrame:
    """Protocol changes inside the series, each with the measures it concerns (blank: every measure)."""
    frame = store.frame("SELECT code, description, effective_from FROM protocol_version WHERE programme_id = :p "
                        "ORDER BY effective_from", p=programme_id)
    measures_of = measures_of or {}
    rows = []
    for r in frame.to_dict(orient="records"):
        year = pd.Timestamp(r["effective_from"]).year
        if first < year <= last:
            described = str(r["description"] or "")
            text = f"protocol {r['code']}" + (f": {described}" if described else "")
            rows.append({"year": year, "kind": "protocol", "description": text,
                         "measures": ";".join(measures_of.get(str(r["code"]), []))})
    return pd.DataFrame(rows, columns=["year", "kind", "description", "measures"])


def _quality_flags(store: Store, programme_id: int) -> pd.DataFrame:
    return store.frame(
        """
        SELECT f.detail AS message, t.code AS station, f.year, sp.code AS species, f.state AS status
        FROM quality_flag f LEFT JOIN station t ON t.id = f.station_id LEFT JOIN species sp ON sp.id = f.species_id
        WHERE f.programme_id = :p AND f.state = 'open'
        """,
        p=programme_id,
    )


def _corrections_since(store: Store, programme_id: int, since: str | None) -> dict[str, int]:
    frame = store.frame(
        """
        SELECT sp.code AS species, c.changed_at FROM change_log c
        JOIN observation o ON o.id = c.row_id AND c.table_name = 'observation'
        JOIN species sp ON sp.id = o.species_id WHERE c.programme_id = :p
        """,
        p=programme_id,
    )
    if since:
        stamp = pd.Timestamp(since)
        changed = pd.to_datetime(frame["changed_at"], utc=True)
        frame = frame[changed > (stamp.tz_localize("UTC") if stamp.tzinfo is None else stamp)]
    return frame.groupby("species").size().astype(int).to_dict()


def _sites_geometry(store: Store, programme_id: int) -> dict[str, dict]:
    sites = queries.sites(store, programme_id)
    return {r["site"]: json.loads(r["boundary_geojson"]) for r in sites.to_dict(orient="records")
            if r["boundary_geojson"]}


def _photos(store: Store, programme_id: int, stations: pd.DataFrame, site_names: dict[str, str],
            base: Path | None = None) -> list:
    """Stations' repeat photos, where the photo files can be read (thumbnails; the rest are named)."""
    from monitor.report import Photo, StationPhotos
    from monitor.report.figures import photo_thumbnail

    frame = store.frame(
        """
        SELECT t.code AS station, s.code AS site, v.date AS visit_date, p.path, p.bearing_deg, p.notes
        FROM photo p JOIN station t ON t.id = p.station_id JOIN site s ON s.id = t.site_id
        LEFT JOIN visit v ON v.id = p.visit_id
        WHERE t.programme_id = :p ORDER BY t.code, v.date, p.id
        """,
        p=programme_id,
    )
    frame = frame[frame["station"].isin(set(stations[C.STATION]))]
    out = []
    for (station, site), rows in frame.groupby(["station", "site"], sort=True):
        photos = []
        for r in rows.to_dict(orient="records"):
            path = Path(r["path"])
            if not path.is_absolute() and base is not None:
                path = base / path
            try:
                image = photo_thumbnail(path.read_bytes())
            except (OSError, ValueError):
                continue  # a photo whose file is not here is listed in `monitor station history`
            bearing = "" if r["bearing_deg"] is None or pd.isna(r["bearing_deg"]) else f"facing {r['bearing_deg']:.0f}°"
            caption = ", ".join(x for x in (bearing, str(r["notes"] or "")) if x)
            date = "" if r["visit_date"] is None or pd.isna(r["visit_date"]) else str(r["visit_date"])[:10]
            photos.append(Photo(date=date or "undated", caption=caption, image=image))
        if photos:
            out.append(StationPhotos(str(station), str(site), site_names.get(str(site), ""), tuple(photos)))
    return out


def _read_previous(previous: Path | None) -> dict | None:
    if previous is None:
        return None
    try:
        return json.loads(Path(previous).read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError) as exc:
        raise InputError(InputProblem(str(previous), None, None, None, f"last year's report.json ({exc})")) from None


def _previous_from_database(db: str | None, year: int, programme_code: str | None) -> dict | None:
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        return analyses.previous_report(store, programme.id, year - 1)
    finally:
        store.dispose()


def write_report(db: str | None, year: int, out_dir: Path | None = None, *, programme_code: str | None = None,
                 previous: Path | None = None, power: pd.DataFrame | None = None,
                 progress=None, site: str | None = None, species: str | None = None, pdf: bool = True,
                 photo_base: Path | None = None, by: str | None = None, workers: int | None = 1,
                 cluster: str | None = None, refit: bool = False) -> Path:
    """Fit every target species up to ``year`` and write the report folder; returns its path.

    ``site`` limits the report to one site (trends fitted on its stations only); ``species`` to one
    species.  With ``pdf`` the folder also holds ``report.pdf``, the printed report (WeasyPrint).

    Everything the report reads comes from one snapshot of the database.  Trends come from the stored
    fits where the data, model and engine still match, and are fitted (by ``workers`` local processes or
    on the Dask scheduler ``cluster``) otherwise; ``by`` adds trends by site, stratum or region.  Last
    year's calls are read from the database (the last report recorded for ``year - 1``); ``previous``
    names a report.json to compare with instead, and a report folder of last year beside ``out_dir`` is
    read only when the database holds no report for that year.  After the snapshot, the new fits are
    stored and the report is recorded with the fits it showed (``monitor trend history``); a report
    limited to one site or species is not recorded (it is not the season's report).
    """
    with analyses.saving_after() as saved:
        folder, shown = _write_report(db, year, out_dir, programme_code=programme_code, previous=previous,
                                      power=power, progress=progress, site=site, species=species, pdf=pdf,
                                      photo_base=photo_base, by=by, workers=workers, cluster=cluster,
                                      refit=refit)
    if site is None and species is None:
        _record(db, programme_code, year, [saved.fit_id(t) for t in shown], folder)
    return folder


@one_snapshot
def _write_report(db: str | None, year: int, out_dir: Path | None, *, programme_code: str | None,
                  previous: Path | None, power: pd.DataFrame | None, progress, site: str | None,
                  species: str | None, pdf: bool, photo_base: Path | None, by: str | None, workers: int | None,
                  cluster: str | None, refit: bool) -> tuple[Path, list]:
    out_dir = Path(out_dir) if out_dir is not None else default_folder(year)
    report_files_in(out_dir)  # refuse a folder we did not write now, not after the fits
    previous_doc = _read_previous(previous)
    if previous_doc is None and site is None and species is None:
        previous_doc = _previous_from_database(db, year, programme_code)
    if previous_doc is None:
        guess = out_dir.parent / str(year - 1) / REPORT_JSON
        previous_doc = _read_previous(guess if guess.is_file() else None)

    if site is not None or species is not None:  # refuse an unknown code before any fitting
        store = Store.open(db)
        try:
            programme = store.programme(programme_code)
            known_sites = set(queries.sites(store, programme.id)["site"])
            known_species = set(queries.species(store, programme.id)[C.SPECIES])
        finally:
            store.dispose()
        if site is not None and site not in known_sites:
            raise InputError(InputProblem("report", None, "--site", site,
                                          f"a site code of the programme ({', '.join(sorted(known_sites))})"))
        if species is not None and species not in known_species:
            raise InputError(InputProblem("report", None, "--species", species,
                                          f"a species code of the programme ({', '.join(sorted(known_species))})"))
    fitted = trend.fit_programme(db, programme_code=programme_code, last_year=year, keep_data=True,
                                 sites=[site] if site else None, species=[species] if species else None, by=by,
                                 workers=workers, cluster=cluster, refit=refit)
    not_called = list(getattr(fitted, "not_called", []))
    everything = list(fitted)
    trends = [t for t in fitted if t.area_kind == "all"]
    if not trends:
        reasons = "; ".join(n.line() for n in not_called)
        raise DataError("no target species to report" + (f" for site {site}" if site else "")
                        + (f" for species {species}" if species else "") + (f": {reasons}" if reasons else ""))
    if power is None:
        from monitor.services.power import detectable_changes

        power = detectable_changes(trends)
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        stations = queries.stations(store, programme.id)
        site_names = {str(k): str(v) for k, v in queries.sites(store, programme.id).set_index("site")["name"].items()
                      if v is not None and not pd.isna(v)}
        if site is not None:
            if site not in site_names and site not in set(stations[C.SITE]):
                raise InputError(InputProblem("report", None, "--site", site, "a site code of the programme"))
            stations = stations[stations[C.SITE] == site]
        placements = stations.loc[stations["state"] == "in_service", "placement"]
        settings = programme_settings(programme)
        meta = ProgrammeInfo(
            name=programme.name,
            reserve=programme.organisation or programme.name,
            description=programme.description,
            placement=placements.mode().iloc[0] if len(placements) else C.PLACEMENT_RANDOM,
            crs=f"EPSG:{programme.crs_epsg}",
            prepared_by=programme.contact,
            margin=settings.change_margin,
        )
        first = min(t.result.years[0] for t in trends)
        gradients = {}
        for t in trends:
            if t.measure != C.MEASURE_COUNT or t.data is None:
                continue
            season = t.data[(t.data[C.YEAR] == year) & t.data[C.TRANSECT].notna()]
            for transect, rows in season.groupby(C.TRANSECT):
                if rows[C.DISTANCE].notna().sum() >= 3:
                    gradients[(t.species, t.measure)] = GradientData(
                        frame=pd.DataFrame({"gradient": rows[C.DISTANCE].to_numpy(), "value": rows[C.COUNT].to_numpy()}),
                        gradient_label=f"distance along transect {transect} [m]", value_label="count per quadrat")
                    break
        try:
            season_table = estimate.season_table(db, year, programme_code=programme.code,
                                                 sites=[site] if site else None,
                                                 species=[species] if species else None)
            estimates = _estimate_rows(season_table)
        except DataError:
            estimates = None
        context = build_report_context(
            meta,
            year,
            {(t.species, t.measure): t.result for t in trends},
            estimates=estimates,
            coverage=_scoped(_coverage(store, programme.id, year), site),
            quality_flags=_quality_flags(store, programme.id),
            triggers=[t for t in triggers_of(programme) if species is None or t.species == species],
            events=_events(store, programme.id),
            previous=previous_doc,
            power=power,
            # positions as every export gives them: sensitive species' stations generalised
            stations=generalised_positions(store, programme.id,
                                           stations[stations["state"] == "in_service"][[C.STATION, C.X, C.Y, C.SITE,
                                                                                          "placement"]],
                                           generalise_m_of(programme)),
            sites=_sites_geometry(store, programme.id),
            station_changes={(t.species, t.measure): station_changes(t.data, t.measure)
                             for t in trends if t.data is not None},
            gradients=gradients,
            method_changes=_method_changes(store, programme.id, first, year,
                                           settings.protocol_measures),
            species_names={t.species: t.common_name for t in trends if t.common_name},
            corrections=_corrections_since(store, programme.id, (previous_doc or {}).get("generated")),
            generated=dt.date.today().isoformat(),
            software={"monitor": __version__},
            site_names=site_names,
            scope=" and ".join(x for x in (
                f"site {site_names.get(site, site)} ({site})" if site else "",
                f"species {species}" if species else "") if x),
            photos=_photos(store, programme.id, stations[stations["state"] == "in_service"], site_names,
                           photo_base),
        )
    finally:
        store.dispose()
    if not_called:  # species too short to call are said so; the rest of the report stands
        context = dataclasses.replace(context, cautions=(*context.cautions, *(n.line() for n in not_called)),
                                      not_called=tuple(n.to_dict() for n in not_called))
    rows = fit_rows([FittedEntry(t.species, t.common_name, t.measure, t.area_kind, t.area, t.result, t.fitted_at,
                                 t.reused) for t in everything])
    context = dataclasses.replace(context, fits=rows, fits_note=fits_note(rows),
                                  areas=tuple(r for r in rows if r.area_kind != "all"), area_kind=by or "")
    try:
        return render_report(context, out_dir, progress=progress, pdf=pdf), everything
    except OSError as exc:
        if exc.filename is None and exc.errno is not None:  # a failed write names no file (a full disk)
            raise OSError(exc.errno, exc.strerror, str(out_dir)) from exc
        raise


def _record(db: str | None, programme_code: str | None, year: int, fit_ids: list[int | None], folder: Path) -> None:
    """Record the report and the fits it showed (fits not stored, for a role that may not write, are not)."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        analyses.record_report(store, programme.id, year, [i for i in fit_ids if i is not None],
                               folder=str(folder), who=current_user())
    finally:
        store.dispose()
