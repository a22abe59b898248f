"""A season's rounds as a job: which stations are due, the plan (team, day, route), and field packs.

* :func:`due_for_season` lists the stations due by panel rule plus the overdue ones (missed,
  inaccessible, or not visited in a round held when they were due), from the stored visits.
* :func:`plan_season` plans the season with :mod:`monitor.schedule` and stores it in
  ``planned_visit`` inside one transaction; an earlier plan for the same year is replaced only
  when asked.  The crew (teams, members, hours) and each team-day's site, start point, route and times
  are records of their own (``season_plan``, ``season_plan_team``, ``season_plan_team_day``), so the
  field packs can be written later and plans compared between years.
* :func:`write_field_packs` writes, per team-day, the printable field sheet (whose entry table is
  the wide layout the records importer reads), GPX 1.1 waypoints and route, a blank entry sheet
  (CSV), and one iCalendar file with an event per team-day.

Outcomes of planned visits are read from the stored visits at read time
(:func:`monitor.db.queries.planned_visits`); :func:`refresh_outcomes` also writes them into
``planned_visit`` (outcome and visit) and is meant to be called by the records import after it
stores a season's visits.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import shapely
from shapely.geometry import shape

from monitor import columns as C
from monitor import schedule as S
from monitor.db import Session, Store, queries, select
from monitor.db import models as M
from monitor.errors import DataError, DesignError, InputError, InputProblem, LockedError
from monitor.io.crews import read_crews
from monitor.io.sheets import entry_workbook
from monitor.schedule import fieldpack
from monitor.schedule.planner import ARRIVAL, ORDER, TEAM
from monitor.schedule.season import (
    DEFAULT_MINUTES,
    EFFORT,
    FIRST_SEASON,
    MISSED_YEAR,
    OVERDUE_YEARS,
    WINDOW_END,
    WINDOW_START,
)
from monitor.services import relocation
from monitor.services.design import StoredPanels, as_date, default_first_year, fresh_seed
from monitor.settings import programme_settings

#: a start point (car park, base) may lie this far outside the sites and still count as inside the
#: reserve [m] (common practice: parking at the reserve's edge)
START_TOLERANCE_M = 250.0
REASON_DUE = "due"
REASON_OVERDUE = "overdue"


# --- what a season needs from the store ---------------------------------------------------------------------


def _window_for(windows: pd.DataFrame, year: int, species: str | None) -> tuple[str, str] | None:
    rows = windows[windows[C.SPECIES].isna()] if species is None else windows[windows[C.SPECIES] == species]
    if rows.empty:
        return None
    own = rows[rows[C.YEAR].notna() & (rows[C.YEAR] == year)]
    standing = rows[rows[C.YEAR].isna()]
    chosen = own if not own.empty else standing
    if chosen.empty:
        return None
    return str(chosen["start_md"].iloc[0]), str(chosen["end_md"].iloc[0])


def effort_settings(programme: M.Programme) -> S.EffortSettings:
    """Minutes per quadrat by measure and set-up minutes from the programme settings (defaults fill gaps)."""
    settings = programme_settings(programme)
    return S.EffortSettings(setup_min=settings.setup_minutes,
                            minutes_per_measure={**DEFAULT_MINUTES, **settings.minutes_per_quadrat})


@dataclass
class SeasonInputs:
    programme: M.Programme
    year: int
    stations: pd.DataFrame
    panels: StoredPanels
    window: S.SeasonWindow
    species_windows: dict[str, S.SeasonWindow]
    targets: list[tuple[str, str, int | None]]
    effort: S.EffortSettings
    history: pd.DataFrame
    sites: pd.DataFrame


def _parse_window(start: str, end: str, what: str) -> S.SeasonWindow:
    try:
        return S.SeasonWindow.parse(start, end)
    except DesignError as exc:
        raise DesignError(f"{what}: {exc}") from None


def _first_season(established: dt.date | None, window: S.SeasonWindow) -> int | None:
    """The first season a station could be visited: the year it was set out, or the next one when it was
    set out after that year's season window closed."""
    if established is None:
        return None
    return window.first_season_after(established)


