"""Field packs for a team-day: printable field sheet context, GPX 1.1 and iCalendar.

The field sheet's table uses exactly the wide field-sheet headers the records importer
reads back (station, date, observers, status, repeat, protocol, notes, then
``<SPECIES>:count``, ``<SPECIES>:cover``, ``<SPECIES>:frequency/<n>``,
``<SPECIES>:pin_hits/<n>``, ``<SPECIES>:presence``, ``cov:<name>[<unit>]``), one entry row
per station in route order, with the last two visits shown above each entry row for
reference.  Building the context is pure; :func:`render_field_sheet` lays it out with the
Jinja2 template ``field_sheet.html`` (autoescape, StrictUndefined).
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, fields
from pathlib import Path
from typing import Any

import jinja2
import numpy as np
import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.errors import DesignError
from monitor.io.spatial import CalendarEvent, Route, Waypoint, gpx_document, icalendar_document, to_wgs84
from monitor.schedule.planner import ARRIVAL, SeasonPlan, TeamDay

#: the fixed leading headers of the wide field-sheet layout, in sheet order
BASE_HEADERS = ("station", "date", "observers", "status", "repeat", "protocol", "notes")
RELOCATION = "relocation_notes"   # how to find the marker: offsets, bearings, landmarks [text]

#: fieldwork-safety caution printed on every sheet
SAFETY_CAUTIONS = (
    "Do not work alone unless your organisation's lone-working procedure allows it; leave your route "
    "and expected return time with a named contact and check in when you are back.",
    "Keep away from deep, fast or cold water, soft ground and ditches; do not cross flooded ground.",
    "Ticks: wear long trousers tucked into socks, check yourself after the day and remove ticks "
    "promptly; seek medical advice if a rash or fever follows.",
    "Check the weather forecast before setting out; stop work in lightning, high wind, heat or poor "
    "visibility, and carry water, food and waterproofs.",
    "Fragile habitat: keep to the same approach line to each quadrat, avoid trampling around it, and "
    "do not disturb nesting birds or protected species.",
    "Enter land only with the landowner's or manager's permission, and follow access conditions "
    "(gates, livestock, dogs, vehicles).",
    "These notes do not replace local rules or your organisation's own risk assessment: where they "
    "differ, follow those.",
)


def _measure_header(species: str, measure: str, n: int | None) -> str:
    if measure not in measures.REGISTRY:
        raise DesignError(f"unknown measure {measure!r} for species {species}")
    entry = measures.REGISTRY[measure]
    if entry.needs_n:
        if n is None or int(n) <= 0:
            raise DesignError(f"{species}:{measure} needs the number of cells or pins (n)")
        return entry.header(species, int(n))
    return entry.header(species)


def field_sheet_columns(targets: Sequence[tuple[str, str] | tuple[str, str, int | None]],
                        covariates: Sequence[tuple[str, str]] = ()) -> tuple[str, ...]:
    """Headers of the wide field-sheet layout for these targets and visit covariates.

    ``targets`` are (species, measure) or (species, measure, n); ``covariates`` (name, unit).
    """
    heads = list(BASE_HEADERS)
    for t in targets:
        sp, meas = t[0], t[1]
        n = t[2] if len(t) > 2 else None
        heads.append(_measure_header(sp, meas, n))
    for name, unit in covariates:
        heads.append(f"cov:{name}[{unit}]")
    if len(set(h.lower() for h in heads)) != len(heads):
        raise DesignError("field-sheet headers repeat: each species and measure may appear once")
    return tuple(heads)


@dataclass(frozen=True)
class PreviousVisit:
    """One earlier visit shown for reference: values aligned to the value headers."""

    date: str
    observers: str
    status: str
    values: tuple[str, ...]


@dataclass(frozen=True)
class SheetStation:
    """One station on the sheet, in route order."""

    order: int
    station: str
    arrival: str
    x: float
    y: float
    lon: float
    lat: float
    quadrat: str
    relocation: str
    transect: str
    previous: tuple[PreviousVisit, ...]


@dataclass(frozen=True)
class FieldSheetContext:
    """Everything ``field_sheet.html`` lays out; nothing else is read by the template."""

    title: str
    programme: str
    site: str
    team: str
    members: tuple[str, ...]
    date: str
    start_time: str
    end_time: str
    start_point: str
    route_km: float
    protocol: str
    headers: tuple[str, ...]
    value_headers: tuple[str, ...]
    stations: tuple[SheetStation, ...]
    cautions: tuple[str, ...]
    instructions: tuple[str, ...]
    generated: str
    site_name: str = ""                  # printed beside the site code
    crs: str = ""                        # "EPSG:32630 (WGS 84 / UTM zone 30N)": what E and N are in
    value_labels: tuple[str, ...] = ()   # the species' common name under each value header
    running_head: str = ""               # site, team and date at the top of every printed page

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def _fmt_value(v: Any, n_seen: Any, n_sheet: int | None) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return ""
    fv = float(v)
    text = str(int(fv)) if fv.is_integer() else f"{fv:g}"
    if n_sheet is not None and n_seen is not None and not pd.isna(n_seen) and int(n_seen) != int(n_sheet):
        text += f"/{int(n_seen)}"
    return text


def _observers_text(v: Any) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return ""
    if isinstance(v, list | tuple):
        return ";".join(str(o) for o in v)
    return str(v)


def _previous_visits(station: str, before: dt.date, visits: pd.DataFrame | None,
                     observations: pd.DataFrame | None, targets: Sequence[tuple], keep: int = 2
                     ) -> tuple[PreviousVisit, ...]:
    if visits is None or visits.empty:
        return ()
    v = visits[(visits[C.STATION].astype(str) == station) & (pd.to_datetime(visits[C.DATE]).dt.date < before)]
    if v.empty:
        return ()
    v = v.assign(_d=pd.to_datetime(v[C.DATE]).dt.date).sort_values("_d", ascending=False).head(keep)
    out = []
    obs = None
    if observations is not None and not observations.empty:
        obs = observations[observations[C.STATION].astype(str) == station].copy()
        obs["_d"] = pd.to_datetime(obs[C.DATE]).dt.date
    for _, row in v.iterrows():
        vals = []
        for t in targets:
            sp, meas = t[0], t[1]
            n_sheet = t[2] if len(t) > 2 else None
            cell = ""
            if obs is not None:
                hit = obs[(obs["_d"] == row["_d"]) & (obs[C.SPECIES] == sp) & (obs[C.MEASURE] == meas)]
                if not hit.empty:
                    h = hit.iloc[0]
                    cell = _fmt_value(h["value"], h.get("n"), n_sheet)
            vals.append(cell)
        out.append(PreviousVisit(row["_d"].isoformat(), _observers_text(row.get("observers")),
                                 str(row.get(C.VISIT_STATUS, "")), tuple(vals)))
    return tuple(out)


def field_sheet_context(
    plan: SeasonPlan,
    team: str,
    date: dt.date,
    stations: pd.DataFrame,
    *,
    crs: int | str,
    targets: Sequence[tuple[str, str] | tuple[str, str, int | None]],
    covariates: Sequence[tuple[str, str]] = (),
    visits: pd.DataFrame | None = None,
    observations: pd.DataFrame | None = None,
    programme: str = "",
    protocol: str = "",
    generated: dt.datetime | None = None,
    species_names: Mapping[str, str] | None = None,
    site_name: str = "",
) -> FieldSheetContext:
    """Build the field-sheet context for one team-day.

    Parameters
    ----------
    plan : SeasonPlan
    team, date : the team-day
    stations : DataFrame
        station, x, y [m]; optional quadrat_width_m, quadrat_length_m, relocation_notes,
        transect, distance_m.
    crs : EPSG code of x, y (for the longitude/latitude printed beside each station)
    targets : (species, measure[, n]) recorded at every visit
    covariates : (name, unit) visit covariates
    visits, observations : canonical frames of earlier records (for the last two visits)
    programme, protocol : names printed on the sheet
    generated : time stamp printed on the sheet (default: now, UTC)
    species_names : species code -> common name, printed under each value column's code
    site_name : the site's name, printed beside its code
    """
    td = plan.team_day(team, date)
    headers = field_sheet_columns(targets, covariates)
    value_headers = headers[len(BASE_HEADERS):]
    info = stations.copy()
    info[C.STATION] = info[C.STATION].astype(str)
    info = info.set_index(C.STATION)
    missing = [s for s in td.stations if s not in info.index]
    if missing:
        raise DesignError(f"station {missing[0]} of the plan is not in the stations table")
    sub = info.loc[list(td.stations)]
    lon, lat = to_wgs84(sub[C.X], sub[C.Y], crs)
    planned = plan.visits[(plan.visits["team"] == team) & (plan.visits[C.DATE] == date)].set_index(C.STATION)
    rows = []
    pad = ("",) * len(covariates)
    for k, code in enumerate(td.stations):
        r = sub.loc[code]
        w = r.get(C.QUADRAT_WIDTH)
        ln = r.get(C.QUADRAT_LENGTH)
        quadrat = f"{w:g} m x {ln:g} m" if w is not None and ln is not None and not pd.isna(w) else ""
        tr = ""
        if C.TRANSECT in r.index and isinstance(r[C.TRANSECT], str) and r[C.TRANSECT]:
            tr = f"{r[C.TRANSECT]} at {float(r.get(C.DISTANCE, float('nan'))):g} m"
        reloc = r.get(RELOCATION, "")
        reloc = "" if reloc is None or (isinstance(reloc, float) and math.isnan(reloc)) else str(reloc)
        prev = _previous_visits(code, date, visits, observations, targets)
        prev = tuple(PreviousVisit(p.date, p.observers, p.status, p.values + pad) for p in prev)
        arrival = planned.loc[code, ARRIVAL] if code in planned.index else None
        rows.append(SheetStation(k + 1, code, arrival.strftime("%H:%M") if arrival else "", float(r[C.X]),
                                 float(r[C.Y]), round(float(lon[k]), 6), round(float(lat[k]), 6), quadrat,
                                 reloc, tr, prev))
    generated = generated or dt.datetime.now(dt.UTC)
    names = dict(species_names or {})
    labels = []
    for t in targets:
        labels.append(str(names.get(t[0]) or ""))
    labels += ["" for _ in covariates]  # a covariate's header already says what it is
    site_words = f"{td.site} {site_name}" if site_name else td.site
    running_head = f"Field sheet · Site {site_words} · team {td.team} · {td.date.isoformat()}"
    instructions = (
        "One row per station visit. The date box holds the planned date: cross it out and write the day of "
        "the visit (YYYY-MM-DD) if it differs. Fill observers (codes separated by ';') and status (done, "
        "partial, missed or inaccessible) for every row.",
        "Write 0 for a species looked for and not found; leave a box blank only when it was not recorded. "
        "A missed or inaccessible visit has all value boxes blank.",
        "Rows marked 'earlier' show the last two visits for reference only: do not copy them into today's row.",
    )
    return FieldSheetContext(
        title=f"Field sheet: {td.site}, team {td.team}, {td.date.isoformat()}",
        programme=programme, site=td.site, team=td.team, members=td.members, date=td.date.isoformat(),
        start_time=td.start_time.strftime("%H:%M"), end_time=td.end_time.strftime("%H:%M"),
        start_point=f"{td.start[0]:.0f} E, {td.start[1]:.0f} N", route_km=round(td.route_m / 1000.0, 2),
        protocol=protocol, headers=headers, value_headers=value_headers, stations=tuple(rows),
        cautions=SAFETY_CAUTIONS, instructions=instructions,
        generated=generated.strftime("%Y-%m-%d %H:%M UTC"), site_name=site_name, crs=crs_label(crs),
        value_labels=tuple(labels), running_head=running_head)


def crs_label(crs: int | str) -> str:
    """``"EPSG:32630 (WGS 84 / UTM zone 30N)"``: the code with its name from the EPSG registry (pyproj)."""
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    code = str(crs).upper().removeprefix("EPSG:")
    try:
        name = CRS.from_user_input(f"EPSG:{code}").name
    except CRSError:
        return f"EPSG:{code}"
    return f"EPSG:{code} ({name})"


def field_sheet_frame(context: FieldSheetContext) -> pd.DataFrame:
    """The blank entry table (wide layout) as a DataFrame, station codes filled in route order."""
    df = pd.DataFrame({h: [""] * len(context.stations) for h in context.headers}, columns=list(context.headers))
    df["station"] = [s.station for s in context.stations]
    if context.protocol:
        df["protocol"] = context.protocol
    return df


def _template_dirs() -> list[Path]:
    here = Path(__file__).resolve()
    return [here.parents[1] / "_bundled" / "templates", here.parents[2] / "templates"]


def template_environment(template_dir: str | Path | None = None) -> jinja2.Environment:
    """Jinja2 environment with autoescape and StrictUndefined over the project's templates."""
    dirs = [Path(template_dir)] if template_dir else [d for d in _template_dirs() if d.is_dir()]
    if not dirs:
        raise DesignError("cannot find the templates folder")
    return jinja2.Environment(loader=jinja2.FileSystemLoader([str(d) for d in dirs]),
                              autoescape=jinja2.select_autoescape(default=True, default_for_string=True),
                              undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)


