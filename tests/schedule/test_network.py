"""Routes over the programme's paths: shortest paths on the path network (scipy.sparse.csgraph)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from shapely.geometry import LineString, Point
from shapely.ops import substring

from monitor import columns as C
from monitor.errors import DesignError
from monitor.schedule import CrewSettings, Team, plan_season
from monitor.schedule.network import PathNetwork, straight_distances
from monitor.schedule.routing import held_karp, tour_length
from monitor.schedule.season import EFFORT, OVERDUE_YEARS, WINDOW_END, WINDOW_START

# an invented river along y = 50 with a path on each bank and one footbridge at x = 150
SOUTH = LineString([(0, 40), (200, 40)])
NORTH = LineString([(0, 60), (200, 60)])
BRIDGE = LineString([(150, 40), (150, 60)])
START = (60.0, 30.0)
# A and C on the south bank, B and D facing them on the north bank
STATIONS = np.array([[20.0, 35.0], [20.0, 65.0], [100.0, 35.0], [100.0, 65.0]])


def test_path_length_matches_shapely_geometry():
    # a winding path: the walk between two points on it is the length of the path between them
    line = LineString([(0, 0), (30, 40), (60, 0), (100, 30), (140, 10)])
    net = PathNetwork([line])
    a, b = line.interpolate(12.5), line.interpolate(161.0)
    d = net.distances(np.array([[a.x, a.y], [b.x, b.y]]))
    # shapely 2 substring between the two positions along the line
    assert d[0, 1] == pytest.approx(substring(line, 12.5, 161.0).length, abs=1e-6)
    assert net.length == pytest.approx(line.length)
    # a station 3 m off the path walks 3 m to it first
    off = Point(a.x, a.y).buffer(3).exterior.interpolate(0)
    d2 = net.distances(np.array([[off.x, off.y], [b.x, b.y]]))
    assert d2[0, 1] == pytest.approx(line.distance(off) + abs(line.project(off) - 161.0), abs=1e-6)


def test_river_with_one_bridge_is_crossed_at_the_bridge():
    net = PathNetwork([SOUTH, NORTH, BRIDGE])
    d = net.distances(STATIONS[:2])
    # A (20, 35) to B (20, 65): 5 m to the south path, 130 m east, 20 m over the bridge, 130 m back west, 5 m
    assert d[0, 1] == pytest.approx(290.0)
    assert straight_distances(STATIONS[:2])[0, 1] == pytest.approx(30.0)


RIVER = LineString([(-10, 50), (210, 50)])


def test_the_bridge_changes_the_route():
    pts = np.vstack([START, STATIONS])
    net = PathNetwork([SOUTH, NORTH, BRIDGE])
    straight = held_karp(straight_distances(pts))
    over_paths = held_karp(net.distances(pts))
    # with straight lines the best round wades the river: some leg crosses it away from the bridge
    stops = [tuple(pts[0]), *[tuple(pts[k]) for k in straight], tuple(pts[0])]
    crossings = [LineString([a, b]).intersection(RIVER) for a, b in zip(stops[:-1], stops[1:], strict=True)]
    assert any(not c.is_empty and abs(c.x - 150.0) > 1 for c in crossings)
    # over the paths every crossing of the river is on the bridge (x = 150), and the round is longer
    stops = [tuple(pts[0]), *[tuple(pts[k]) for k in over_paths], tuple(pts[0])]
    walks = [net.walk_line(a, b) for a, b in zip(stops[:-1], stops[1:], strict=True)]
    crossed = [w.intersection(RIVER) for w in walks]
    assert sum(not c.is_empty for c in crossed) == 2  # out over the bridge and back
    assert all(c.is_empty or abs(c.x - 150.0) < 1e-9 for c in crossed)
    # each leg's walked line is as long as the network distance (shapely length of the walked geometry)
    d = net.distances(pts)
    nodes = [0, *over_paths, 0]
    assert [w.length for w in walks] == pytest.approx([d[a, b] for a, b in zip(nodes[:-1], nodes[1:], strict=True)])
    # hand count: start (60, 30) is 10 m off the south path; every round crosses twice at the bridge: 620 m
    assert tour_length(over_paths, d) == pytest.approx(620.0)
    assert tour_length(straight, straight_distances(pts)) < 250.0


def _due():
    return pd.DataFrame({C.STATION: ["A", "B", "C", "D"], C.SITE: "R", C.X: STATIONS[:, 0], C.Y: STATIONS[:, 1],
                         WINDOW_START: dt.date(2027, 6, 1), WINDOW_END: dt.date(2027, 6, 30), EFFORT: 10.0,
                         OVERDUE_YEARS: 0})


def test_planner_walks_the_paths():
    crews = CrewSettings((Team("T1", ("a", "b"), hours_per_day=7.0, walking_speed_kmh=3.0),), {"R": START})
    net = PathNetwork([SOUTH, NORTH, BRIDGE])
    straight = plan_season(_due(), crews, year=2027, rng=1)
    paths = plan_season(_due(), crews, year=2027, rng=1, network=net)
    (td_s,), (td_p,) = straight.team_days, paths.team_days
    pts = np.vstack([START, STATIONS])
    best = held_karp(net.distances(pts))
    # the day's route is the shortest closed walk over the paths (Held-Karp on the network distances)
    assert td_p.route_m == pytest.approx(tour_length(best, net.distances(pts)))
    assert td_p.route_m > td_s.route_m
    assert paths.params["routing"] == "paths" and straight.params["routing"] == "straight"
    # walking legs add up to the route, and times follow them (3 km/h = 50 m a minute)
    assert paths.visits["walk_m"].sum() < td_p.route_m
    first = paths.visits.iloc[0]
    assert first["arrival"] == dt.time(9, round(first["walk_m"] / 50.0))


def test_winding_factor_scales_straight_lines_and_disconnected_paths_refused():
    crews = CrewSettings((Team("T1", ("a", "b")),), {"R": START}, path_factor=1.3)
    plain = CrewSettings((Team("T1", ("a", "b")),), {"R": START})
    wound = plan_season(_due(), crews, year=2027, rng=1).team_days[0].route_m
    assert wound == pytest.approx(1.3 * plan_season(_due(), plain, year=2027, rng=1).team_days[0].route_m)
    with pytest.raises(DesignError, match="do not all reach"):
        plan_season(_due(), plain, year=2027, rng=1, network=PathNetwork([SOUTH, NORTH]))
    with pytest.raises(DesignError, match="winding factor"):
        straight_distances(STATIONS, 0.8)
