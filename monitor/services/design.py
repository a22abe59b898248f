"""Station design as a job: place new stations into a stored site, set revisit panels, show which
stations are due in which year, and export stations as GPX waypoints or GeoJSON.

Placement reads the site's boundary from the database, calls one method of :mod:`monitor.design`
and stores the stations with their method and seed, all in one transaction: a refused request
(an invalid boundary, exclusion zones covering the site, a code that is taken) writes nothing.

Revisit panels are stored one per row with a single ``[visit-rest]`` rule (McDonald 2003) and
their own first year; :class:`StoredPanels` evaluates them.  A panel ``[v-r]`` starting in year
:math:`t_0` is due in year :math:`t` when :math:`t \\ge t_0` and :math:`(t - t_0) \\bmod (v + r) < v`.
"""

from __future__ import annotations

import datetime as dt
import json
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import shapely
from shapely.geometry import Point, mapping, shape
from shapely.geometry.base import BaseGeometry

from monitor import columns as C
from monitor import design as D
from monitor.db import Session, Store, queries, select
from monitor.db import models as M
from monitor.design._common import _jsonable, check_polygon
from monitor.errors import DataError, DesignError, Diagnostic, InputError, InputProblem
from monitor.io.geojson import read_lines, read_polygons
from monitor.io.spatial import stations_geojson, stations_gpx, write_geojson

METHODS = (C.PLACEMENT_RANDOM, C.PLACEMENT_STRATIFIED, C.PLACEMENT_BALANCED, C.PLACEMENT_SYSTEMATIC,
           C.PLACEMENT_TRANSECT)
#: letter in the default station code of each method: SITE-R001, SITE-S001, SITE-B001, SITE-G001
METHOD_LETTER = {C.PLACEMENT_RANDOM: "R", C.PLACEMENT_STRATIFIED: "S", C.PLACEMENT_BALANCED: "B",
                 C.PLACEMENT_SYSTEMATIC: "G"}
#: what stations placed by this program record as their fix until they are marked in the field
FIX_PLANNED = "planned position (not yet marked)"


# --- stored panels ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class StoredPanels:
    """The programme's stored panels, each a single ``[v-r]`` rule with its first year.

    Offers ``is_due(panel_code, year)`` like :class:`monitor.design.PanelDesign`, so the schedule
    stage can use it as the revisit design.
    """

    panels: dict[str, tuple[D.Panel, int]] = field(default_factory=dict)
    rules: dict[str, str] = field(default_factory=dict)

    @classmethod
    def from_frame(cls, frame: pd.DataFrame) -> StoredPanels:
        panels, rules = {}, {}
        for row in frame.to_dict(orient="records"):
            try:
                patterns = D.parse_revisit(str(row["rule"]))
            except DesignError as exc:
                raise DataError(f"panel {row[C.PANEL]}: {exc}") from None
            if len(patterns) != 1:
                raise DataError(f"panel {row[C.PANEL]} has rule {row['rule']}: a stored panel takes one [visit-rest] "
                                "pattern")
            p = patterns[0]
            panels[str(row[C.PANEL])] = (D.Panel(str(row[C.PANEL]), p.visit, p.rest, 0), int(row["start_year"]))
            rules[str(row[C.PANEL])] = D.format_revisit(patterns)
        return cls(panels, rules)

    def is_due(self, panel_code: str, year: int) -> bool:
        if panel_code not in self.panels:
            raise DataError(f"panel {panel_code!r} is not stored in the programme")
        panel, start = self.panels[panel_code]
        return panel.is_due(int(year), start)

    @property
    def notation(self) -> str:
        """The whole design in McDonald (2003) notation, e.g. ``[1-0,1-2]``."""
        seen = []
        for panel, _start in self.panels.values():
            pattern = D.RevisitPattern(panel.visit, panel.rest)
            if pattern not in seen:
                seen.append(pattern)
        seen.sort(key=lambda p: (p.rest, p.visit))
        return D.format_revisit(seen) if seen else "[]"