def render_field_sheet(context: FieldSheetContext, template_dir: str | Path | None = None) -> str:
    """Render ``field_sheet.html`` for ``context`` (HTML text)."""
    env = template_environment(template_dir)
    return env.get_template("field_sheet.html").render(sheet=context)


def phone_sheet_fields(targets: Sequence[tuple[str, str] | tuple[str, str, int | None]],
                       covariates: Sequence[tuple[str, str]] = ()) -> list[dict[str, Any]]:
    """One input per species and measure (and visit covariate), in the entry sheet's column order, each
    with the importer's value rule for its measure (``monitor.measures``) and the grid or frame size n."""
    out: list[dict[str, Any]] = []
    for t in targets:
        species, measure = t[0], t[1]
        n = t[2] if len(t) > 2 else None
        entry = measures.get(measure)
        value_rule = entry.rule
        n = None if n is None or pd.isna(n) else int(n)
        label = f"{species} {entry.label}"
        if value_rule.up_to_n:
            label += f" (of {n} {value_rule.unit})"
        elif entry.entry_unit:
            label += f" ({entry.entry_unit})"
        out.append({"kind": "value", "header": _measure_header(species, measure, n), "species": species,
                    "measure": measure, "n": n, "label": label, "hint": value_rule.wording(n),
                    "whole": value_rule.whole, "rule": value_rule.to_dict(),
                    "zero": entry.absent_value is not None})
    for name, unit in covariates:
        out.append({"kind": "covariate", "header": f"cov:{name}[{unit}]", "species": None, "measure": None,
                    "n": None, "label": f"{name} [{unit}]", "hint": "", "whole": False, "rule": None,
                    "zero": False})
    return out