def season_inputs(store: Store, programme: M.Programme, year: int,
                  window: tuple[str, str] | None = None) -> SeasonInputs:
    pid = programme.id
    windows = queries.season_windows(store, pid)
    if window is not None:
        season_window = _parse_window(window[0], window[1], "--window")
    else:
        stored = _window_for(windows, year, None)
        if stored is None:
            raise DataError("the programme has no season window; load windows.csv or give --window MM-DD MM-DD")
        season_window = _parse_window(stored[0], stored[1], f"the programme's {year} season window")
    species = queries.species(store, pid)
    species = species[species[C.MEASURE].notna()]
    targets = [(str(r[C.SPECIES]), str(r[C.MEASURE]), None if pd.isna(r["n"]) else int(r["n"]))
               for r in species.to_dict(orient="records")]
    species_windows = {}
    for code in sorted(set(species[C.SPECIES])):
        w = _window_for(windows, year, code)
        if w is not None:
            species_windows[code] = _parse_window(w[0], w[1], f"species {code} season window")
    stations = queries.stations(store, pid)
    stations = stations[stations["state"] == "in_service"].reset_index(drop=True)
    stations[FIRST_SEASON] = pd.array([_first_season(as_date(v), season_window) for v in stations["established"]],
                                      dtype="Int64")
    history = queries.visit_outcomes(store, pid)
    history[C.YEAR] = history[C.YEAR].astype(int)
    return SeasonInputs(programme=programme, year=int(year), stations=stations,
                        panels=StoredPanels.from_frame(queries.panels(store, pid)), window=season_window,
                        species_windows=species_windows, targets=targets, effort=effort_settings(programme),
                        history=history, sites=queries.sites(store, pid))


def _due(inputs: SeasonInputs) -> pd.DataFrame:
    # stations without a panel have no revisit rule: they are due every year
    design = inputs.panels if inputs.panels.panels else None
    frame = inputs.stations.drop(columns=["retired"])
    if design is not None and frame[C.PANEL].isna().any():
        always = frame[C.PANEL].isna()
        due = S.due_stations(frame[~always], inputs.year, design=design, window=inputs.window,
                             targets=[(s, m) for s, m, _ in inputs.targets], effort=inputs.effort,
                             species_windows=inputs.species_windows, history=inputs.history)
        rest = S.due_stations(frame[always], inputs.year, design=None, window=inputs.window,
                              targets=[(s, m) for s, m, _ in inputs.targets], effort=inputs.effort,
                              species_windows=inputs.species_windows, history=inputs.history)
        out = pd.concat([due, rest], ignore_index=True)
        return out.sort_values([OVERDUE_YEARS, C.STATION], ascending=[False, True], kind="stable").reset_index(drop=True)
    return S.due_stations(frame, inputs.year, design=design, window=inputs.window,
                          targets=[(s, m) for s, m, _ in inputs.targets], effort=inputs.effort,
                          species_windows=inputs.species_windows, history=inputs.history)


DUE_COLUMNS = [C.STATION, C.SITE, C.PANEL, "reason", OVERDUE_YEARS, MISSED_YEAR, WINDOW_START, WINDOW_END, EFFORT,
               "team", "day", "route_order", "outcome"]


def due_for_season(db: str | None, year: int, *, window: tuple[str, str] | None = None,
                   programme_code: str | None = None) -> pd.DataFrame:
    """Stations due in ``year`` (panel rule) and overdue ones, most overdue first, with the stored plan's
    team, day and outcome where a plan exists (outcomes read from the stored visits)."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        inputs = season_inputs(store, programme, year, window)
        due = _due(inputs)
        plan = queries.planned_visits(store, programme.id, year)
    finally:
        store.dispose()
    due["reason"] = np.where(due[OVERDUE_YEARS] > 0, REASON_OVERDUE, REASON_DUE)
    plan = plan[[C.STATION, "team", "day", "route_order", "outcome"]].copy()
    plan["day"] = [as_date(v) for v in plan["day"]]
    out = due.merge(plan, on=C.STATION, how="left")
    out["outcome"] = out["outcome"].fillna("not planned")
    out["route_order"] = out["route_order"].astype("Int64")
    return out[DUE_COLUMNS]


# --- crews ------------------------------------------------------------------------------------------------------


def read_crews_file(path: Path) -> dict[str, Any]:
    """The crews file (:func:`monitor.io.crews.read_crews`) with its teams as the planner's teams."""
    crew = read_crews(path)
    return {**crew, "teams": tuple(S.Team(**team) for team in crew["teams"])}