# --- reading helpers --------------------------------------------------------------------------------------


def as_date(value: Any) -> dt.date | None:
    """A stored date as a ``datetime.date`` (SQLite gives ISO text, PostgreSQL dates; NaN/None -> None)."""
    if value is None or (not isinstance(value, dt.date) and pd.isna(value)):
        return None
    if isinstance(value, dt.datetime):
        return value.date()
    if isinstance(value, dt.date):
        return value
    return dt.date.fromisoformat(str(value)[:10])


def site_geometry(session: Session, programme_id: int, code: str) -> tuple[M.Site, BaseGeometry]:
    """The stored site and its boundary (checked: valid, non-empty polygon)."""
    site = session.exec(select(M.Site).where(M.Site.programme_id == programme_id, M.Site.code == code)).first()
    if site is None:
        known = ", ".join(session.exec(select(M.Site.code).where(M.Site.programme_id == programme_id)).all())
        raise DataError(f"no site '{code}' in the programme (sites: {known or 'none'})")
    if not site.boundary_geojson:
        raise DesignError(f"site {code} has no stored boundary")
    try:
        geometry = shape(json.loads(site.boundary_geojson))
    except (ValueError, TypeError, KeyError, AttributeError) as exc:
        raise DesignError(f"site {code}: the stored boundary is not a readable GeoJSON geometry ({exc})") from None
    check_polygon(geometry, f"site {code} polygon")
    return site, geometry


# --- placing stations -------------------------------------------------------------------------------------


@dataclass
class PlaceResult:
    """Stations placed into a site: stored, or shown only (dry run)."""

    site: str
    method: str
    seed: int
    stations: pd.DataFrame
    diagnostics: tuple[Diagnostic, ...]
    stored: bool
    strata_added: int = 0
    params: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return {"site": self.site, "method": self.method, "seed": self.seed, "stored": self.stored,
                "strata_added": self.strata_added, "params": _jsonable(self.params),
                "stations": self.stations, "diagnostics": [d.__dict__ for d in self.diagnostics]}


def _next_number(codes: list[str], prefix: str) -> int:
    pattern = re.compile(rf"^{re.escape(prefix)}(\d+)$")
    numbers = [int(m.group(1)) for c in codes if (m := pattern.match(c))]
    return max(numbers) + 1 if numbers else 1


#: seeds are stored in 32-bit integer columns (PostgreSQL ``integer``)
SEED_MAX = 2**31 - 1


def fresh_seed(seed: int | None) -> int:
    """The seed to use: the one given, or one drawn from the operating system's entropy (then stored)."""
    if seed is None:
        return int(np.random.default_rng().integers(0, SEED_MAX))
    if not 0 <= int(seed) <= SEED_MAX:
        raise InputError(InputProblem("--seed", None, None, seed, f"a whole number from 0 to {SEED_MAX}"))
    return int(seed)