def phone_sheet_data(context: FieldSheetContext, targets: Sequence[tuple[str, str] | tuple[str, str, int | None]],
                     covariates: Sequence[tuple[str, str]] = ()) -> dict[str, Any]:
    """What the offline phone sheet's script reads: the team-day, the stations in route order with their last
    visits, one field per column of the entry sheet, and the names it stores and exports under."""
    fields_ = phone_sheet_fields(targets, covariates)
    if tuple(f["header"] for f in fields_) != context.value_headers:
        raise DesignError("the phone sheet's fields do not match the entry sheet's columns")
    key = ":".join(("monitor-phone-sheet", context.programme, context.team, context.date, context.site))
    return {
        "storage_key": key,
        "export_name": f"entry_{context.date}_{context.team}_{context.site}.csv",
        "headers": list(context.headers),
        "date": context.date,
        "members": list(context.members),
        "protocol": context.protocol,
        "statuses": list(C.VISIT_STATUSES),
        "statuses_with_values": list(C.STATUSES_WITH_VALUES),
        "fields": fields_,
        "stations": [asdict(s) for s in context.stations],
    }


def render_phone_sheet(context: FieldSheetContext, targets: Sequence[tuple[str, str] | tuple[str, str, int | None]],
                       covariates: Sequence[tuple[str, str]] = (), template_dir: str | Path | None = None) -> str:
    """The offline phone field sheet (``phone_sheet.html``): one self-contained HTML file, no server and no
    network; entries are checked as typed, kept in the browser's storage, and exported as the entry CSV."""
    env = template_environment(template_dir)
    return env.get_template("phone_sheet.html").render(sheet=context,
                                                       data=phone_sheet_data(context, targets, covariates))