def default_teams(n: int, observers: list[str], *, hours_per_day: float, walking_speed_kmh: float,
                  blocked: tuple[dt.date, ...] = ()) -> tuple[S.Team, ...]:
    """``n`` teams T1..Tn, the observer register dealt out in turn (placeholders when it is empty)."""
    if n < 0:
        raise DesignError("the number of teams cannot be negative")
    teams = []
    for k in range(n):
        code = f"T{k + 1}"
        members = tuple(observers[k::n]) if observers else (f"{code}-1", f"{code}-2")
        teams.append(S.Team(code, members, hours_per_day=hours_per_day, walking_speed_kmh=walking_speed_kmh,
                            blocked_dates=tuple(blocked)))
    return tuple(teams)


# --- planning ----------------------------------------------------------------------------------------------------


@dataclass
class PlanResult:
    """A planned season, stored or not (dry run)."""

    year: int
    plan: S.SeasonPlan
    stored: bool
    replaced: int = 0
    due: pd.DataFrame = field(default_factory=pd.DataFrame)
    already_recorded: list[str] = field(default_factory=list)

    @property
    def fits(self) -> bool:
        return self.plan.fits

    def team_day_table(self) -> pd.DataFrame:
        rows = [{"team": td.team, "date": td.date, "site": td.site, "stations": len(td.stations),
                 "route_km": round(td.route_m / 1000.0, 2), "start": td.start_time.strftime("%H:%M"),
                 "end": td.end_time.strftime("%H:%M"), "members": ";".join(td.members)} for td in self.plan.team_days]
        return pd.DataFrame(rows, columns=["team", "date", "site", "stations", "route_km", "start", "end", "members"])

    def summary(self) -> str:
        text = self.plan.summary()
        if self.already_recorded:
            text += f"; {len(self.already_recorded)} already recorded this season, not planned again"
        return text

    def to_dict(self) -> dict[str, Any]:
        out = self.plan.to_dict()
        out.update({"stored": self.stored, "replaced": self.replaced, "fits": self.fits,
                    "already_recorded": self.already_recorded, "summary": self.summary()})
        return out