def place_stations(
    db: str | None,
    site: str,
    method: str,
    *,
    n: int | None = None,
    seed: int | None = None,
    min_separation: float = 0.0,
    exclude: Path | None = None,
    spacing: float | None = None,
    start: tuple[float, float] | None = None,
    bearing: float | None = None,
    length: float | None = None,
    layout: str = "interrupted",
    quadrat: tuple[float, float] | None = None,
    prefix: str | None = None,
    panel: str | None = None,
    strata: Path | None = None,
    line: Path | None = None,
    kind: str = "belt",
    allocation: str = "proportional",
    pilot_sd: dict[str, float] | None = None,
    established: dt.date | None = None,
    dry_run: bool = False,
    programme_code: str | None = None,
) -> PlaceResult:
    """Place new stations into stored site ``site`` by ``method`` and store them with method and seed.

    Exclusion zones come from ``exclude`` (GeoJSON polygons in the programme CRS); with a minimum
    separation, a disc of that radius round every station already in the site is excluded too, so
    new stations keep their distance from the old ones.  ``established`` (default today) is the
    date the design was made: rounds before that season do not count the station as missed.
    """
    if method not in METHODS:
        raise InputError(InputProblem("--method", None, None, method, f"one of {', '.join(METHODS)}"))
    if method in (C.PLACEMENT_RANDOM, C.PLACEMENT_STRATIFIED, C.PLACEMENT_BALANCED) and not n:
        raise InputError(InputProblem("--n", None, None, None, f"the number of stations for {method} placement"))
    if method in (C.PLACEMENT_SYSTEMATIC, C.PLACEMENT_TRANSECT) and not spacing:
        raise InputError(InputProblem("--spacing", None, None, None, f"a spacing [m] for {method} placement"))
    if method == C.PLACEMENT_TRANSECT and line is None and (start is None or bearing is None or length is None):
        raise InputError(InputProblem("--start/--bearing/--length", None, None, None,
                                      "a drawn line (--line FILE.geojson) or a start point, bearing and length for a "
                                      "transect"))
    if line is not None and method != C.PLACEMENT_TRANSECT:
        raise InputError(InputProblem("--line", None, None, str(line), "--method transect with a drawn line"))
    if min_separation < 0:
        raise InputError(InputProblem("--min-separation", None, None, min_separation, "a distance >= 0 [m]"))
    if quadrat is not None and (quadrat[0] <= 0 or quadrat[1] <= 0):
        raise InputError(InputProblem("--quadrat", None, None, f"{quadrat[0]:g},{quadrat[1]:g}",
                                      "positive width and length [m]"))
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        with store.session() as session:
            result = _place(session, programme, site, method, n=n, seed=seed, min_separation=min_separation,
                            exclude=exclude, spacing=spacing, start=start, bearing=bearing, length=length,
                            layout=layout, quadrat=quadrat, prefix=prefix, panel=panel, strata=strata,
                            allocation=allocation, pilot_sd=pilot_sd, line=line, kind=kind,
                            established=established or dt.date.today(), dry_run=dry_run)
            if dry_run:
                session.rollback()
        return result
    finally:
        store.dispose()


