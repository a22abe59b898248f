r"""Plan a season's round: which team visits which station on which day, in what order.

Rules, in the order they are applied:

1. Teams: every team has at least two members unless the programme allows lone working.
   A team works its working weekdays (Monday-Friday by default) except blocked dates, for
   ``hours_per_day`` including the walk out from the site's start point and back.
2. Access: a site whose permission lapses is only visited up to its last valid day; a
   station whose window opens after that is *held back* and listed.
3. Day by day, each working team takes the site holding the most overdue station, then the
   one whose earliest-closing station window ends soonest (ties: the site order, randomised with ``rng`` when ``randomise_site_order`` so
   that a round cut short is not biased towards the same early sites).  The day's stations
   are chosen by cheapest insertion starting from the most overdue (then most urgent, then
   farthest) station, while walking time plus effort fit the day.
4. The day's stations are ordered as a closed route from the start point
   (:func:`monitor.schedule.routing.order_route`): exact for short days, nearest neighbour
   improved by 2-opt and Or-opt otherwise; arrival times follow from walking speed and
   effort.
5. Stations left when the windows close are listed as *unplanned* with the number of extra
   team-days they need; a station that cannot fit in one day even alone is listed too.
   Every due station ends in exactly one of visits, held_back or unplanned.

Walking time [min] = walking distance [m] / (speed [km/h] x 1000/60), the distance being the shortest
path over the programme's paths where it supplies them (:mod:`monitor.schedule.network`), otherwise
``path_factor`` (the winding factor, at least 1) x the straight-line distance.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import shapely
from shapely.geometry import Point
from shapely.geometry.base import BaseGeometry

from monitor import columns as C
from monitor.design._common import RngLike, derive_rng
from monitor.errors import DesignError, Diagnostic
from monitor.schedule.network import PathNetwork, straight_distances
from monitor.schedule.routing import order_route, route_length, tour_length
from monitor.schedule.season import EFFORT, OVERDUE_YEARS, WINDOW_END, WINDOW_START

TEAM = "team"
ORDER = "order"            # position in the day's route, 1-based
ARRIVAL = "arrival"        # planned arrival time [datetime.time]
DEPARTURE = "departure"    # planned departure time [datetime.time]
WALK_M = "walk_m"          # walked from the previous stop (or the start point) [m]
REASON = "reason"


@dataclass(frozen=True)
class Team:
    """A field team.  ``working_weekdays`` uses Monday = 0."""

    code: str
    members: tuple[str, ...]
    hours_per_day: float = 7.0
    walking_speed_kmh: float = 3.0
    working_weekdays: tuple[int, ...] = (0, 1, 2, 3, 4)
    blocked_dates: tuple[dt.date, ...] = ()

    def works(self, day: dt.date, blocked: frozenset[dt.date] = frozenset()) -> bool:
        return day.weekday() in self.working_weekdays and day not in self.blocked_dates and day not in blocked

    @property
    def day_minutes(self) -> float:
        return 60.0 * self.hours_per_day

    @property
    def metres_per_minute(self) -> float:
        return self.walking_speed_kmh * 1000.0 / 60.0

    def to_dict(self) -> dict[str, Any]:
        return {"code": self.code, "members": list(self.members), "hours_per_day": self.hours_per_day,
                "walking_speed_kmh": self.walking_speed_kmh, "working_weekdays": list(self.working_weekdays),
                "blocked_dates": [d.isoformat() for d in self.blocked_dates]}


@dataclass(frozen=True)
class CrewSettings:
    """Teams, the start point per site [m], and programme-wide working rules."""

    teams: tuple[Team, ...]
    start_points: Mapping[str, tuple[float, float]]
    allow_lone_working: bool = False
    blocked_dates: tuple[dt.date, ...] = ()
    day_start: dt.time = dt.time(9, 0)
    path_factor: float = 1.0

    def check(self, reserve: BaseGeometry | None = None) -> None:
        if not self.teams:
            raise DesignError("no teams: at least one team is needed to plan a season")
        codes = [t.code for t in self.teams]
        if len(set(codes)) != len(codes):
            raise DesignError("team codes must be unique")
        for t in self.teams:
            if len(t.members) == 0:
                raise DesignError(f"team {t.code} has no members")
            if len(t.members) < 2 and not self.allow_lone_working:
                raise DesignError(f"team {t.code} has one member and the programme does not allow lone working")
            if t.hours_per_day <= 0 or t.walking_speed_kmh <= 0:
                raise DesignError(f"team {t.code}: hours per day and walking speed must be positive")
            if not t.working_weekdays:
                raise DesignError(f"team {t.code} has no working weekdays")
        if self.path_factor < 1.0:
            raise DesignError("path factor must be at least 1 (paths are never shorter than straight lines)")
        if reserve is not None:
            for site, (x, y) in self.start_points.items():
                if not reserve.covers(Point(x, y)):
                    raise DesignError(f"start point for site {site} ({x:.0f}, {y:.0f}) is outside the reserve")

    def to_dict(self) -> dict[str, Any]:
        return {"teams": [t.to_dict() for t in self.teams],
                "start_points": {k: [float(v[0]), float(v[1])] for k, v in self.start_points.items()},
                "allow_lone_working": self.allow_lone_working,
                "blocked_dates": [d.isoformat() for d in self.blocked_dates],
                "day_start": self.day_start.isoformat(), "path_factor": self.path_factor}


@dataclass(frozen=True)
class TeamDay:
    """One team's day at one site: stations in route order."""

    team: str
    date: dt.date
    site: str
    members: tuple[str, ...]
    start: tuple[float, float]
    stations: tuple[str, ...]
    route_m: float
    start_time: dt.time
    end_time: dt.time

    def to_dict(self) -> dict[str, Any]:
        return {"team": self.team, "date": self.date.isoformat(), "site": self.site,
                "members": list(self.members), "start": [self.start[0], self.start[1]],
                "stations": list(self.stations), "route_m": self.route_m,
                "start_time": self.start_time.isoformat(), "end_time": self.end_time.isoformat()}


