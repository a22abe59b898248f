r"""Ordering a day's stations as a walking route that starts and ends at the base.

A day's route is a closed tour :math:`0 \to s_1 \to \dots \to s_m \to 0` from the start
point (car park, base) through the stations and back, of length
:math:`L = \sum_i d(s_i, s_{i+1})` with straight-line distances in metres.

* :func:`nearest_neighbour`: always walk to the closest unvisited station.
* :func:`two_opt`: reverse any stretch of the tour while that shortens it
  (Croes 1958); :func:`or_opt` moves runs of 1-3 stations elsewhere, either way round
  (Or 1976).  Alternated until neither helps: a local optimum.
* :func:`held_karp`: the exact optimum by dynamic programming over subsets
  (Held & Karp 1962), :math:`O(2^m m^2)`, used for short days.

References
----------
Croes, G. A. (1958). A method for solving traveling-salesman problems. Operations Research
6:791-812.
Or, I. (1976). Traveling salesman-type combinatorial problems and their relation to the
logistics of regional blood banking. PhD thesis, Northwestern University.
Held, M. and Karp, R. M. (1962). A dynamic programming approach to sequencing problems.
Journal of the Society for Industrial and Applied Mathematics 10:196-210.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

#: up to this many stops a route is solved exactly by default
EXACT_MAX_STOPS = 9


def distance_matrix(points: np.ndarray) -> np.ndarray:
    """Euclidean distances between rows of ``points`` (n x 2) [m]."""
    p = np.asarray(points, dtype=float)
    return np.hypot(p[:, None, 0] - p[None, :, 0], p[:, None, 1] - p[None, :, 1])


def tour_length(tour: Sequence[int], dist: np.ndarray) -> float:
    """Length of the closed tour 0 -> tour... -> 0 (node 0 is the start point)."""
    path = [0, *tour, 0]
    return float(sum(dist[a, b] for a, b in zip(path[:-1], path[1:], strict=True)))


def nearest_neighbour(dist: np.ndarray) -> list[int]:
    """Visit order of nodes 1..n-1 by nearest neighbour from node 0."""
    n = dist.shape[0]
    left = set(range(1, n))
    tour: list[int] = []
    cur = 0
    while left:
        cand = np.fromiter(left, dtype=int)
        nxt = int(cand[np.argmin(dist[cur, cand])])
        tour.append(nxt)
        left.remove(nxt)
        cur = nxt
    return tour


def two_opt(tour: Sequence[int], dist: np.ndarray) -> list[int]:
    """Improve a closed tour from node 0 by segment reversal until no reversal shortens it."""
    t = [0, *tour, 0]
    m = len(t)
    improved = True
    while improved:
        improved = False
        for i in range(1, m - 2):
            a, b = t[i - 1], t[i]
            dab = dist[a, b]
            # vectorised over j: gain of reversing t[i..j]
            js = np.arange(i + 1, m - 1)
            c = np.asarray(t)[js]
            d = np.asarray(t)[js + 1]
            delta = dist[a, c] + dist[b, d] - dab - dist[c, d]
            k = int(np.argmin(delta))
            if delta[k] < -1e-9:
                j = int(js[k])
                t[i:j + 1] = t[i:j + 1][::-1]
                improved = True
    return t[1:-1]


def or_opt(tour: Sequence[int], dist: np.ndarray, max_run: int = 3) -> list[int]:
    """Move runs of 1..``max_run`` consecutive stops (either direction) while it shortens the tour."""
    t = list(tour)
    improved = True
    while improved:
        improved = False
        for run in range(1, max_run + 1):
            for i in range(len(t) - run + 1):
                seg = t[i:i + run]
                rest = t[:i] + t[i + run:]
                path = [0, *t, 0]
                prev, nxt = path[i], path[i + run + 1]
                removed_gain = dist[prev, seg[0]] + dist[seg[-1], nxt] - dist[prev, nxt]
                rp = [0, *rest, 0]
                best = (-1e-9, None, None)
                for pos in range(len(rp) - 1):
                    u, v = rp[pos], rp[pos + 1]
                    for s in (seg, seg[::-1]):
                        add = dist[u, s[0]] + dist[s[-1], v] - dist[u, v]
                        delta = add - removed_gain
                        if delta < best[0]:
                            best = (delta, pos, s)
                if best[1] is not None:
                    pos, s = best[1], best[2]
                    t = rest[:pos] + list(s) + rest[pos:]
                    improved = True
                    break
            if improved:
                break
    return t


def held_karp(dist: np.ndarray) -> list[int]:
    """Exact shortest closed tour from node 0 through all other nodes (Held & Karp 1962)."""
    n = dist.shape[0] - 1
    if n <= 1:
        return list(range(1, n + 1))
    d = dist[1:, 1:]
    start = dist[0, 1:]
    full = 1 << n
    cost = np.full((full, n), np.inf)
    parent = np.full((full, n), -1, dtype=int)
    for j in range(n):
        cost[1 << j, j] = start[j]
    masks = sorted(range(1, full), key=lambda m: bin(m).count("1"))
    for mask in masks:
        row = cost[mask]
        if not np.isfinite(row).any():
            continue
        members = [j for j in range(n) if mask & (1 << j)]
        for k in range(n):
            if mask & (1 << k):
                continue
            cand = row[members] + d[members, k]
            idx = int(np.argmin(cand))
            nm = mask | (1 << k)
            if cand[idx] < cost[nm, k]:
                cost[nm, k] = cand[idx]
                parent[nm, k] = members[idx]
    last_mask = full - 1
    total = cost[last_mask] + start
    j = int(np.argmin(total))
    order = []
    mask = last_mask
    while j != -1:
        order.append(j)
        pj = parent[mask, j]
        mask ^= 1 << j
        j = int(pj)
    return [k + 1 for k in reversed(order)]


def order_route(points: np.ndarray, start: Sequence[float], method: str = "auto",
                dist: np.ndarray | None = None) -> list[int]:
    """Order stations into a short closed walking route from ``start``.

    Parameters
    ----------
    points : array (m, 2)
        Station coordinates [m].
    start : (x, y)
        Start and end point [m].
    method : {"auto", "exact", "heuristic", "nearest"}
        ``exact`` is Held-Karp; ``heuristic`` nearest neighbour then 2-opt and Or-opt;
        ``auto`` exact up to EXACT_MAX_STOPS stops, heuristic beyond.
    dist : array (m+1, m+1), optional
        Walking distances over the start point (row 0) and the stations in order (e.g. over a
        path network); straight lines when not given.

    Returns
    -------
    list of int
        Indices into ``points`` in visiting order.

    References
    ----------
    Held & Karp (1962); Croes (1958); Or (1976).
    """
    pts = np.asarray(points, dtype=float).reshape(-1, 2)
    m = len(pts)
    if m == 0:
        return []
    if dist is None:
        dist = distance_matrix(np.vstack([np.asarray(start, float)[None, :], pts]))
    elif dist.shape != (m + 1, m + 1):
        raise ValueError("the distance matrix must cover the start point and every station")
    if method == "exact" or (method == "auto" and m <= EXACT_MAX_STOPS):
        tour = held_karp(dist)
    elif method in ("auto", "heuristic"):
        tour = nearest_neighbour(dist)
        best = tour_length(tour, dist)
        while True:
            tour = or_opt(two_opt(tour, dist), dist)
            length = tour_length(tour, dist)
            if length >= best - 1e-9:
                break
            best = length
    elif method == "nearest":
        tour = nearest_neighbour(dist)
    else:
        raise ValueError(f"unknown route method {method!r}")
    return [k - 1 for k in tour]


def route_length(points: np.ndarray, start: Sequence[float], order: Sequence[int] | None = None) -> float:
    """Closed-route length [m] from ``start`` through ``points`` (in ``order``) and back."""
    pts = np.asarray(points, dtype=float).reshape(-1, 2)
    if len(pts) == 0:
        return 0.0
    if order is not None:
        pts = pts[list(order)]
    path = np.vstack([np.asarray(start, float)[None, :], pts, np.asarray(start, float)[None, :]])
    return float(np.hypot(*np.diff(path, axis=0).T).sum())