def _place(session: Session, programme: M.Programme, site_code: str, method: str, *, n, seed, min_separation,
           exclude, spacing, start, bearing, length, layout, quadrat, prefix, panel, strata, allocation,
           pilot_sd, established, dry_run, line=None, kind="belt") -> PlaceResult:
    pid = programme.id
    site, geometry = site_geometry(session, pid, site_code)
    panel_id = None
    if panel is not None:
        row = session.exec(select(M.Panel).where(M.Panel.programme_id == pid, M.Panel.code == panel)).first()
        if row is None:
            raise DataError(f"no panel '{panel}' in the programme; load it with `monitor setup panels FILE` "
                            "or use `monitor design assign-panels --design \"[1-0,1-3]\"`")
        panel_id = row.id
    width, qlength = quadrat or (programme.default_quadrat_width_m, programme.default_quadrat_length_m)
    exclusions = [g for _, g in read_polygons(exclude, programme.crs_epsg)] if exclude is not None else []
    existing = session.exec(select(M.Station).where(M.Station.programme_id == pid)).all()
    codes = [s.code for s in existing]
    here = [s for s in existing if s.site_id == site.id and s.state == "in_service"]
    if min_separation > 0 and here:
        exclusions.append(shapely.union_all([Point(s.x, s.y).buffer(min_separation) for s in here]))
    # checked once here so the refusal names the site
    D.usable_area(geometry, exclusions, f"site {site_code}")
    rng = fresh_seed(seed)
    strata_added = 0
    stratum_ids: dict[str, int] = {}
    if method == C.PLACEMENT_TRANSECT:
        code = prefix or _free_transect_code(site_code, existing)
        drawn = None
        if line is not None:
            lines = read_lines(line, programme.crs_epsg)
            if len(lines) != 1:
                raise InputError(InputProblem(Path(line).name, None, "features", len(lines), "exactly one LineString"))
            drawn = lines[0][1]
        placement = D.transect(geometry, rng, spacing=float(spacing), start=start, bearing=bearing,
                               length=length, line=drawn, layout=layout, kind=kind, width=float(width),
                               quadrat_length=float(qlength) if layout == "interrupted" else None,
                               exclusions=exclusions, code=code)
    else:
        pre = prefix if prefix is not None else f"{site_code}-{METHOD_LETTER[method]}"
        first = _next_number(codes, pre)
        common = {"quadrat_width": float(width), "quadrat_length": float(qlength), "prefix": pre,
                  "first_number": first, "exclusions": exclusions}
        if method == C.PLACEMENT_RANDOM:
            placement = D.simple_random(geometry, n, rng, min_separation=min_separation, **common)
        elif method == C.PLACEMENT_BALANCED:
            placement = D.balanced_acceptance(geometry, n, rng, min_separation=min_separation, **common)
        elif method == C.PLACEMENT_SYSTEMATIC:
            placement = D.systematic_grid(geometry, float(spacing), rng, **common)
        else:
            strata_geoms, stratum_ids, strata_added = _strata(session, programme, site, geometry, strata)
            placement = D.stratified_random(strata_geoms, n, rng, allocation=allocation, pilot_sd=pilot_sd,
                                            min_separation=min_separation, **common)
    frame = placement.stations
    if frame.empty:
        raise DesignError(f"no station could be placed in site {site_code} with these settings")
    clash = sorted(set(frame[C.STATION]) & set(codes))
    if clash:
        raise DesignError(f"station code {clash[0]} is already in the programme; choose another --prefix")
    first_season = established.year
    rows = []
    for rec in frame.to_dict(orient="records"):
        rows.append(M.Station(
            programme_id=pid, code=rec[C.STATION], site_id=site.id,
            stratum_id=stratum_ids.get(rec.get(C.STRATUM)) if rec.get(C.STRATUM) is not None else None,
            panel_id=panel_id, placement=placement.method, placement_seed=placement.seed,
            x=float(rec[C.X]), y=float(rec[C.Y]), crs_epsg=programme.crs_epsg, fix_method=FIX_PLANNED,
            quadrat_width_m=float(rec.get(C.QUADRAT_WIDTH) or width),
            quadrat_length_m=float(rec.get(C.QUADRAT_LENGTH) or qlength),
            transect=rec.get(C.TRANSECT), distance_m=rec.get(C.DISTANCE), established=established,
        ))
    session.add_all(rows)
    session.flush()
    _store_run(session, pid, site.id, placement, exclusions, min_separation, None)
    shown = frame.copy()
    shown.insert(1, C.SITE, site_code)
    if panel is not None:
        shown[C.PANEL] = panel
    return PlaceResult(site=site_code, method=placement.method, seed=placement.seed, stations=shown,
                       diagnostics=placement.diagnostics, stored=not dry_run, strata_added=strata_added,
                       params={**placement.params, "first_season": first_season})


#: what a placement run keeps of each of its stations, to be extended later
RUN_STATION_FIELDS = (C.STATION, C.STRATUM, "order", "halton_index")


def _store_run(session: Session, programme_id: int, site_id: int, placement: D.Placement,
               exclusions: list[BaseGeometry], min_separation: float, extends: int | None) -> M.PlacementRun:
    """Record the run: method, seed, inputs (exclusions as GeoJSON) and its stations in order."""
    members = [{k: rec.get(k) for k in RUN_STATION_FIELDS if k in rec}
               for rec in placement.stations.to_dict(orient="records")]
    prefix = placement.params.get("prefix") or re.sub(r"\d+$", "", str(members[0][C.STATION])) if members else ""
    params = {**_jsonable(placement.params), "prefix": prefix, "min_separation": float(min_separation),
              "exclusions": [mapping(g) for g in exclusions], "stations": _jsonable(members)}
    run = M.PlacementRun(programme_id=programme_id, site_id=site_id, method=placement.method, seed=int(placement.seed),
                         extends_id=extends, n_stations=len(members), params_json=json.dumps(params, default=list))
    session.add(run)
    session.flush()
    return run