@dataclass(frozen=True)
class SeasonPlan:
    """A season's plan.  ``visits`` has one row per planned visit in route order."""

    year: int
    seed: int
    visits: pd.DataFrame
    team_days: tuple[TeamDay, ...]
    held_back: pd.DataFrame
    unplanned: pd.DataFrame
    extra_team_days: int
    site_order: tuple[str, ...]
    diagnostics: tuple[Diagnostic, ...] = ()
    params: dict[str, Any] = field(default_factory=dict)

    @property
    def total_route_m(self) -> float:
        return float(sum(td.route_m for td in self.team_days))

    @property
    def fits(self) -> bool:
        return self.unplanned.empty

    def team_day(self, team: str, date: dt.date) -> TeamDay:
        for td in self.team_days:
            if td.team == team and td.date == date:
                return td
        raise DesignError(f"team {team} has no planned day on {date.isoformat()}")

    def summary(self) -> str:
        parts = [f"{len(self.visits)} visits planned in {len(self.team_days)} team-days"]
        if not self.held_back.empty:
            parts.append(f"{len(self.held_back)} held back (access)")
        if not self.unplanned.empty:
            parts.append(f"{len(self.unplanned)} do not fit: about {self.extra_team_days} more team-days needed")
        return "; ".join(parts)

    def to_dict(self) -> dict[str, Any]:
        def rows(df: pd.DataFrame) -> list[dict[str, Any]]:
            recs = df.to_dict(orient="records")
            for r in recs:
                for k, v in list(r.items()):
                    if isinstance(v, dt.date | dt.time):
                        r[k] = v.isoformat()
                    elif isinstance(v, np.integer):
                        r[k] = int(v)
                    elif isinstance(v, np.floating):
                        r[k] = float(v)
                    elif v is pd.NA:
                        r[k] = None
            return recs
        return {"year": self.year, "seed": self.seed, "summary": self.summary(),
                "site_order": list(self.site_order), "total_route_m": self.total_route_m,
                "extra_team_days": self.extra_team_days,
                "team_days": [td.to_dict() for td in self.team_days],
                "visits": rows(self.visits), "held_back": rows(self.held_back),
                "unplanned": rows(self.unplanned),
                "diagnostics": [d.__dict__ for d in self.diagnostics], "params": self.params}


def _add_minutes(t: dt.time, minutes: float) -> dt.time:
    """``t`` plus ``minutes``, to the nearest minute (capped at 23:59)."""
    base = dt.datetime.combine(dt.date(2000, 1, 1), t) + dt.timedelta(minutes=round(minutes))
    return base.time() if base.date() == dt.date(2000, 1, 1) else dt.time(23, 59)


