"""Shapes for the workspace's SVG drawings, computed from our own geometry (no map tiles, no network).

Pure: takes site boundaries (GeoJSON geometry in the programme's projected CRS, metres) and station
coordinates, returns numbers and path strings in the drawing's own units; the templates lay them out
(every name is inserted as text by the template engine, never as markup).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass


@dataclass(frozen=True)
class Frame:
    """A projection from metres to drawing units: x to the right, y (northing) upwards."""

    x0: float
    y1: float
    scale: float
    width: float
    height: float
    pad: float

    def point(self, x: float, y: float) -> tuple[float, float]:
        return (round(self.pad + (x - self.x0) * self.scale, 1), round(self.pad + (self.y1 - y) * self.scale, 1))


def _rings(geometry: Mapping) -> Iterable[Sequence[Sequence[float]]]:
    kind = geometry.get("type")
    if kind == "Polygon":
        yield from geometry["coordinates"]
    elif kind == "MultiPolygon":
        for polygon in geometry["coordinates"]:
            yield from polygon
    elif kind == "GeometryCollection":
        for part in geometry.get("geometries", []):
            yield from _rings(part)


def frame_for(points: Iterable[tuple[float, float]], *, width: float = 800.0, pad: float = 16.0) -> Frame:
    xs, ys = [], []
    for x, y in points:
        if math.isfinite(x) and math.isfinite(y):
            xs.append(x)
            ys.append(y)
    if not xs:
        return Frame(0.0, 0.0, 1.0, width, width * 0.6, pad)
    span_x, span_y = max(max(xs) - min(xs), 1.0), max(max(ys) - min(ys), 1.0)
    scale = (width - 2 * pad) / span_x
    height = min(span_y * scale + 2 * pad, 2.0 * width)
    scale = min(scale, (height - 2 * pad) / span_y)
    return Frame(min(xs), max(ys), scale, width, round(height, 1), pad)


def reserve_map(sites: Mapping[str, Mapping], stations: Sequence[Mapping], *, width: float = 800.0) -> dict:
    """Sites as SVG paths and stations as points.

    ``sites`` maps site code to its GeoJSON geometry; ``stations`` are mappings with ``station``, ``x``,
    ``y`` and ``state``.  Returns ``width``, ``height``, ``sites`` (code, path, label x/y) and ``stations``
    (code, cx, cy, state), plus a scale bar (``bar_m`` metres drawn ``bar_px`` long)."""
    every = [(float(p[0]), float(p[1])) for g in sites.values() for ring in _rings(g) for p in ring]
    every += [(float(s["x"]), float(s["y"])) for s in stations]
    frame = frame_for(every, width=width)
    site_shapes = []
    for code, geometry in sites.items():
        parts, pts = [], []
        for ring in _rings(geometry):
            xy = [frame.point(float(p[0]), float(p[1])) for p in ring]
            pts += xy
            parts.append("M" + " L".join(f"{x},{y}" for x, y in xy) + " Z")
        if parts:
            lx = sum(p[0] for p in pts) / len(pts)
            ly = min(p[1] for p in pts) + 14
            site_shapes.append({"code": code, "path": " ".join(parts), "label_x": round(lx, 1), "label_y": round(ly, 1)})
    points = []
    for s in stations:
        cx, cy = frame.point(float(s["x"]), float(s["y"]))
        points.append({"code": str(s["station"]), "cx": cx, "cy": cy, "state": str(s.get("state") or "")})
    nice = [1, 2, 5]
    target = (frame.width - 2 * frame.pad) / 5 / frame.scale
    exponent = 10 ** math.floor(math.log10(max(target, 1e-9)))
    bar_m = max(n * exponent for n in nice if n * exponent <= max(target, exponent))
    return {"width": frame.width, "height": frame.height, "sites": site_shapes, "stations": points,
            "bar_m": bar_m, "bar_px": round(bar_m * frame.scale, 1)}


def series_chart(points: Sequence[tuple[int, float]], *, width: float = 320.0, height: float = 120.0) -> dict:
    """A small line chart of one series over the years: polyline points, dots, and axis labels."""
    pad_left, pad_right, pad_top, pad_bottom = 40.0, 22.0, 10.0, 22.0
    pts = [(int(y), float(v)) for y, v in points if v is not None and math.isfinite(float(v))]
    if not pts:
        return {"width": width, "height": height, "line": "", "dots": [], "x_labels": [], "y_labels": []}
    years = [p[0] for p in pts]
    values = [p[1] for p in pts]
    y_lo, y_hi = min(0.0, min(values)), max(values)
    if y_hi == y_lo:
        y_hi = y_lo + 1.0
    x_lo, x_hi = min(years), max(years)
    span = max(x_hi - x_lo, 1)

    def px(year: int, value: float) -> tuple[float, float]:
        x = pad_left + (year - x_lo) / span * (width - pad_left - pad_right)
        y = pad_top + (y_hi - value) / (y_hi - y_lo) * (height - pad_top - pad_bottom)
        return round(x, 1), round(y, 1)

    xy = [px(y, v) for y, v in pts]
    dots = [{"x": x, "y": y, "year": yr, "value": v} for (x, y), (yr, v) in zip(xy, pts, strict=True)]
    return {
        "width": width, "height": height,
        "line": " ".join(f"{x},{y}" for x, y in xy),
        "dots": dots,
        "x_labels": [{"x": px(yr, y_lo)[0], "text": str(yr)} for yr in sorted({x_lo, x_hi})],
        "y_labels": [{"y": px(x_lo, v)[1], "text": f"{v:g}"} for v in (y_lo, y_hi)],
        "baseline": px(x_lo, y_lo)[1], "left": pad_left, "right": width - pad_right,
    }