EXTENDABLE = (C.PLACEMENT_BALANCED, C.PLACEMENT_STRATIFIED, C.PLACEMENT_RANDOM)


def extend_stations(db: str | None, site: str, n: int, *, seed: int | None = None, run: int | None = None,
                    panel: str | None = None, established: dt.date | None = None, dry_run: bool = False,
                    programme_code: str | None = None) -> PlaceResult:
    """Add ``n`` stations to the latest balanced, stratified or random placement of ``site`` (or run ``run``).

    Balanced: the stored random-start Halton order continues (no new draws; the seed stays the first
    run's). Stratified: the total is allocated again by the placement's own rule and each stratum gets
    its shortfall, drawn at random. Random: new draws. Both draw with a new seed, stored with the new
    stations. Exclusions and the minimum separation are the first placement's; new stations also keep
    that separation from every station in service in the site.
    """
    if n is None or n < 1:
        raise InputError(InputProblem("--n", None, None, n, "the number of stations to add (at least 1)"))
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        with store.session() as session:
            result = _extend(session, programme, site, int(n), seed, run, panel, established or dt.date.today())
            if dry_run:
                session.rollback()
                result.stored = False
        return result
    finally:
        store.dispose()


def _extend(session: Session, programme: M.Programme, site_code: str, n: int, seed: int | None, run_id: int | None,
            panel: str | None, established: dt.date) -> PlaceResult:
    pid = programme.id
    site, geometry = site_geometry(session, pid, site_code)
    runs = session.exec(select(M.PlacementRun).where(M.PlacementRun.site_id == site.id)
                        .order_by(M.PlacementRun.id)).all()
    runs = [r for r in runs if r.method in EXTENDABLE]
    if run_id is not None:
        runs = [r for r in runs if r.id == run_id]
    if not runs:
        raise DataError(f"site {site_code} has no stored balanced, stratified or random placement to extend"
                        + (f" with run {run_id}" if run_id is not None else "")
                        + " (placements are stored from this version on; place with `monitor design place SITE --method random`)")
    head = runs[-1]
    chain = [head]
    while chain[-1].extends_id is not None:
        chain.append(session.get(M.PlacementRun, chain[-1].extends_id))
    chain.reverse()
    first_params = json.loads(chain[0].params_json)
    exclusions = [shape(g) for g in first_params.get("exclusions", [])]
    members = [m for r in chain for m in json.loads(r.params_json)["stations"]]
    stations = {s.code: s for s in session.exec(select(M.Station).where(M.Station.programme_id == pid)).all()}
    old = pd.DataFrame([{**m, C.X: stations[m[C.STATION]].x, C.Y: stations[m[C.STATION]].y,
                         C.QUADRAT_WIDTH: stations[m[C.STATION]].quadrat_width_m,
                         C.QUADRAT_LENGTH: stations[m[C.STATION]].quadrat_length_m} for m in members])
    own = set(old[C.STATION])
    avoid = [(s.x, s.y) for s in stations.values()
             if s.site_id == site.id and s.state == "in_service" and s.code not in own]
    params = dict(first_params)
    params.pop("stations", None)
    placement = D.Placement(chain[0].method, chain[0].seed, old, params)
    prefix = params.get("prefix") or f"{site_code}-{METHOD_LETTER[chain[0].method]}"
    first = _next_number(list(stations), prefix)
    if chain[0].method == C.PLACEMENT_BALANCED:
        grown = D.extend_balanced(placement, geometry, n, exclusions=exclusions, avoid=avoid, prefix=prefix,
                                  first_number=first)
        new = grown.stations.iloc[len(old):].reset_index(drop=True)
        added = D.Placement(C.PLACEMENT_BALANCED, chain[0].seed, new, grown.params, grown.diagnostics)
    elif chain[0].method == C.PLACEMENT_RANDOM:
        added = D.extend_random(placement, geometry, n, fresh_seed(seed), exclusions=exclusions, avoid=avoid,
                                prefix=prefix, first_number=first)
    else:
        strata, _ids, _added = _strata(session, programme, site, geometry, None)
        added = D.extend_stratified(placement, strata, n, fresh_seed(seed), exclusions=exclusions, avoid=avoid,
                                    prefix=prefix, first_number=first)
    frame = added.stations
    if frame.empty:
        raise DesignError(f"no station could be added to site {site_code}: the usable area is full at this separation")
    stratum_ids = {r.code: r.id for r in session.exec(select(M.Stratum).where(M.Stratum.site_id == site.id)).all()}
    panel_id = None
    if panel is not None:
        row = session.exec(select(M.Panel).where(M.Panel.programme_id == pid, M.Panel.code == panel)).first()
        if row is None:
            raise DataError(f"no panel '{panel}' in the programme")
        panel_id = row.id
    rows = [M.Station(programme_id=pid, code=rec[C.STATION], site_id=site.id,
                      stratum_id=stratum_ids.get(rec.get(C.STRATUM)) if rec.get(C.STRATUM) else None,
                      panel_id=panel_id, placement=added.method, placement_seed=added.seed, x=float(rec[C.X]),
                      y=float(rec[C.Y]), crs_epsg=programme.crs_epsg, fix_method=FIX_PLANNED,
                      quadrat_width_m=float(rec[C.QUADRAT_WIDTH]), quadrat_length_m=float(rec[C.QUADRAT_LENGTH]),
                      established=established) for rec in frame.to_dict(orient="records")]
    session.add_all(rows)
    session.flush()
    run = _store_run(session, pid, site.id, added, exclusions, float(params.get("min_separation") or 0.0), head.id)
    shown = frame.copy()
    shown.insert(1, C.SITE, site_code)
    return PlaceResult(site=site_code, method=added.method, seed=added.seed, stations=shown,
                       diagnostics=added.diagnostics, stored=True,
                       params={"run": run.id, "extends": head.id, "stations_before": len(old),
                               "stations_after": len(old) + len(frame)})