class _Pool:
    """Pending stations with array views for fast day building.

    Walking distances come from one matrix per site over its start point (row 0) and its due
    stations (``local`` index 1..m): straight lines times the winding factor, or shortest paths over
    the programme's path network.
    """

    def __init__(self, due: pd.DataFrame, starts: Mapping[str, np.ndarray], pf: float,
                 network: PathNetwork | None = None):
        self.due = due
        self.x = due[C.X].to_numpy(float)
        self.y = due[C.Y].to_numpy(float)
        self.effort = due[EFFORT].to_numpy(float)
        self.overdue = due[OVERDUE_YEARS].to_numpy(int)
        self.site = due[C.SITE].astype(str).to_numpy()
        self.pf = pf
        self.ws = np.array([d.toordinal() for d in due[WINDOW_START]])
        self.we = np.array([d.toordinal() for d in due[WINDOW_END]])
        self.pending = np.ones(len(due), dtype=bool)
        self.local = np.zeros(len(due), dtype=int)
        self.matrix: dict[str, np.ndarray] = {}
        for site in np.unique(self.site):
            idx = np.flatnonzero(self.site == site)
            self.local[idx] = np.arange(1, idx.size + 1)
            pts = np.vstack([np.asarray(starts[site], float)[None, :], np.column_stack([self.x[idx], self.y[idx]])])
            if network is None:
                self.matrix[str(site)] = straight_distances(pts, pf)
            else:
                try:
                    self.matrix[str(site)] = network.distances(pts)
                except DesignError:
                    raise DesignError(f"site {site}: the start point and stations do not all reach one another "
                                      "over the paths given") from None
        self.out_m = np.array([self.matrix[str(s)][0, k] for s, k in zip(self.site, self.local, strict=True)])

    def walk(self, site: str, a: int, b: int) -> float:
        """Walking distance [m] between local nodes ``a`` and ``b`` of ``site`` (0 = the start point)."""
        return float(self.matrix[str(site)][a, b])


def _build_day(pool: _Pool, cand: np.ndarray, start: np.ndarray, capacity: float,
               m_per_min: float, ignore_priority: bool = False) -> list[int]:
    """Choose stations from ``cand`` (indices, one site) by cheapest insertion within ``capacity`` minutes."""
    if cand.size == 0:
        return []
    dist = pool.matrix[str(pool.site[cand[0]])]
    # seed: most overdue, then earliest window end, then farthest from the start point
    if ignore_priority:
        key = np.lexsort((-pool.out_m[cand],))
    else:
        key = np.lexsort((-pool.out_m[cand], pool.we[cand], -pool.overdue[cand]))
    seed = None
    for k in key:
        i = int(cand[k])
        if 2 * pool.out_m[i] / m_per_min + pool.effort[i] <= capacity:
            seed = i
            break
    if seed is None:
        return []
    route = [seed]
    nodes = [0, int(pool.local[seed]), 0]
    used = 2 * pool.out_m[seed] / m_per_min + pool.effort[seed]
    left = cand[cand != seed]
    while left.size:
        at = np.asarray(nodes)
        seg = dist[at[:-1], at[1:]]  # len(route)+1 legs
        near = dist[pool.local[left]]
        dx_in = near[:, at[:-1]]
        dx_out = near[:, at[1:]]
        delta = (dx_in + dx_out - seg[None, :]) / m_per_min  # extra walking minutes
        pos = np.argmin(delta, axis=1)
        best = delta[np.arange(left.size), pos]
        total = best + pool.effort[left]
        ok = used + total <= capacity + 1e-9
        if not ok.any():
            break
        # overdue stations first, then the cheapest insertion
        score = np.where(ok, best, np.inf)
        if not ignore_priority:
            score = np.where(ok & (pool.overdue[left] > 0), best - 1e6, score)
        k = int(np.argmin(score))
        i = int(left[k])
        p = int(pos[k])
        route.insert(p, i)
        nodes.insert(p + 1, int(pool.local[i]))
        used += float(total[k])
        left = np.delete(left, k)
    return route


def _sub_matrix(pool: _Pool, stops: list[int]) -> np.ndarray:
    """Distances over the start point (0) and ``stops`` (1..k), from the site's matrix."""
    nodes = np.concatenate([[0], pool.local[stops]])
    return pool.matrix[str(pool.site[stops[0]])][np.ix_(nodes, nodes)]


def _sequence(pool: _Pool, stops: list[int], start: np.ndarray, route_method: str) -> list[int]:
    pts = np.column_stack([pool.x[stops], pool.y[stops]])
    order = order_route(pts, start, route_method, dist=_sub_matrix(pool, stops))
    return [stops[k] for k in order]