def plan_season(
    db: str | None,
    year: int,
    *,
    teams: int | None = None,
    crews_file: Path | None = None,
    hours_per_day: float = 7.0,
    walking_speed_kmh: float = 3.0,
    blocked: tuple[dt.date, ...] = (),
    window: tuple[str, str] | None = None,
    seed: int | None = None,
    randomise_sites: bool = False,
    start_tolerance_m: float = START_TOLERANCE_M,
    replace: bool = False,
    dry_run: bool = False,
    programme_code: str | None = None,
    paths: Path | None = None,
    winding: float | None = None,
) -> PlanResult:
    """Plan season ``year`` and store it in ``planned_visit`` (one transaction).

    Crews come from ``crews_file`` or ``teams`` teams built from the observer register.  Start
    points are the sites' stored base points (a crews file may override them); each must lie
    within ``start_tolerance_m`` of the reserve's sites.  Sites whose access permission lapses
    before a station's window are held back.  An earlier plan of the same year is replaced only
    with ``replace``.  Nothing is written when a request is refused or with ``dry_run``.

    Walking follows the programme's paths when ``paths`` (GeoJSON lines in the programme CRS) is given:
    shortest paths over that network; otherwise straight lines times the winding factor (``winding``, or
    the crews file's ``path_factor``; 1 by default).  The paths are stored with the plan.
    """
    if (teams is None) == (crews_file is None):
        raise InputError(InputProblem("--teams/--crews", None, None, None, "either a number of teams or a crews file"))
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        inputs = season_inputs(store, programme, year, window)
        observers = store.frame("SELECT code FROM observer WHERE programme_id = :p ORDER BY code",
                                p=programme.id)["code"].tolist()
        if crews_file is not None:
            crew = read_crews_file(crews_file)
        else:
            crew = {"teams": default_teams(int(teams), observers, hours_per_day=hours_per_day,
                                           walking_speed_kmh=walking_speed_kmh, blocked=tuple(blocked)),
                    "start_points": {}, "day_start": dt.time(9, 0), "blocked_dates": (), "path_factor": 1.0}
        sites = inputs.sites
        geometries = {r[C.SITE]: shape(json.loads(r["boundary_geojson"]))
                      for r in sites.to_dict(orient="records") if r["boundary_geojson"]}
        starts = {}
        for r in sites.to_dict(orient="records"):
            if r["base_x"] is not None and not pd.isna(r["base_x"]):
                starts[r[C.SITE]] = (float(r["base_x"]), float(r["base_y"]))
            elif r[C.SITE] in geometries:
                p = geometries[r[C.SITE]].representative_point()
                starts[r[C.SITE]] = (p.x, p.y)
        starts.update(crew["start_points"])
        reserve = shapely.union_all(list(geometries.values())).buffer(start_tolerance_m) if geometries else None
        if winding is not None:
            if winding < 1.0:
                raise InputError(InputProblem("--winding", None, None, winding, "a factor of at least 1"))
            crew["path_factor"] = float(winding)
        network, path_record = None, None
        if paths is not None:
            from monitor.io.geojson import read_lines

            network = S.PathNetwork([line for _code, line in read_lines(paths, programme.crs_epsg)])
            path_record = {"file": Path(paths).name, "length_m": network.length, "network": network.to_geojson()}
        crews = S.CrewSettings(teams=crew["teams"], start_points=starts,
                               allow_lone_working=bool(programme.allow_lone_working),
                               blocked_dates=tuple(crew["blocked_dates"]) + tuple(blocked if crews_file else ()),
                               day_start=crew["day_start"], path_factor=crew["path_factor"])
        crews.check(reserve)
        due = _due(inputs)
        # replanning part-way through a season: stations already recorded this season are not sent again
        h = inputs.history
        recorded = set(h.loc[(h[C.YEAR] == int(year)) & h[C.VISIT_STATUS].isin(C.STATUSES_WITH_VALUES), C.STATION])
        already = sorted(set(due[C.STATION]) & recorded)
        due = due[~due[C.STATION].isin(recorded)].reset_index(drop=True)
        if due.empty:
            raise DataError(f"no station is due or overdue in {year}"
                            + (f" that has not been recorded already ({len(already)} recorded)" if already else ""))
        access = {r[C.SITE]: as_date(r["access_until"]) for r in sites.to_dict(orient="records")}
        rng = fresh_seed(seed)
        plan = S.plan_season(due, crews, year=int(year), rng=rng, access_until=access, reserve=reserve,
                             randomise_site_order=randomise_sites, network=network)
        if path_record is not None:
            plan.params["paths"] = path_record
        result = PlanResult(year=int(year), plan=plan, stored=False, due=due, already_recorded=already)
        if dry_run:
            return result
        with store.session() as session:
            result.replaced = _store_plan(session, programme, inputs, plan, due, replace, keep=set(already))
            refresh_outcomes(session, programme.id, [int(year)])
        result.stored = True
        return result
    finally:
        store.dispose()


def _round(session: Session, programme_id: int, year: int, window: S.SeasonWindow) -> M.Round:
    rnd = session.exec(select(M.Round).where(M.Round.programme_id == programme_id, M.Round.year == year)).first()
    if rnd is None:
        start, end = window.dates(year)
        rnd = M.Round(programme_id=programme_id, year=year, window_start=start, window_end=end, status="planned")
        session.add(rnd)
        session.flush()
    return rnd