def _free_transect_code(site_code: str, existing: list[M.Station]) -> str:
    used = {s.transect for s in existing if s.transect} | {s.code for s in existing}
    k = 1
    while f"{site_code}-T{k}" in used or any(c.startswith(f"{site_code}-T{k}-") for c in used):
        k += 1
    return f"{site_code}-T{k}"


def _strata(session: Session, programme: M.Programme, site: M.Site, geometry: BaseGeometry,
            path: Path | None) -> tuple[dict[str, BaseGeometry], dict[str, int], int]:
    """Strata of a site: from a GeoJSON file (stored as new strata) or those already stored."""
    stored = {s.code: s for s in session.exec(select(M.Stratum).where(M.Stratum.site_id == site.id)).all()}
    added = 0
    if path is not None:
        polygons = read_polygons(path, programme.crs_epsg, code_field="code")
        seen = set()
        for code, poly in polygons:
            if code in seen:
                raise InputError(InputProblem(Path(path).name, None, "code", code, "each stratum code once"))
            seen.add(code)
            if code in stored:
                raise InputError(InputProblem(Path(path).name, None, "code", code,
                                              f"a stratum code not already stored for site {site.code}"))
            clipped = poly.intersection(geometry)
            if clipped.is_empty or clipped.area <= 0:
                raise DesignError(f"stratum {code} does not overlap site {site.code}")
            row = M.Stratum(site_id=site.id, code=code, area_m2=float(clipped.area),
                            boundary_geojson=json.dumps(mapping(clipped)))
            session.add(row)
            stored[code] = row
            added += 1
        session.flush()
    if not stored:
        raise DesignError(f"site {site.code} has no strata: give them with --strata FILE.geojson")
    geoms = {}
    for code, row in stored.items():
        if not row.boundary_geojson:
            raise DesignError(f"stratum {code} of site {site.code} has no stored boundary")
        geoms[code] = shape(json.loads(row.boundary_geojson)).intersection(geometry)
    return geoms, {code: row.id for code, row in stored.items()}, added


