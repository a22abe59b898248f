"""Route ordering against exhaustive search (all permutations) on small instances."""

import itertools

import numpy as np
import pytest

from monitor.schedule.routing import held_karp, order_route, route_length

_PERMS: dict[int, np.ndarray] = {}


def _brute_force(points, start):
    # exhaustive search over every visiting order: the definition of the optimum closed tour
    m = len(points)
    if m not in _PERMS:
        _PERMS[m] = np.array(list(itertools.permutations(range(1, m + 1))), dtype=np.int8)
    perms = _PERMS[m]
    nodes = np.vstack([start, points])
    d = np.hypot(nodes[:, None, 0] - nodes[None, :, 0], nodes[:, None, 1] - nodes[None, :, 1])
    total = d[0, perms[:, 0]] + d[perms[:, -1], 0]
    for k in range(m - 1):
        total = total + d[perms[:, k], perms[:, k + 1]]
    return float(total.min())


def _instances(count, lo, hi, seed):
    rng = np.random.default_rng(seed)  # invented station layouts, simulation only
    for _ in range(count):
        m = int(rng.integers(lo, hi + 1))
        yield rng.uniform(0, 1500, (m, 2)), rng.uniform(0, 1500, 2)


def test_exact_route_matches_brute_force():
    for pts, start in _instances(25, 2, 8, 1):
        got = route_length(pts, start, order_route(pts, start, "exact"))
        assert got == pytest.approx(_brute_force(pts, start), rel=1e-12)


def test_nine_stop_instances_exact():
    for pts, start in _instances(3, 9, 9, 2):
        got = route_length(pts, start, order_route(pts, start, "auto"))
        assert got == pytest.approx(_brute_force(pts, start), rel=1e-12)


def test_heuristic_close_to_optimum_and_no_worse_than_nearest_neighbour():
    ratios = []
    for pts, start in _instances(40, 5, 9, 3):
        opt = _brute_force(pts, start)
        heur = route_length(pts, start, order_route(pts, start, "heuristic"))
        nn = route_length(pts, start, order_route(pts, start, "nearest"))
        assert heur <= nn + 1e-9
        ratios.append(heur / opt)
    ratios = np.array(ratios)
    assert ratios.min() >= 1 - 1e-12          # never shorter than the optimum (sanity)
    assert np.mean(ratios < 1 + 1e-9) >= 0.8  # optimal in most small instances
    assert ratios.max() < 1.10


def test_square_route_length_is_perimeter():
    # corners of a 100 m square visited from one corner: the optimum is the perimeter, 400 m
    pts = np.array([[100.0, 0], [0, 100], [100, 100]])
    order = order_route(pts, (0, 0))
    assert route_length(pts, (0, 0), order) == pytest.approx(400.0)


def test_held_karp_trivial_sizes():
    d = np.array([[0.0, 3], [3, 0]])
    assert held_karp(d) == [1]
    assert order_route(np.zeros((0, 2)), (0, 0)) == []