def _store_plan(session: Session, programme: M.Programme, inputs: SeasonInputs, plan: S.SeasonPlan,
                due: pd.DataFrame, replace: bool, keep: set[str] = frozenset()) -> int:
    """Store the plan; with ``replace`` the earlier plan's rows go, except those of stations in ``keep``
    (already recorded this season, so their planned visit and outcome stay)."""
    pid = programme.id
    rnd = _round(session, pid, plan.year, inputs.window)
    if rnd.status == "certified":
        raise LockedError(f"season {plan.year} is certified (locked); its plan cannot change")
    ids = dict(session.exec(select(M.Station.code, M.Station.id).where(M.Station.programme_id == pid)).all())
    kept_ids = {ids[c] for c in keep if c in ids}
    old = [r for r in session.exec(select(M.PlannedVisit).where(M.PlannedVisit.round_id == rnd.id)).all()
           if r.station_id not in kept_ids]
    if old and not replace:
        raise DesignError(f"a plan for {plan.year} is already stored ({len(old)} stations); "
                          "use --replace to replace it")
    for row in old:
        session.delete(row)
    session.flush()
    overdue = dict(zip(due[C.STATION], due[OVERDUE_YEARS], strict=True))

    def reason(code: str) -> str:
        return REASON_OVERDUE if int(overdue.get(code, 0)) > 0 else REASON_DUE

    rows = []
    for v in plan.visits.to_dict(orient="records"):
        rows.append(M.PlannedVisit(round_id=rnd.id, station_id=ids[v[C.STATION]], team=v[TEAM], day=v[C.DATE],
                                   route_order=int(v[ORDER]), arrival=v[ARRIVAL].strftime("%H:%M"),
                                   reason=reason(v[C.STATION]), outcome="planned", seed=plan.seed))
    for v in plan.held_back.to_dict(orient="records"):
        rows.append(M.PlannedVisit(round_id=rnd.id, station_id=ids[v[C.STATION]], reason=reason(v[C.STATION]),
                                   outcome="held_back", seed=plan.seed))
    # stations that did not fit stay in the plan without a team or day: never dropped silently
    for v in plan.unplanned.to_dict(orient="records"):
        rows.append(M.PlannedVisit(round_id=rnd.id, station_id=ids[v[C.STATION]], reason=reason(v[C.STATION]),
                                   outcome="planned", seed=plan.seed))
    session.add_all(rows)
    _store_plan_record(session, rnd.id, plan)
    session.flush()
    return len(old)


def _store_plan_record(session: Session, round_id: int, plan: S.SeasonPlan) -> None:
    """The plan's crews and team-days as rows of their own (``season_plan``, ``..._team``, ``..._team_day``)."""
    previous = session.exec(select(M.SeasonPlanRecord).where(M.SeasonPlanRecord.round_id == round_id)).first()
    if previous is not None:
        for model in (M.SeasonPlanTeam, M.SeasonPlanTeamDay):
            for row in session.exec(select(model).where(model.plan_id == previous.id)).all():
                session.delete(row)
        session.flush()
        session.delete(previous)
        session.flush()
    crews = plan.params.get("crews") or {}
    details = {"start_points": crews.get("start_points") or {}, "blocked_dates": crews.get("blocked_dates") or [],
               "unplanned": plan.unplanned.to_dict(orient="records")}
    if plan.params.get("paths"):
        details["paths"] = plan.params["paths"]
    record = M.SeasonPlanRecord(
        round_id=round_id, seed=plan.seed, summary=plan.summary(), extra_team_days=plan.extra_team_days,
        randomise_site_order=bool(plan.params.get("randomise_site_order")), site_order=";".join(plan.site_order),
        day_start=_hhmm(crews.get("day_start") or "09:00"), path_factor=float(crews.get("path_factor") or 1.0),
        routing="paths" if plan.params.get("paths") else "straight",
        allow_lone_working=bool(crews.get("allow_lone_working")), details_json=json.dumps(details, sort_keys=True))
    session.add(record)
    session.flush()
    for team in crews.get("teams") or []:
        session.add(M.SeasonPlanTeam(
            plan_id=record.id, code=team["code"], members=";".join(team["members"]),
            hours_per_day=float(team["hours_per_day"]), walking_speed_kmh=float(team["walking_speed_kmh"]),
            working_weekdays=";".join(str(int(d)) for d in team["working_weekdays"]),
            blocked_dates=";".join(team["blocked_dates"])))
    for td in plan.team_days:
        session.add(M.SeasonPlanTeamDay(
            plan_id=record.id, team=td.team, date=td.date, site=td.site, start_x=float(td.start[0]),
            start_y=float(td.start[1]), route_m=float(td.route_m), start_time=td.start_time.strftime("%H:%M"),
            end_time=td.end_time.strftime("%H:%M")))