# --- panels: which stations are due when, and assigning panels -------------------------------------------


def default_first_year(store: Store, programme_id: int, today: dt.date | None = None) -> int:
    """The next season: the year after the last round held, or this year if that is later."""
    today = today or dt.date.today()
    # a round only planned so far (no visit stored) is still to come
    last = store.frame("SELECT max(r.year) AS y FROM round r WHERE r.programme_id = :p "
                       "AND EXISTS (SELECT 1 FROM visit v WHERE v.round_id = r.id)", p=programme_id)["y"].iloc[0]
    return max(today.year, int(last) + 1) if last is not None and not pd.isna(last) else today.year


@dataclass
class DueTable:
    """Which panels and stations are due in which year (McDonald 2003 notation for the rules)."""

    notation: str
    years: list[int]
    panels: pd.DataFrame      # panel, rule, start_year, stations, then one bool column per year
    stations: pd.DataFrame    # station, site, panel, then one bool column per year
    totals: pd.DataFrame      # year, stations due

    def to_dict(self) -> dict[str, Any]:
        def with_str_years(frame: pd.DataFrame) -> pd.DataFrame:
            return frame.rename(columns={y: str(y) for y in self.years})

        return {"design": self.notation, "years": self.years, "panels": with_str_years(self.panels),
                "stations": with_str_years(self.stations), "totals": self.totals}


def panel_due_table(db: str | None, years: int, *, first_year: int | None = None,
                    programme_code: str | None = None) -> DueTable:
    """Which stations are due in which year for ``years`` seasons from ``first_year`` (default: next)."""
    if years < 1:
        raise InputError(InputProblem("--years", None, None, years, "at least 1 year"))
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        pid = programme.id
        panel_frame = queries.panels(store, pid)
        rules = StoredPanels.from_frame(panel_frame)
        first = first_year if first_year is not None else default_first_year(store, pid)
        span = list(range(int(first), int(first) + int(years)))
        stations = queries.stations(store, pid)
    finally:
        store.dispose()
    stations = stations[stations["state"] == "in_service"].reset_index(drop=True)
    table = panel_frame[[C.PANEL, "rule", "start_year", "stations"]].copy()
    for y in span:
        table[y] = [rules.is_due(p, y) for p in table[C.PANEL]]
    per_station = stations[[C.STATION, C.SITE, C.PANEL]].copy()
    for y in span:
        per_station[y] = [False if p is None or pd.isna(p) else rules.is_due(str(p), y) for p in per_station[C.PANEL]]
    totals = pd.DataFrame({C.YEAR: span, "stations_due": [int(per_station[y].sum()) for y in span]})
    return DueTable(rules.notation, span, table, per_station, totals)


@dataclass
class PanelAssignment:
    design: str
    start_year: int
    panels_added: list[str]
    stations: pd.DataFrame   # station, site, panel
    stored: bool

    def to_dict(self) -> dict[str, Any]:
        return {"design": self.design, "start_year": self.start_year, "panels_added": self.panels_added,
                "stations": self.stations, "stored": self.stored}


