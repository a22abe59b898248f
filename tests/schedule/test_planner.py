"""Season planner: windows, working days, access, crews, capacity, and no silent drops."""

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from shapely.geometry import box

from monitor.errors import DesignError
from monitor.schedule import CrewSettings, Team, nearest_neighbour_length, plan_season

# invented reserve with three sites, 1.5 km apart
RESERVE = box(-100, -100, 5000, 1500)
STARTS = {"N": (0.0, 0.0), "M": (2000.0, 0.0), "S": (4000.0, 0.0)}
WS, WE = dt.date(2026, 5, 4), dt.date(2026, 5, 29)  # Monday 4 May to Friday 29 May


def _due(n_per_site=30, seed=0, effort=20.0, ws=WS, we=WE):
    rng = np.random.default_rng(seed)  # invented layout, simulation only
    rows = []
    for site, (x0, y0) in STARTS.items():
        for i in range(n_per_site):
            rows.append({"station": f"{site}{i:03d}", "site": site, "x": x0 + rng.uniform(0, 900),
                         "y": y0 + rng.uniform(0, 900), "window_start": ws, "window_end": we,
                         "effort_min": effort, "overdue_years": 0})
    return pd.DataFrame(rows)


def _crews(n_teams=2, **kw):
    teams = tuple(Team(f"T{k}", (f"p{k}a", f"p{k}b")) for k in range(n_teams))
    return CrewSettings(teams, STARTS, **kw)


def _accounted(plan, due):
    listed = list(plan.visits.station) + list(plan.held_back.station) + list(plan.unplanned.station)
    return sorted(listed) == sorted(due.station)


def test_every_station_accounted_for_exactly_once():
    due = _due()
    plan = plan_season(due, _crews(), year=2026, rng=1)
    assert _accounted(plan, due)
    assert plan.fits and plan.extra_team_days == 0


def test_visits_inside_windows_on_working_days_within_hours():
    blocked = (dt.date(2026, 5, 6),)
    crews = _crews(blocked_dates=blocked)
    due = _due()
    plan = plan_season(due, crews, year=2026, rng=1)
    v = plan.visits
    assert (v.date >= WS).all() and (v.date <= WE).all()
    assert all(d.weekday() < 5 for d in v.date)
    assert dt.date(2026, 5, 6) not in set(v.date)
    for td in plan.team_days:
        minutes = (dt.datetime.combine(td.date, td.end_time) - dt.datetime.combine(td.date, td.start_time))
        assert minutes <= dt.timedelta(hours=7, minutes=1)
    # a team is in one place per day
    assert not plan.visits.groupby(["team", "date"]).site.nunique().gt(1).any()


def test_arrival_times_follow_walking_speed():
    due = _due()
    plan = plan_season(due, _crews(), year=2026, rng=1)
    td = plan.team_days[0]
    first = plan.visits[(plan.visits.team == td.team) & (plan.visits.date == td.date)].iloc[0]
    # 3 km/h = 50 m per minute from the start point (team default)
    walk_min = np.hypot(first.x - td.start[0], first.y - td.start[1]) / 50.0
    expected = dt.datetime.combine(td.date, dt.time(9, 0)) + dt.timedelta(minutes=round(walk_min))
    assert first.arrival == expected.time()
    second = plan.visits[(plan.visits.team == td.team) & (plan.visits.date == td.date)].iloc[1]
    gap = (dt.datetime.combine(td.date, second.arrival) - dt.datetime.combine(td.date, first.arrival))
    assert gap >= dt.timedelta(minutes=20 - 1)  # effort at the first station comes first


def test_access_lapse_holds_back_and_limits_dates():
    due = _due()
    access = {"N": dt.date(2026, 5, 1), "M": dt.date(2026, 5, 12)}
    plan = plan_season(due, _crews(1), year=2026, rng=1, access_until=access)
    assert set(plan.held_back.station) == set(due.station[due.site == "N"])
    assert plan.held_back.reason.str.contains("lapses on 2026-05-01").all()
    assert (plan.visits[plan.visits.site == "M"].date <= dt.date(2026, 5, 12)).all()
    assert _accounted(plan, due)
    assert "access_lapsed" in {d.code for d in plan.diagnostics}


