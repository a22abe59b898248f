"""Shared pieces of the design stage: seeds, geometry checks, result object."""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import shapely
from shapely.geometry import MultiPolygon, Polygon
from shapely.geometry.base import BaseGeometry
from shapely.validation import explain_validity

from monitor import columns as C
from monitor.errors import DesignError, Diagnostic
from monitor.settings import MIN_TREND_STATIONS as MIN_STATIONS  # fewer draws a warning; monitor/settings.py

RngLike = np.random.Generator | int


def derive_rng(rng: RngLike) -> tuple[int, np.random.Generator]:
    """Return ``(seed, generator)`` such that ``default_rng(seed)`` reproduces every draw.

    Given an integer, it is the seed.  Given a Generator, one integer is drawn from it and
    becomes the seed of a fresh generator, so the result can be reproduced later by passing
    the stored seed back as ``rng``.
    """
    if isinstance(rng, bool):
        raise DesignError("rng must be a numpy Generator or an integer seed, not a bool")
    if isinstance(rng, int | np.integer):
        seed = int(rng)
        if seed < 0:
            raise DesignError(f"seed must be a non-negative integer, got {seed}")
        return seed, np.random.default_rng(seed)
    if isinstance(rng, np.random.Generator):
        seed = int(rng.integers(0, 2**63 - 1))
        return seed, np.random.default_rng(seed)
    raise DesignError(f"rng must be a numpy Generator or an integer seed, got {type(rng).__name__}")


def check_polygon(geom: BaseGeometry | None, what: str = "site polygon") -> Polygon | MultiPolygon:
    """Raise DesignError unless ``geom`` is a valid, non-empty (multi)polygon with area."""
    if geom is None:
        raise DesignError(f"{what} is missing")
    if not isinstance(geom, Polygon | MultiPolygon):
        raise DesignError(f"{what} must be a polygon, got {geom.geom_type}")
    if geom.is_empty:
        raise DesignError(f"{what} is empty")
    if not geom.is_valid:
        raise DesignError(f"{what} is invalid: {explain_validity(geom)}")
    if geom.area <= 0:
        raise DesignError(f"{what} has zero area")
    return geom


def usable_area(
    site: BaseGeometry, exclusions: Iterable[BaseGeometry] = (), what: str = "site polygon"
) -> BaseGeometry:
    """Site minus the union of exclusion polygons (paths, water, buildings); checked."""
    site = check_polygon(site, what)
    excl = list(exclusions or ())
    for i, e in enumerate(excl):
        check_polygon(e, f"exclusion polygon {i + 1}")
    if not excl:
        shapely.prepare(site)
        return site
    remaining = site.difference(shapely.union_all(excl))
    if remaining.is_empty or remaining.area <= 1e-9 * site.area:
        raise DesignError(f"the exclusion zones cover the whole {what}")
    shapely.prepare(remaining)
    return remaining


def quadrat_fits(area: BaseGeometry, x: np.ndarray, y: np.ndarray, width: float | None,
                 length: float | None) -> np.ndarray:
    """Boolean mask: quadrat centred on (x, y) lies inside ``area`` (point test when no size)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if not width and not length:
        return shapely.contains_xy(area, x, y)
    w = float(width or length) / 2.0
    h = float(length or width) / 2.0
    boxes = shapely.box(x - w, y - h, x + w, y + h)
    return shapely.contains(area, boxes)


def few_stations(n: int) -> list[Diagnostic]:
    if n < MIN_STATIONS:
        return [Diagnostic(
            "few_stations",
            f"only {n} station{'s' if n != 1 else ''}; at least {MIN_STATIONS} are usually needed "
            "to follow a trend (common practice)")]
    return []


def quadrat_vs_spacing(width: float | None, length: float | None, spacing: float | None,
                       what: str = "spacing") -> list[Diagnostic]:
    """Warn when neighbouring quadrats could overlap or touch."""
    if not spacing or not (width or length):
        return []
    side = max(float(width or 0.0), float(length or 0.0))
    if side >= spacing:
        return [Diagnostic(
            "quadrat_too_large",
            f"quadrat side {side:g} m is not smaller than the {what} of {spacing:g} m: "
            "neighbouring quadrats may overlap or touch")]
    return []


@dataclass(frozen=True)
class Placement:
    """Stations placed by one design method, reproducible from ``seed``.

    ``stations`` has columns station, x, y [m], placement and, by method, stratum,
    transect, distance_m, order (balanced order, 0-based), halton_index.
    ``params`` holds the method's inputs needed to reproduce or extend it.
    """

    method: str
    seed: int
    stations: pd.DataFrame
    params: dict[str, Any] = field(default_factory=dict)
    diagnostics: tuple[Diagnostic, ...] = ()

    @property
    def n(self) -> int:
        return len(self.stations)

    def to_dict(self) -> dict[str, Any]:
        return {
            "method": self.method,
            "seed": self.seed,
            "params": _jsonable(self.params),
            "stations": _jsonable(self.stations.to_dict(orient="records")),
            "diagnostics": [d.__dict__ for d in self.diagnostics],
        }


def _jsonable(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.floating):
        v = float(obj)
        return None if math.isnan(v) else v
    if isinstance(obj, float) and math.isnan(obj):
        return None
    if isinstance(obj, BaseGeometry):
        return obj.wkt
    return obj


def station_codes(prefix: str, n: int, start: int = 1, width: int | None = None) -> list[str]:
    width = width or max(3, len(str(start + n - 1)))
    return [f"{prefix}{i:0{width}d}" for i in range(start, start + n)]


def frame(codes: Sequence[str], x: Sequence[float], y: Sequence[float], placement: str,
          width: float | None, length: float | None, **extra: Any) -> pd.DataFrame:
    df = pd.DataFrame({C.STATION: list(codes), C.X: np.asarray(x, float), C.Y: np.asarray(y, float)})
    df["placement"] = placement
    if width or length:
        df[C.QUADRAT_WIDTH] = float(width or length)
        df[C.QUADRAT_LENGTH] = float(length or width)
    for k, v in extra.items():
        df[k] = v
    return df