def write_sheet_pdf(html: str, path: str | Path) -> Path:
    """The field sheet as a PDF for printing (WeasyPrint): A4 landscape, every page headed with site,
    team, date and "page n of m".  Nothing is fetched: the sheet is self-contained."""
    import logging

    import weasyprint

    logging.getLogger("weasyprint").setLevel(logging.ERROR)
    weasyprint.HTML(string=html, url_fetcher=weasyprint.URLFetcher(allowed_protocols=["data"])).write_pdf(path)
    return Path(path)


def context_field_names() -> set[str]:
    """Names of the context's fields (for checking the template uses nothing else)."""
    return {f.name for f in fields(FieldSheetContext)}


def team_day_gpx(plan: SeasonPlan, team: str, date: dt.date, stations: pd.DataFrame, *, crs: int | str,
                 creator: str = "monitor") -> str:
    """GPX 1.1 for a team-day: the start point and stations as waypoints, plus the route."""
    td = plan.team_day(team, date)
    info = stations.assign(**{C.STATION: stations[C.STATION].astype(str)}).set_index(C.STATION)
    sub = info.loc[list(td.stations)]
    xs = np.concatenate([[td.start[0]], sub[C.X].to_numpy(float)])
    ys = np.concatenate([[td.start[1]], sub[C.Y].to_numpy(float)])
    lon, lat = to_wgs84(xs, ys, crs)
    start = Waypoint(float(lat[0]), float(lon[0]), f"START {td.site}", desc="start and end point", sym="Parking Area")
    wpts = [start]
    for k, code in enumerate(td.stations, start=1):
        reloc = sub.loc[code].get(RELOCATION, None)
        desc = reloc if isinstance(reloc, str) and reloc else None
        wpts.append(Waypoint(float(lat[k]), float(lon[k]), code, desc=desc, cmt=f"stop {k}", sym="Flag"))
    route = Route(f"{td.site} {td.team} {td.date.isoformat()}", (start, *wpts[1:], start),
                  desc=f"{len(td.stations)} stations, {td.route_m / 1000:.2f} km")
    return gpx_document(wpts, [route], creator=creator, name=route.name)