def _team_days_needed(pool: _Pool, idx: np.ndarray, starts: Mapping[str, np.ndarray], capacity: float,
                      m_per_min: float, route_method: str) -> int:
    """Team-days to visit ``idx`` ignoring windows (used to say how much more is needed)."""
    remaining = set(int(i) for i in idx)
    days = 0
    while remaining:
        arr = np.array(sorted(remaining))
        site = pool.site[arr[0]]
        cand = arr[pool.site[arr] == site]
        chosen = _build_day(pool, cand, starts[site], capacity, m_per_min, ignore_priority=True)
        if not chosen:
            break
        remaining -= set(chosen)
        days += 1
    return days


def plan_season(
    due: pd.DataFrame,
    crews: CrewSettings,
    *,
    year: int,
    rng: RngLike,
    access_until: Mapping[str, dt.date | None] | None = None,
    reserve: BaseGeometry | None = None,
    randomise_site_order: bool = False,
    route_method: str = "auto",
    network: PathNetwork | None = None,
) -> SeasonPlan:
    """Assign due stations to teams and days inside their windows and order each day's route.

    Parameters
    ----------
    due : DataFrame
        From :func:`monitor.schedule.due_stations`: station, site, x, y [m], window_start,
        window_end, effort_min, overdue_years.
    crews : CrewSettings
    year : int
    rng : numpy.random.Generator or int
        Used only to randomise the site order; the plan stores its seed.
    access_until : mapping site -> last date access is permitted (None = no limit)
    reserve : polygon, optional
        Reserve boundary; every start point must lie inside it.
    randomise_site_order : bool
        Visit sites in a random order across the window (seeded).
    route_method : {"auto", "exact", "heuristic", "nearest"}
        See :func:`monitor.schedule.routing.order_route`.
    network : PathNetwork, optional
        The programme's paths: walking distances are shortest paths over them
        (:mod:`monitor.schedule.network`); without, straight lines times ``crews.path_factor``.

    Returns
    -------
    SeasonPlan
        visits (team, date, site, order, station, x, y, arrival, departure, walk_m,
        effort_min, overdue_years, window_start, window_end), team_days, held_back and
        unplanned (station, site, reason), extra_team_days, diagnostics.

    Notes
    -----
    Greedy day-by-day assignment with cheapest insertion (Rosenkrantz, Stearns & Lewis
    1977) and route improvement; not an optimal vehicle-routing solution.

    References
    ----------
    Rosenkrantz, D. J., Stearns, R. E. and Lewis, P. M. (1977). An analysis of several
    heuristics for the traveling salesman problem. SIAM Journal on Computing 6:563-581.
    """
    crews.check(reserve)
    if reserve is not None:
        reserve = shapely.make_valid(reserve) if not reserve.is_valid else reserve
    seed, gen = derive_rng(rng)
    due = _checked_due(due)
    sites = sorted(set(due[C.SITE].astype(str)))
    lacking = [s for s in sites if s not in crews.start_points]
    if lacking:
        raise DesignError(f"no start point given for site {lacking[0]}")
    site_order = list(sites)
    if randomise_site_order:
        site_order = [site_order[i] for i in gen.permutation(len(site_order))]
    starts = {s: np.asarray(crews.start_points[s], float) for s in sites}
    pool = _Pool(due, starts, crews.path_factor, network)
    access_until = access_until or {}
    held, cut = _hold_back_for_access(pool, access_until)
    unplanned = _too_long_for_a_day(pool, crews)
    records, team_days = _assign_days(pool, due, crews, starts, {s: i for i, s in enumerate(site_order)},
                                      route_method)
    extra, late, diags = _left_over(pool, crews, starts, cut, route_method)
    unplanned += late
    diags += _hold_back_diagnostics(held, unplanned)

    def listing(items: list[tuple[int, str]]) -> pd.DataFrame:
        return pd.DataFrame({C.STATION: [due[C.STATION].iloc[i] for i, _ in items],
                             C.SITE: [pool.site[i] for i, _ in items],
                             REASON: [r for _, r in items]}, columns=[C.STATION, C.SITE, REASON])

    return SeasonPlan(year=int(year), seed=seed, visits=pd.DataFrame(records, columns=VISIT_COLUMNS),
                      team_days=tuple(team_days),
                      held_back=listing(held), unplanned=listing(unplanned), extra_team_days=int(extra),
                      site_order=tuple(site_order), diagnostics=tuple(diags),
                      params={"randomise_site_order": randomise_site_order, "route_method": route_method,
                              "crews": crews.to_dict(),
                              "routing": "paths" if network is not None else "straight",
                              "access_until": {k: (v.isoformat() if v else None) for k, v in access_until.items()}})