def _hhmm(text: str) -> str:
    return dt.time.fromisoformat(str(text)).strftime("%H:%M")


def refresh_outcomes(session: Session, programme_id: int, years: list[int] | None = None) -> int:
    """Bring stored planned visits' outcomes up to date from the stored visits of their rounds.

    A planned station with a first visit (repeat 0) in the round takes that visit's status (done,
    partial, missed, inaccessible) and link; one without keeps planned or held_back.  Returns the
    number of planned visits changed.  The records import calls this after storing a season.
    """
    query = select(M.Round).where(M.Round.programme_id == programme_id)
    if years is not None:
        query = query.where(M.Round.year.in_(list(years)))
    changed = 0
    for rnd in session.exec(query).all():
        visits = {v.station_id: v for v in session.exec(select(M.Visit).where(M.Visit.round_id == rnd.id,
                                                                             M.Visit.repeat_no == 0)).all()}
        for pv in session.exec(select(M.PlannedVisit).where(M.PlannedVisit.round_id == rnd.id)).all():
            visit = visits.get(pv.station_id)
            if visit is not None and (pv.outcome != visit.status or pv.visit_id != visit.id):
                pv.outcome, pv.visit_id = visit.status, visit.id
                changed += 1
            elif visit is None and pv.visit_id is not None:
                # the visit it pointed at is gone (a correction): planned again
                pv.outcome, pv.visit_id = "planned", None
                changed += 1
    session.flush()
    return changed


def update_outcomes(db: str | None, years: list[int] | None = None, *, programme_code: str | None = None) -> int:
    """:func:`refresh_outcomes` in its own transaction."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        with store.session() as session:
            return refresh_outcomes(session, programme.id, years)
    finally:
        store.dispose()


def stored_plans(db: str | None, *, programme_code: str | None = None) -> pd.DataFrame:
    """Every stored season plan, one row a season, for comparing years (:func:`queries.season_plans`)."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        frame = queries.season_plans(store, programme.id)
    finally:
        store.dispose()
    frame["route_km"] = frame["route_km"].astype(float).round(2)
    for column in ("first_day", "last_day"):
        frame[column] = [as_date(v) for v in frame[column]]
    return frame


# --- field packs ---------------------------------------------------------------------------------------------------


def stored_plan(store: Store, programme: M.Programme, year: int) -> S.SeasonPlan:
    """Rebuild a stored season plan (team-days with their stations in route order)."""
    rows = queries.planned_visits(store, programme.id, year)
    if rows.empty:
        raise DataError(f"no plan is stored for {year}; run `monitor season plan {year}` first")
    record = queries.season_plan_record(store, programme.id, year)
    if record is None:
        raise DataError(f"the plan for {year} has no stored crew details; plan it again with --replace")
    rows["day"] = [as_date(v) for v in rows["day"]]
    scheduled = rows[rows["team"].notna()].copy()
    scheduled["route_order"] = scheduled["route_order"].astype(int)
    scheduled = scheduled.sort_values(["day", "team", "route_order"], kind="stable")
    visits = pd.DataFrame({
        TEAM: scheduled["team"].to_numpy(), C.DATE: scheduled["day"].to_numpy(), C.SITE: scheduled[C.SITE].to_numpy(),
        ORDER: scheduled["route_order"].to_numpy(), C.STATION: scheduled[C.STATION].to_numpy(),
        C.X: scheduled[C.X].astype(float).to_numpy(), C.Y: scheduled[C.Y].astype(float).to_numpy(),
        ARRIVAL: [dt.time.fromisoformat(a) if a else None for a in scheduled["arrival"]],
    })
    members = {t["code"]: tuple(m for m in str(t["members"]).split(";") if m) for t in record["teams"]}
    team_days = []
    for td in record["team_days"]:
        day = as_date(td["date"])
        here = visits[(visits[TEAM] == td["team"]) & (visits[C.DATE] == day)]
        if here.empty:
            continue
        team_days.append(S.TeamDay(team=td["team"], date=day, site=td["site"], members=members.get(td["team"], ()),
                                   start=(float(td["start_x"]), float(td["start_y"])),
                                   stations=tuple(here[C.STATION]), route_m=float(td["route_m"]),
                                   start_time=dt.time.fromisoformat(td["start_time"]),
                                   end_time=dt.time.fromisoformat(td["end_time"])))
    plan = record["plan"]
    empty = pd.DataFrame(columns=[C.STATION, C.SITE, "reason"])
    return S.SeasonPlan(year=int(year), seed=int(plan["seed"]), visits=visits, team_days=tuple(team_days),
                        held_back=empty, unplanned=empty, extra_team_days=int(plan["extra_team_days"]),
                        site_order=tuple(s for s in str(plan["site_order"]).split(";") if s),
                        params={"crews": {"path_factor": float(plan["path_factor"])}, "routing": plan["routing"]})


