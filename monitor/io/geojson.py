"""GeoJSON files a user hands in (RFC 7946): polygons (exclusions, strata) and lines (transects, paths), in the
programme's CRS; a file whose stated CRS is another is refused.  Also the one JSON-file reader the set-up
readers share."""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

from shapely.geometry import LineString, MultiLineString, MultiPolygon, Polygon, shape
from shapely.geometry.base import BaseGeometry

from monitor.errors import InputError, InputProblem


def read_json(path: str | Path, expected: str) -> tuple[str, Any]:
    """A JSON file's name and document (UTF-8, a byte-order mark allowed); an unreadable file or one that is not
    JSON is refused in one line saying ``expected``."""
    path = Path(path)
    file = path.name
    try:
        return file, json.loads(path.read_text(encoding="utf-8-sig"))
    except OSError as exc:
        raise InputError(InputProblem(file, None, None, None, f"a readable file ({exc.strerror})")) from None
    except (json.JSONDecodeError, UnicodeDecodeError):
        raise InputError(InputProblem(file, None, None, None, expected)) from None


def geojson_features(path: Path, epsg: int, geometry_types: tuple[str, ...], wanted: str
                      ) -> tuple[str, list[dict]]:
    """The features of a GeoJSON file (a FeatureCollection, one Feature, or a bare geometry of
    ``geometry_types``), refusing a file whose stated CRS is not the programme's: (file name, features)."""
    file, doc = read_json(path, "a GeoJSON file (valid UTF-8 JSON)")
    if isinstance(doc, dict) and doc.get("type") == "FeatureCollection":
        features = doc.get("features") or []
    elif isinstance(doc, dict) and doc.get("type") == "Feature":
        features = [doc]
    elif isinstance(doc, dict) and doc.get("type") in geometry_types:
        features = [{"type": "Feature", "geometry": doc, "properties": {}}]
    else:
        raise InputError(InputProblem(file, None, "type", None, f"a GeoJSON FeatureCollection of {wanted}"))
    crs_name = ((doc.get("crs") or {}).get("properties") or {}).get("name", "")
    if crs_name:
        m = re.search(r"EPSG:+(\d+)$", str(crs_name))
        if m and int(m.group(1)) != int(epsg):
            raise InputError(InputProblem(file, None, "crs", crs_name, f"the programme's CRS EPSG:{epsg}"))
    return file, features


def read_polygons(path: Path, epsg: int, *, code_field: str | None = None) -> list[tuple[str, BaseGeometry]]:
    """Polygons of a GeoJSON file in the programme CRS: (code or feature number, geometry) per feature."""
    file, features = geojson_features(path, epsg, ("Polygon", "MultiPolygon"), "polygons")
    if not features:
        raise InputError(InputProblem(file, None, "features", None, "at least one polygon"))
    out = []
    for i, feature in enumerate(features, start=1):
        try:
            geometry = shape(feature.get("geometry"))
        except (ValueError, TypeError, AttributeError, KeyError):
            raise InputError(InputProblem(file, i, "geometry", None, "a GeoJSON polygon")) from None
        if not isinstance(geometry, Polygon | MultiPolygon):
            raise InputError(InputProblem(file, i, "geometry", geometry.geom_type, "a Polygon or MultiPolygon"))
        if not geometry.is_valid or geometry.is_empty:
            raise InputError(InputProblem(file, i, "geometry", None, "a valid, non-empty polygon"))
        label = str(i)
        if code_field is not None:
            props = feature.get("properties") or {}
            label = str(props.get(code_field) or props.get("stratum") or "").strip()
            if not label:
                raise InputError(InputProblem(file, i, code_field, None, "a code for each polygon"))
        out.append((label, geometry))
    return out


def read_lines(path: Path, epsg: int) -> list[tuple[str, LineString]]:
    """LineStrings of a GeoJSON file in the programme CRS: (code, name or feature number, line) per feature."""
    file, features = geojson_features(path, epsg, ("LineString", "MultiLineString"), "LineStrings")
    if not features:
        raise InputError(InputProblem(file, None, "features", None, "at least one LineString"))
    out = []
    for i, feature in enumerate(features, start=1):
        try:
            geometry = shape(feature.get("geometry"))
        except (ValueError, TypeError, AttributeError, KeyError):
            raise InputError(InputProblem(file, i, "geometry", None, "a GeoJSON LineString")) from None
        parts = list(geometry.geoms) if isinstance(geometry, MultiLineString) else [geometry]
        for part in parts:
            if not isinstance(part, LineString) or part.is_empty or part.length <= 0:
                raise InputError(InputProblem(file, i, "geometry", geometry.geom_type,
                                              "a LineString with at least two distinct points"))
            props = feature.get("properties") or {}
            out.append((str(props.get("code") or props.get("name") or i), part))
    return out