#: the columns of a plan's visits, in order
VISIT_COLUMNS = [TEAM, C.DATE, C.SITE, ORDER, C.STATION, C.X, C.Y, ARRIVAL, DEPARTURE, WALK_M, EFFORT,
                 OVERDUE_YEARS, WINDOW_START, WINDOW_END]


def _checked_due(due: pd.DataFrame) -> pd.DataFrame:
    """The due-station table with its columns checked, a fresh index and overdue years (0 when absent)."""
    for col in (C.STATION, C.SITE, C.X, C.Y, WINDOW_START, WINDOW_END, EFFORT):
        if col not in due.columns:
            raise DesignError(f"due-station table lacks column {col!r}")
    due = due.reset_index(drop=True).copy()
    if OVERDUE_YEARS not in due.columns:
        due[OVERDUE_YEARS] = 0
    if due[C.STATION].duplicated().any():
        raise DesignError(f"station {due[C.STATION][due[C.STATION].duplicated()].iloc[0]} is listed twice")
    return due


def _hold_back_for_access(pool: _Pool, access_until: Mapping[str, dt.date | None]
                          ) -> tuple[list[tuple[int, str]], dict[int, dt.date]]:
    """Stations whose site's access permission lapses before their window opens are held back; a window
    that outlasts the permission is cut short at its last day (returned by station, for the reason given
    if the station then does not fit)."""
    held: list[tuple[int, str]] = []
    cut: dict[int, dt.date] = {}
    for i in range(len(pool.site)):
        last = access_until.get(pool.site[i])
        if last is None:
            continue
        last_ord = last.toordinal()
        if last_ord < pool.ws[i]:
            held.append((i, f"access permission for site {pool.site[i]} lapses on {last.isoformat()}, "
                            f"before the window opens"))
            pool.pending[i] = False
            continue
        if last_ord < pool.we[i]:
            pool.we[i] = last_ord
            cut[i] = last
    return held, cut


def _too_long_for_a_day(pool: _Pool, crews: CrewSettings) -> list[tuple[int, str]]:
    """Stations that even the fastest team with the longest day cannot walk out to, record and leave."""
    max_cap = max(t.day_minutes for t in crews.teams)
    best_speed = max(t.metres_per_minute for t in crews.teams)
    out = []
    for i in np.flatnonzero(pool.pending):
        if 2 * pool.out_m[i] / best_speed + pool.effort[i] > max_cap:
            out.append((int(i), "walk out and back plus effort exceed one working day"))
            pool.pending[i] = False
    return out


def _assign_days(pool: _Pool, due: pd.DataFrame, crews: CrewSettings, starts: Mapping[str, np.ndarray],
                 rank: Mapping[str, int], route_method: str) -> tuple[list[dict[str, Any]], list[TeamDay]]:
    """Day by day through the season, each working team takes one site's day of work: the visits and the
    team-days."""
    blocked = frozenset(crews.blocked_dates)
    records: list[dict[str, Any]] = []
    team_days: list[TeamDay] = []
    if not pool.pending.any():
        return records, team_days
    first = int(pool.ws[pool.pending].min())
    last = int(pool.we[pool.pending].max())
    for day_ord in range(first, last + 1):
        day = dt.date.fromordinal(day_ord)
        for team in crews.teams:
            if not team.works(day, blocked):
                continue
            open_ = pool.pending & (pool.ws <= day_ord) & (pool.we >= day_ord)
            if not open_.any():
                break
            chosen = _day_of_work(pool, np.flatnonzero(open_), starts, rank, team)
            if not chosen:
                continue
            site = pool.site[chosen[0]]
            ordered = _sequence(pool, chosen, starts[site], route_method)
            pool.pending[ordered] = False
            team_days.append(_walk_the_day(pool, due, crews, team, day, site, starts[site], ordered, records))
    return records, team_days