def test_work_that_does_not_fit_says_how_many_more_team_days():
    due = _due(n_per_site=60, effort=45.0, we=dt.date(2026, 5, 8))  # one week, 180 stations
    plan = plan_season(due, _crews(1), year=2026, rng=1)
    assert not plan.fits
    assert _accounted(plan, due)
    assert plan.extra_team_days > 0
    diag = [d for d in plan.diagnostics if d.code == "work_does_not_fit"][0]
    assert f"{len(plan.unplanned)} stations did not fit" in diag.message
    assert f"about {plan.extra_team_days} more team-days" in diag.message
    # the stated number of extra team-days is enough: re-plan the leftovers with that many
    # working days for one team
    rest = due[due.station.isin(plan.unplanned.station)].copy()
    days, d = [], dt.date(2026, 6, 1)
    while len(days) < plan.extra_team_days:
        if d.weekday() < 5:
            days.append(d)
        d += dt.timedelta(days=1)
    rest["window_start"], rest["window_end"] = days[0], days[-1]
    again = plan_season(rest, _crews(1), year=2026, rng=1)
    assert again.fits


def test_station_too_far_for_a_day_is_listed_not_dropped():
    due = _due(n_per_site=3)
    due.loc[0, ["x", "y"]] = (0.0, 12000.0)  # 12 km out: 8 h walking at 3 km/h
    plan = plan_season(due, _crews(), year=2026, rng=1)
    assert due.station[0] in set(plan.unplanned.station)
    assert _accounted(plan, due)


def test_site_order_randomised_reproducibly():
    due = _due(n_per_site=5)
    fixed = plan_season(due, _crews(), year=2026, rng=1)
    assert fixed.site_order == ("M", "N", "S")
    orders = {plan_season(due, _crews(), year=2026, rng=s, randomise_site_order=True).site_order for s in range(12)}
    assert len(orders) > 2
    a = plan_season(due, _crews(), year=2026, rng=np.random.default_rng(5), randomise_site_order=True)
    b = plan_season(due, _crews(), year=2026, rng=a.seed, randomise_site_order=True)
    assert a.site_order == b.site_order and a.visits.equals(b.visits)
    # the first site visited is the first in the (randomised) order
    assert a.visits.sort_values(["date", "team"]).site.iloc[0] == a.site_order[0]


def test_overdue_stations_go_first():
    due = _due(n_per_site=40)
    due.loc[due.station == "S039", "overdue_years"] = 3
    plan = plan_season(due, _crews(1), year=2026, rng=1)
    first_day = plan.visits.date.min()
    assert plan.visits.set_index("station").loc["S039", "date"] == first_day


def test_routes_no_longer_than_nearest_neighbour():
    plan = plan_season(_due(), _crews(), year=2026, rng=1)
    assert plan.total_route_m <= nearest_neighbour_length(plan) + 1e-6


@pytest.mark.parametrize(
    "crews, reserve, message",
    [
        (CrewSettings((), STARTS), None, "no teams"),
        (CrewSettings((Team("T0", ("solo",)),), STARTS), None, "lone working"),
        (CrewSettings((Team("T0", ("a", "b")),), {**STARTS, "N": (-900.0, 0.0)}), RESERVE, "outside the reserve"),
    ],
)
def test_bad_crew_input(crews, reserve, message):
    with pytest.raises(DesignError, match=message):
        plan_season(_due(n_per_site=2), crews, year=2026, rng=1, reserve=reserve)


def test_lone_working_when_allowed_and_missing_start_point():
    crews = CrewSettings((Team("T0", ("solo",)),), STARTS, allow_lone_working=True)
    assert plan_season(_due(n_per_site=2), crews, year=2026, rng=1).fits
    with pytest.raises(DesignError, match="no start point"):
        plan_season(_due(n_per_site=2), CrewSettings((Team("T0", ("a", "b")),), {"N": (0, 0)}), year=2026, rng=1)


def test_to_dict_is_plain():
    import json

    plan = plan_season(_due(n_per_site=3), _crews(), year=2026, rng=1)
    d = plan.to_dict()
    json.dumps(d)
    assert d["seed"] == plan.seed and len(d["visits"]) == len(plan.visits)


def test_access_lapse_mid_window_reason_names_the_date():
    due = _due(n_per_site=60, effort=45.0)
    plan = plan_season(due, _crews(1), year=2026, rng=1, access_until={"M": dt.date(2026, 5, 5)})
    late = plan.unplanned[plan.unplanned.site == "M"]
    assert len(late) > 0 and late.reason.str.contains("lapses on 2026-05-05").all()
    assert _accounted(plan, due)