#: the offline phone field sheet in each team-day's pack
PHONE_SHEET = "phone_sheet.html"


@dataclass
class PackResult:
    folder: Path
    calendar: Path
    team_days: list[dict[str, Any]]

    def to_dict(self) -> dict[str, Any]:
        return {"folder": str(self.folder), "calendar": str(self.calendar), "team_days": self.team_days}


def _protocol_on(session_rows: pd.DataFrame, day: dt.date) -> str:
    chosen = ""
    for code, since in zip(session_rows["code"], session_rows["effective_from"], strict=True):
        if as_date(since) <= day:
            chosen = str(code)
    return chosen


def write_field_packs(db: str | None, year: int, folder: Path, *, team: str | None = None,
                      day: dt.date | None = None, programme_code: str | None = None,
                      now: dt.datetime | None = None, generalise_sensitive: bool | None = None,
                      pdf: bool = False) -> PackResult:
    """Write a field pack per planned team-day (optionally one team and/or one day) into ``folder``.

    Per team-day ``<date>_<team>_<site>/``: ``field_sheet.html`` (stations in route order with
    relocation notes, quadrat size, the last two visits' values, empty boxes and the safety
    caution), ``entry_sheet.csv`` (the blank wide-layout table to key into) and ``entry_sheet.xlsx`` (the
    same with drop-down lists for status and observers), ``route.gpx`` (GPX 1.1 waypoints and route),
    ``phone_sheet.html`` (the offline sheet for a phone: checks as typed, keeps the work in the browser,
    exports the entry CSV).  In ``folder``: ``season_<year>.ics`` with one event per
    team-day written.

    ``generalise_sensitive`` (default: the programme setting ``field_packs_for_outside_crews``) moves the
    stations where a sensitive species has been recorded to the centre of their grid cell on every sheet,
    route and waypoint, as exports do: for packs handed to people outside the programme.
    """
    now = now or dt.datetime.now(dt.UTC)
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        plan = stored_plan(store, programme, year)
        chosen = [td for td in plan.team_days if (team is None or td.team == team) and (day is None or td.date == day)]
        if not chosen:
            what = " and ".join(x for x in (f"team {team}" if team else "", f"day {day}" if day else "") if x)
            raise DataError(f"the {year} plan has no team-day for {what}")
        stations = queries.stations(store, programme.id)
        visits = queries.visits_with_observers(store, programme.id, before_year=year)
        observations = queries.observations_long(store, programme.id, last_year=year - 1)
        protocols = store.frame("SELECT code, effective_from FROM protocol_version WHERE programme_id = :p "
                                "ORDER BY effective_from", p=programme.id)
        species = queries.species(store, programme.id)
        observer_codes = [str(c) for c in store.frame("SELECT code FROM observer WHERE programme_id = :p ORDER BY code",
                                                       p=programme.id)["code"]]
        lineage_notes = relocation.lineage_notes(store, programme.id)
        site_names = {str(k): str(v) for k, v in queries.sites(store, programme.id).set_index("site")["name"].items()
                      if v is not None and not pd.isna(v)}
        if generalise_sensitive is None:
            generalise_sensitive = programme_settings(programme).field_packs_for_outside_crews
        if generalise_sensitive:  # packs for crews outside the programme: positions as every export gives them
            from monitor.services.exports import generalise_m_of, generalised_positions

            stations = generalised_positions(store, programme.id, stations, generalise_m_of(programme))
    finally:
        store.dispose()
    species = species[species[C.MEASURE].notna()]
    species_names = {str(r[C.SPECIES]): str(r["common_name"]) for r in species.to_dict(orient="records")
                     if r.get("common_name") and not pd.isna(r["common_name"])}
    targets = [(str(r[C.SPECIES]), str(r[C.MEASURE]), None if pd.isna(r["n"]) else int(r["n"]))
               for r in species.to_dict(orient="records")]
    covariates = sorted(programme_settings(programme).covariate_units.items())
    stations = stations.rename(columns={"relocation_notes": fieldpack.RELOCATION})
    # a relocated quadrat's sheet says which station it continues, how far it moved and when
    stations[fieldpack.RELOCATION] = [
        "; ".join(x for x in (lineage_notes.get(c, ""), str(m or ""), str(r or "")) if x and x != "nan")
        for c, m, r in zip(stations[C.STATION], stations["marker"], stations[fieldpack.RELOCATION], strict=True)]
    visits[C.DATE] = [as_date(v) for v in visits[C.DATE]]
    observations[C.DATE] = [as_date(v) for v in observations[C.DATE]]
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for td in chosen:
        out = folder / f"{td.date.isoformat()}_{td.team}_{td.site}"
        out.mkdir(parents=True, exist_ok=True)
        protocol = _protocol_on(protocols, td.date)
        context = fieldpack.field_sheet_context(
            plan, td.team, td.date, stations, crs=programme.crs_epsg, targets=targets, covariates=covariates,
            visits=visits, observations=observations, programme=programme.name, protocol=protocol, generated=now,
            species_names=species_names, site_name=site_names.get(td.site, ""))
        sheet_html = fieldpack.render_field_sheet(context)
        (out / "field_sheet.html").write_text(sheet_html, encoding="utf-8")
        if pdf:
            fieldpack.write_sheet_pdf(sheet_html, out / "field_sheet.pdf")
        entry = fieldpack.field_sheet_frame(context)
        entry.to_csv(out / "entry_sheet.csv", index=False)
        value_columns = [h for h in entry.columns if ":" in h]
        entry_workbook(out / "entry_sheet.xlsx", entry.drop(columns=value_columns), statuses=C.VISIT_STATUSES,
                       observers=observer_codes, value_columns=value_columns,
                       title=f"{programme.name}: {td.site}, team {td.team}, {td.date.isoformat()}")
        (out / PHONE_SHEET).write_text(fieldpack.render_phone_sheet(context, targets, covariates), encoding="utf-8")
        (out / "route.gpx").write_text(fieldpack.team_day_gpx(plan, td.team, td.date, stations,
                                                              crs=programme.crs_epsg), encoding="utf-8")
        written.append({"team": td.team, "date": td.date.isoformat(), "site": td.site, "stations": len(td.stations),
                        "folder": str(out)})
    calendar = folder / f"season_{year}.ics"
    sub = dataclasses.replace(plan, team_days=tuple(chosen))
    calendar.write_text(fieldpack.team_day_calendar(sub, crs=programme.crs_epsg, dtstamp=now,
                                                    programme=programme.code,
                                                    time_zone=programme_settings(programme).time_zone),
                        encoding="utf-8", newline="")
    return PackResult(folder=folder, calendar=calendar, team_days=written)


__all__ = [
    "PackResult",
    "PlanResult",
    "default_first_year",
    "default_teams",
    "due_for_season",
    "effort_settings",
    "plan_season",
    "read_crews_file",
    "refresh_outcomes",
    "stored_plan",
    "stored_plans",
    "update_outcomes",
    "write_field_packs",
]