def assign_panels(db: str | None, design: str, *, start_year: int | None = None, dry_run: bool = False,
                  programme_code: str | None = None) -> PanelAssignment:
    """Assign every in-service station without a panel to the panels of revisit design ``design``.

    Each panel is spread across the reserve (:func:`monitor.design.assign_panels`: consecutive
    blocks of a balanced order when all the stations come from one balanced placement, else dealt
    out along a Hilbert curve).  Panel ``j`` of a ``[v-r]`` pattern is stored with rule ``[v-r]``
    and first year ``start_year + j``; an every-year panel ``[1-0]`` starts in ``start_year``.
    """
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        pid = programme.id
        start = int(start_year) if start_year is not None else default_first_year(store, pid)
        try:
            panel_design = D.PanelDesign.parse(design, start)
        except DesignError as exc:
            raise InputError(InputProblem("--design", None, None, design, str(exc))) from None
        with store.session() as session:
            stations = session.exec(select(M.Station).where(M.Station.programme_id == pid,
                                                            M.Station.state == "in_service",
                                                            M.Station.panel_id.is_(None))).all()
            if not stations:
                raise DataError("every station in service already has a panel; nothing to assign")
            site_code = dict(session.exec(select(M.Site.id, M.Site.code).where(M.Site.programme_id == pid)).all())
            frame = pd.DataFrame({C.STATION: [s.code for s in stations], C.SITE: [site_code[s.site_id] for s in stations],
                                  C.X: [s.x for s in stations], C.Y: [s.y for s in stations]})
            balanced = {(s.site_id, s.placement_seed) for s in stations if s.placement == C.PLACEMENT_BALANCED}
            if len(balanced) == 1 and all(s.placement == C.PLACEMENT_BALANCED for s in stations):
                # codes were issued in the balanced acceptance order
                frame["order"] = frame[C.STATION].rank(method="first").astype(int) - 1
            assigned = D.assign_panels(frame, panel_design)
            existing = {p.code: p for p in session.exec(select(M.Panel).where(M.Panel.programme_id == pid)).all()}
            added, ids = [], {}
            for panel in panel_design.panels:
                rule = f"[{panel.visit}-{panel.rest}]"
                first = start + panel.offset
                if panel.code in existing:
                    old = existing[panel.code]
                    if old.rule.replace(" ", "") != rule or old.start_year != first:
                        raise InputError(InputProblem("--design", None, None, design,
                                                      f"panel codes not already used (panel {panel.code} exists with "
                                                      f"rule {old.rule} from {old.start_year})"))
                    ids[panel.code] = old.id
                    continue
                row = M.Panel(programme_id=pid, code=panel.code, rule=rule, start_year=first,
                              description=f"revisit design {panel_design.notation} from {start}")
                session.add(row)
                session.flush()
                ids[panel.code] = row.id
                added.append(panel.code)
            by_code = {s.code: s for s in stations}
            for code, panel_code in zip(assigned[C.STATION], assigned[C.PANEL], strict=True):
                by_code[code].panel_id = ids[panel_code]
            session.flush()
            if dry_run:
                session.rollback()
        return PanelAssignment(panel_design.notation, start, added,
                               assigned[[C.STATION, C.SITE, C.PANEL]].reset_index(drop=True), not dry_run)
    finally:
        store.dispose()


# --- export -------------------------------------------------------------------------------------------------

EXPORT_PROPERTIES = [C.STATION, C.SITE, C.PANEL, "placement", "placement_seed", C.QUADRAT_WIDTH, C.QUADRAT_LENGTH,
                     C.TRANSECT, C.DISTANCE, "marker", "relocation_notes"]


def export_stations(db: str | None, path: Path, *, site: str | None = None,
                    programme_code: str | None = None) -> int:
    """Write the stations in service as GPX 1.1 waypoints (``.gpx``) or RFC 7946 GeoJSON (``.geojson``,
    ``.json``), WGS84 longitude/latitude.  Returns the number of stations written."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in (".gpx", ".geojson", ".json"):
        raise InputError(InputProblem(path.name, None, None, path.suffix, "a file name ending .gpx or .geojson"))
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        stations = queries.stations(store, programme.id)
    finally:
        store.dispose()
    stations = stations[stations["state"] == "in_service"]
    if site is not None:
        if site not in set(stations[C.SITE]):
            raise DataError(f"no station in service in site '{site}'")
        stations = stations[stations[C.SITE] == site]
    stations = stations.reset_index(drop=True)
    if suffix == ".gpx":
        path.write_text(stations_gpx(stations, programme.crs_epsg, name=f"{programme.code} stations",
                                     desc_column="relocation_notes"), encoding="utf-8")
    else:
        write_geojson(stations_geojson(stations, programme.crs_epsg, properties=EXPORT_PROPERTIES), path)
    return len(stations)