def team_day_calendar(plan: SeasonPlan, *, crs: int | str, dtstamp: dt.datetime, programme: str = "monitor",
                      domain: str = "monitor.invalid", time_zone: str | None = None) -> str:
    """iCalendar (RFC 5545) with one event per team-day of the plan, in the programme's time zone
    (``time_zone``, IANA name; floating local times when it is not set)."""
    events = []
    if plan.team_days:
        sx = [td.start[0] for td in plan.team_days]
        sy = [td.start[1] for td in plan.team_days]
        lon, lat = to_wgs84(sx, sy, crs)
    for k, td in enumerate(plan.team_days):
        day_visits = plan.visits[(plan.visits["team"] == td.team) & (plan.visits[C.DATE] == td.date)]
        lines = [f"Team {td.team}: {', '.join(td.members)}",
                 f"{len(td.stations)} stations, route {td.route_m / 1000:.2f} km, start {td.start_time:%H:%M}"]
        lines += [f"{r.order}. {r.station} {r.arrival:%H:%M}" for r in day_visits.itertuples()]
        events.append(CalendarEvent(
            uid=f"{plan.year}-{td.team}-{td.date:%Y%m%d}-{td.site}@{domain}",
            start=dt.datetime.combine(td.date, td.start_time),
            end=dt.datetime.combine(td.date, td.end_time),
            summary=f"{programme}: {td.site}, team {td.team} ({len(td.stations)} stations)",
            description="\n".join(lines),
            location=f"{td.site} start point ({td.start[0]:.0f} E, {td.start[1]:.0f} N)",
            geo=(float(lat[k]), float(lon[k]))))
    return icalendar_document(events, dtstamp=dtstamp, name=f"{programme} {plan.year}", time_zone=time_zone)


__all__ = [
    "BASE_HEADERS",
    "FieldSheetContext",
    "PreviousVisit",
    "RELOCATION",
    "SAFETY_CAUTIONS",
    "SheetStation",
    "TeamDay",
    "context_field_names",
    "field_sheet_columns",
    "field_sheet_context",
    "field_sheet_frame",
    "phone_sheet_data",
    "phone_sheet_fields",
    "render_field_sheet",
    "render_phone_sheet",
    "team_day_calendar",
    "team_day_gpx",
    "template_environment",
]
