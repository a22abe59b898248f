r"""Walking distances over a programme's paths: shortest paths on the path network.

Where a programme supplies its paths (GeoJSON lines: tracks, boardwalks, bridges), field teams walk
along them.  The lines are noded where they cross (shapely's union of the linework), every
segment becomes an edge of an undirected graph weighted by its length [m], and each place to be
reached (a start point, a station) is joined to the network at its nearest point on it: the walk
off the path to that point is straight, and the rest follows the paths.  The distance between
places :math:`i` and :math:`j` is

.. math:: d_{ij} = o_i + g(s_i, s_j) + o_j,

with :math:`o_i` the straight distance from :math:`i` to its access point :math:`s_i` on the network
and :math:`g` the shortest-path length between access points (Dijkstra 1959, through
``scipy.sparse.csgraph.dijkstra``).  Crossing open ground between two places is not assumed: a river
with one bridge is crossed at the bridge.  Without paths, distances are straight lines times a stated
winding factor (:func:`straight_distances`).

References
----------
Dijkstra, E. W. (1959). A note on two problems in connexion with graphs. Numerische Mathematik
1:269-271.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import dijkstra
from shapely.geometry import LineString, MultiLineString, Point

from monitor.errors import DesignError


def straight_distances(points: np.ndarray, winding: float = 1.0) -> np.ndarray:
    """Straight-line distances between rows of ``points`` (n x 2) [m], times the winding factor."""
    if winding < 1.0:
        raise DesignError("the winding factor must be at least 1 (a walk is never shorter than a straight line)")
    p = np.asarray(points, dtype=float).reshape(-1, 2)
    return np.hypot(p[:, None, 0] - p[None, :, 0], p[:, None, 1] - p[None, :, 1]) * float(winding)


class PathNetwork:
    """A walking network from path lines in projected metres.

    Parameters
    ----------
    lines : sequence of LineString or MultiLineString
        The paths.  Lines are noded where they cross; endpoints within ``snap`` metres of each
        other are joined.
    snap : float
        Vertices closer than this are the same node [m].
    """

    def __init__(self, lines: Sequence[LineString | MultiLineString], snap: float = 0.01):
        parts = []
        for line in lines:
            parts += list(line.geoms) if isinstance(line, MultiLineString) else [line]
        if not parts or any(not isinstance(p, LineString) or p.is_empty or p.length <= 0 for p in parts):
            raise DesignError("paths must be non-empty LineStrings")
        noded = shapely.union_all(parts)
        pieces = list(noded.geoms) if hasattr(noded, "geoms") else [noded]
        self.snap = float(snap)
        self._node_of: dict[tuple[int, int], int] = {}
        self.nodes: list[tuple[float, float]] = []
        a_list, b_list, segments = [], [], []
        for piece in pieces:
            coords = list(piece.coords)
            for (x0, y0), (x1, y1) in zip(coords[:-1], coords[1:], strict=True):
                a, b = self._node(x0, y0), self._node(x1, y1)
                if a == b:
                    continue
                a_list.append(a)
                b_list.append(b)
                segments.append(LineString([self.nodes[a], self.nodes[b]]))
        self.edges = np.array([a_list, b_list], dtype=int).T
        self.lengths = np.array([s.length for s in segments])
        self.segments = segments
        self._tree = shapely.STRtree(segments)

    def _node(self, x: float, y: float) -> int:
        key = (round(x / self.snap), round(y / self.snap))
        if key not in self._node_of:
            self._node_of[key] = len(self.nodes)
            self.nodes.append((float(x), float(y)))
        return self._node_of[key]

    @property
    def length(self) -> float:
        """Total length of the network [m]."""
        return float(self.lengths.sum())

    def access(self, points: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """For each point: nearest segment, position along it [m] and straight distance to it [m]."""
        pts = [Point(float(x), float(y)) for x, y in np.asarray(points, float).reshape(-1, 2)]
        seg = np.asarray(self._tree.nearest(pts), dtype=int)
        along = np.array([self.segments[s].project(p) for s, p in zip(seg, pts, strict=True)])
        off = np.array([self.segments[s].distance(p) for s, p in zip(seg, pts, strict=True)])
        return seg, along, off

    def _graph(self, pts: np.ndarray):
        n_nodes = len(self.nodes)
        seg, along, off = self.access(pts)
        rows, cols, weights = list(self.edges[:, 0]), list(self.edges[:, 1]), list(self.lengths)
        for k in range(len(pts)):
            a, b = self.edges[seg[k]]
            length = self.lengths[seg[k]]
            rows += [n_nodes + k, n_nodes + k]
            cols += [a, b]
            weights += [max(along[k], 1e-9), max(length - along[k], 1e-9)]
        # two places reaching the same segment walk along it between them, not round by its ends
        for s in np.unique(seg):
            on = np.flatnonzero(seg == s)
            for i in range(len(on)):
                for j in range(i + 1, len(on)):
                    rows.append(n_nodes + on[i])
                    cols.append(n_nodes + on[j])
                    weights.append(max(abs(along[on[i]] - along[on[j]]), 1e-9))
        size = n_nodes + len(pts)
        return coo_matrix((weights, (rows, cols)), shape=(size, size)).tocsr(), seg, along, off

    def walk_line(self, start: Sequence[float], end: Sequence[float]) -> LineString:
        """The walk from ``start`` to ``end`` as a line: off the path, along the shortest path, off again."""
        pts = np.array([start, end], dtype=float)
        graph, seg, along, _off = self._graph(pts)
        n_nodes = len(self.nodes)
        _dist, pred = dijkstra(graph, directed=False, indices=n_nodes, return_predecessors=True)
        if pred[n_nodes + 1] < 0:
            raise DesignError("the two places lie on parts of the path network that do not join")
        chain = [n_nodes + 1]
        while chain[-1] != n_nodes:
            chain.append(int(pred[chain[-1]]))
        chain.reverse()

        def xy(node: int) -> tuple[float, float]:
            if node < n_nodes:
                return self.nodes[node]
            k = node - n_nodes
            p = self.segments[seg[k]].interpolate(along[k])
            return (p.x, p.y)

        coords = [tuple(pts[0])] + [xy(v) for v in chain] + [tuple(pts[1])]
        clean = [c for i, c in enumerate(coords) if i == 0 or np.hypot(c[0] - coords[i - 1][0], c[1] - coords[i - 1][1]) > 1e-9]
        return LineString(clean)

    def distances(self, points: np.ndarray) -> np.ndarray:
        """Walking distances between ``points`` (n x 2) over the network [m] (see the module notes).

        Raises DesignError when two points lie on parts of the network that do not join.
        """
        pts = np.asarray(points, float).reshape(-1, 2)
        extra = len(self.nodes)
        size = extra + len(pts)
        graph, _seg, _along, off = self._graph(pts)
        reach = dijkstra(graph, directed=False, indices=np.arange(extra, size))[:, extra:]
        if not np.all(np.isfinite(reach)):
            i, j = np.argwhere(~np.isfinite(reach))[0]
            raise DesignError(f"places {i + 1} and {j + 1} lie on parts of the path network that do not join")
        out = off[:, None] + reach + off[None, :]
        np.fill_diagonal(out, 0.0)
        return out

    def to_geojson(self) -> dict:
        """The noded network as a GeoJSON MultiLineString (programme CRS)."""
        return shapely.geometry.mapping(MultiLineString([list(s.coords) for s in self.segments]))