def _day_of_work(pool: _Pool, idx: np.ndarray, starts: Mapping[str, np.ndarray], rank: Mapping[str, int],
                 team) -> list[int]:
    """The stations a team records in a day: the site holding the most overdue station, then the
    earliest-closing window, then the site order; the first site that gives a day of work."""
    site_keys: dict[str, tuple[int, int, int]] = {}
    for s in np.unique(pool.site[idx]):
        here = idx[pool.site[idx] == s]
        site_keys[str(s)] = (-int(pool.overdue[here].max()), int(pool.we[here].min()), rank[str(s)])
    for site in sorted(site_keys, key=site_keys.get):
        cand = idx[pool.site[idx] == site]
        chosen = _build_day(pool, cand, starts[site], team.day_minutes, team.metres_per_minute)
        if chosen:
            return chosen
    return []


def _walk_the_day(pool: _Pool, due: pd.DataFrame, crews: CrewSettings, team, day: dt.date, site: str,
                  start: np.ndarray, ordered: list[int], records: list[dict[str, Any]]) -> TeamDay:
    """Walk a team-day's route in order: one visit record per station (arrival, departure, walk) appended
    to ``records``, and the team-day with its route length and finishing time."""
    clock = 0.0
    prev = 0
    for k, i in enumerate(ordered, start=1):
        walk = pool.walk(site, prev, int(pool.local[i]))
        clock += walk / team.metres_per_minute
        arrival = _add_minutes(crews.day_start, clock)
        clock += pool.effort[i]
        records.append({TEAM: team.code, C.DATE: day, C.SITE: site, ORDER: k,
                        C.STATION: due[C.STATION].iloc[i], C.X: pool.x[i], C.Y: pool.y[i],
                        ARRIVAL: arrival, DEPARTURE: _add_minutes(crews.day_start, clock),
                        WALK_M: walk, EFFORT: pool.effort[i], OVERDUE_YEARS: int(pool.overdue[i]),
                        WINDOW_START: due[WINDOW_START].iloc[i], WINDOW_END: due[WINDOW_END].iloc[i]})
        prev = int(pool.local[i])
    back = pool.walk(site, prev, 0)
    clock += back / team.metres_per_minute
    return TeamDay(team.code, day, site, tuple(team.members), (float(start[0]), float(start[1])),
                   tuple(due[C.STATION].iloc[ordered]),
                   tour_length(list(range(1, len(ordered) + 1)), _sub_matrix(pool, ordered)),
                   crews.day_start, _add_minutes(crews.day_start, clock))


def _left_over(pool: _Pool, crews: CrewSettings, starts: Mapping[str, np.ndarray], cut: Mapping[int, dt.date],
               route_method: str) -> tuple[int, list[tuple[int, str]], list[Diagnostic]]:
    """Stations that did not fit: the team-days more that would be needed, each station with its reason,
    and the diagnostic saying so."""
    left = np.flatnonzero(pool.pending)
    if not left.size:
        return 0, [], []
    team0 = max(crews.teams, key=lambda t: t.day_minutes)
    extra = _team_days_needed(pool, left, starts, team0.day_minutes, team0.metres_per_minute, route_method)
    unplanned = []
    for i in left:
        if int(i) in cut:
            unplanned.append((int(i), f"did not fit before access permission for site {pool.site[i]} "
                                      f"lapses on {cut[int(i)].isoformat()}"))
        else:
            unplanned.append((int(i), "did not fit in the season window"))
    diag = Diagnostic(
        "work_does_not_fit",
        f"{left.size} station{'s' if left.size != 1 else ''} did not fit in the season window: "
        f"about {extra} more team-day{'s' if extra != 1 else ''} are needed")
    return extra, unplanned, [diag]


def _hold_back_diagnostics(held: list[tuple[int, str]], unplanned: list[tuple[int, str]]) -> list[Diagnostic]:
    diags = []
    if held:
        diags.append(Diagnostic("access_lapsed", f"{len(held)} station{'s' if len(held) != 1 else ''} held back "
                                                  "because access permission lapses before the window"))
    n_too_long = sum(1 for _, r in unplanned if r.startswith("walk out"))
    if n_too_long:
        diags.append(Diagnostic("too_long_for_a_day", f"{n_too_long} station(s) cannot be reached and recorded "
                                                       "within one working day"))
    return diags


def nearest_neighbour_length(plan: SeasonPlan) -> float:
    """Total route length [m] had each team-day's stations been walked in nearest-neighbour order."""
    xy = plan.visits.set_index(C.STATION)[[C.X, C.Y]]
    pf = float(plan.params.get("crews", {}).get("path_factor", 1.0))
    total = 0.0
    for td in plan.team_days:
        pts = xy.loc[list(td.stations)].to_numpy()
        order = order_route(pts, td.start, "nearest")
        total += route_length(pts, td.start, order) * pf
    return total

