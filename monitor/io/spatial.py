"""Spatial and calendar exports: GeoJSON (RFC 7946), GPX 1.1 and iCalendar (RFC 5545).

Coordinates inside ``monitor`` are projected metres in the programme's CRS (an EPSG code);
GeoJSON and GPX carry WGS84 longitude/latitude in decimal degrees, converted with pyproj.
GeoJSON positions are ``[longitude, latitude]`` (RFC 7946 section 3.1.1) and carry no
``crs`` member (section 4); GPX puts ``lat`` and ``lon`` attributes on ``wpt`` and
``rtept`` (GPX 1.1 schema).  iCalendar text uses CRLF line ends, lines folded at 75 octets,
and TEXT values escaped (RFC 5545 sections 3.1 and 3.3.11).

References
----------
Butler, H. et al. (2016). The GeoJSON Format. RFC 7946, IETF.
Foster, D. (2004). GPX: the GPS Exchange Format, version 1.1. TopoGrafix.
Desruisseaux, B. (2009). Internet Calendaring and Scheduling Core Object Specification
(iCalendar). RFC 5545, IETF.
"""

from __future__ import annotations

import datetime as dt
import json
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from lxml import etree
from pyproj import CRS, Transformer
from pyproj.exceptions import CRSError

from monitor import columns as C
from monitor.errors import InputError

WGS84 = "EPSG:4326"
GPX_NS = "http://www.topografix.com/GPX/1/1"
#: decimal places for degrees: 1e-8 degree is about 1 mm on the ground
DEGREE_DECIMALS = 8


@lru_cache(maxsize=32)
def _transformer(src: str, dst: str) -> Transformer:
    try:
        return Transformer.from_crs(CRS.from_user_input(src), CRS.from_user_input(dst), always_xy=True)
    except CRSError as exc:
        raise InputError(f"unknown coordinate reference system {src!r} or {dst!r}") from exc


def _crs_text(crs: int | str) -> str:
    return f"EPSG:{crs}" if isinstance(crs, int | np.integer) else str(crs)


def to_wgs84(x: Any, y: Any, crs: int | str) -> tuple[np.ndarray, np.ndarray]:
    """Projected metres in ``crs`` -> WGS84 (longitude, latitude) [degrees]."""
    lon, lat = _transformer(_crs_text(crs), WGS84).transform(np.asarray(x, float), np.asarray(y, float))
    return np.asarray(lon), np.asarray(lat)


def from_wgs84(lon: Any, lat: Any, crs: int | str) -> tuple[np.ndarray, np.ndarray]:
    """WGS84 (longitude, latitude) [degrees] -> projected metres in ``crs``."""
    x, y = _transformer(WGS84, _crs_text(crs)).transform(np.asarray(lon, float), np.asarray(lat, float))
    return np.asarray(x), np.asarray(y)


def _plain(v: Any) -> Any:
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.floating):
        return None if np.isnan(v) else float(v)
    if isinstance(v, float) and np.isnan(v):
        return None
    if isinstance(v, dt.date | dt.time):
        return v.isoformat()
    if v is pd.NA or v is None:
        return None
    return v


def stations_geojson(stations: pd.DataFrame, crs: int | str,
                     properties: Sequence[str] | None = None) -> dict[str, Any]:
    """Stations as an RFC 7946 FeatureCollection of Points in WGS84, longitude first.

    Parameters
    ----------
    stations : DataFrame with station, x, y [m] and any other columns
    crs : EPSG code or CRS string of x, y
    properties : columns to carry as feature properties (default: all but x, y)
    """
    if stations.empty:
        return {"type": "FeatureCollection", "features": []}
    lon, lat = to_wgs84(stations[C.X], stations[C.Y], crs)
    props = list(properties) if properties is not None else [c for c in stations.columns if c not in (C.X, C.Y)]
    features = []
    for i, (_, row) in enumerate(stations.iterrows()):
        features.append({
            "type": "Feature",
            "id": str(row[C.STATION]),
            "geometry": {"type": "Point",
                         "coordinates": [round(float(lon[i]), DEGREE_DECIMALS), round(float(lat[i]), DEGREE_DECIMALS)]},
            "properties": {p: _plain(row[p]) for p in props},
        })
    return {"type": "FeatureCollection", "features": features}


def write_geojson(obj: Mapping[str, Any], path: str | Path) -> Path:
    path = Path(path)
    path.write_text(json.dumps(obj, ensure_ascii=False, indent=1), encoding="utf-8")
    return path


# --- GPX 1.1 -------------------------------------------------------------------------------


@dataclass(frozen=True)
class Waypoint:
    """A GPX waypoint in WGS84 degrees."""

    lat: float
    lon: float
    name: str
    desc: str | None = None
    cmt: str | None = None
    sym: str | None = None
    type: str | None = None


@dataclass(frozen=True)
class Route:
    """A GPX route: an ordered list of route points."""

    name: str
    points: tuple[Waypoint, ...]
    desc: str | None = None


def _fmt_deg(v: float) -> str:
    return f"{float(v):.{DEGREE_DECIMALS}f}"


def _point(parent: etree._Element, tag: str, w: Waypoint) -> None:
    if not (-90.0 <= w.lat <= 90.0) or not (-180.0 <= w.lon < 180.0):
        raise InputError(f"waypoint {w.name}: latitude/longitude out of range ({w.lat}, {w.lon})")
    el = etree.SubElement(parent, f"{{{GPX_NS}}}{tag}", lat=_fmt_deg(w.lat), lon=_fmt_deg(w.lon))
    # element order fixed by the GPX 1.1 schema (wptType sequence): name, cmt, desc, ..., sym, type
    for child, value in (("name", w.name), ("cmt", w.cmt), ("desc", w.desc), ("sym", w.sym), ("type", w.type)):
        if value is not None:
            etree.SubElement(el, f"{{{GPX_NS}}}{child}").text = str(value)


def gpx_document(waypoints: Iterable[Waypoint] = (), routes: Iterable[Route] = (), *, creator: str = "monitor",
                 name: str | None = None, desc: str | None = None, time: dt.datetime | None = None) -> str:
    """A GPX 1.1 document (UTF-8 text) with waypoints and routes.

    ``time`` (metadata creation time) must be timezone-aware; it is written in UTC.
    """
    root = etree.Element(f"{{{GPX_NS}}}gpx", nsmap={None: GPX_NS}, version="1.1", creator=creator)
    if name or desc or time:
        meta = etree.SubElement(root, f"{{{GPX_NS}}}metadata")
        if name:
            etree.SubElement(meta, f"{{{GPX_NS}}}name").text = name
        if desc:
            etree.SubElement(meta, f"{{{GPX_NS}}}desc").text = desc
        if time:
            if time.tzinfo is None:
                raise InputError("GPX metadata time must be timezone-aware")
            etree.SubElement(meta, f"{{{GPX_NS}}}time").text = (
                time.astimezone(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"))
    for w in waypoints:
        _point(root, "wpt", w)
    for r in routes:
        rte = etree.SubElement(root, f"{{{GPX_NS}}}rte")
        etree.SubElement(rte, f"{{{GPX_NS}}}name").text = r.name
        if r.desc:
            etree.SubElement(rte, f"{{{GPX_NS}}}desc").text = r.desc
        for w in r.points:
            _point(rte, "rtept", w)
    return etree.tostring(root, xml_declaration=True, encoding="UTF-8", pretty_print=True).decode("utf-8")


def stations_gpx(stations: pd.DataFrame, crs: int | str, *, name: str | None = None,
                 desc_column: str | None = None, creator: str = "monitor") -> str:
    """Stations as GPX 1.1 waypoints (name = station code)."""
    lon, lat = to_wgs84(stations[C.X], stations[C.Y], crs) if len(stations) else ([], [])
    wpts = []
    for i, (_, row) in enumerate(stations.iterrows()):
        desc = None
        if desc_column and desc_column in row.index and isinstance(row[desc_column], str) and row[desc_column]:
            desc = row[desc_column]
        wpts.append(Waypoint(float(lat[i]), float(lon[i]), str(row[C.STATION]), desc=desc, sym="Flag"))
    return gpx_document(wpts, creator=creator, name=name)


# --- iCalendar (RFC 5545) ---------------------------------------------------------------------


@dataclass(frozen=True)
class CalendarEvent:
    """One VEVENT.  ``start``/``end`` naive = floating local time (RFC 5545 3.3.5 form #1)."""

    uid: str
    start: dt.datetime
    end: dt.datetime
    summary: str
    description: str | None = None
    location: str | None = None
    geo: tuple[float, float] | None = None  # (lat, lon) degrees

    def __post_init__(self) -> None:
        if self.end < self.start:
            raise InputError(f"calendar event {self.uid}: ends before it starts")


def _ics_escape(text: str) -> str:
    # RFC 5545 3.3.11: backslash, semicolon, comma escaped; newlines as \n
    return (text.replace("\\", "\\\\").replace(";", "\\;").replace(",", "\\,")
            .replace("\r\n", "\\n").replace("\n", "\\n"))


def _fold(line: str) -> str:
    # RFC 5545 3.1: lines longer than 75 octets are split with CRLF + one space, never inside
    # a UTF-8 multi-octet character
    out = []
    current = b""
    limit = 75
    for ch in line:
        b = ch.encode("utf-8")
        if len(current) + len(b) > limit:
            out.append(current.decode("utf-8"))
            current = b" " + b
            limit = 75
        else:
            current += b
    out.append(current.decode("utf-8"))
    return "\r\n".join(out)


def _icalendar_zoned(events: list[CalendarEvent], *, dtstamp: dt.datetime, prodid: str, name: str | None,
                     time_zone: str) -> str:
    import zoneinfo

    import icalendar

    try:
        zone = zoneinfo.ZoneInfo(time_zone)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError):
        raise InputError(f"the programme's time zone '{time_zone}' is not in the time zone database") from None
    calendar = icalendar.Calendar()
    calendar.add("prodid", prodid)
    calendar.add("version", "2.0")
    calendar.add("calscale", "GREGORIAN")
    if name:
        calendar.add("x-wr-calname", name)
    calendar.add("x-wr-timezone", time_zone)
    for e in events:
        event = icalendar.Event()
        event.add("uid", e.uid)
        event.add("dtstamp", dtstamp.astimezone(dt.UTC))
        event.add("dtstart", e.start if e.start.tzinfo else e.start.replace(tzinfo=zone))
        event.add("dtend", e.end if e.end.tzinfo else e.end.replace(tzinfo=zone))
        event.add("summary", e.summary)
        if e.description:
            event.add("description", e.description)
        if e.location:
            event.add("location", e.location)
        if e.geo is not None:
            event.add("geo", (round(e.geo[0], 6), round(e.geo[1], 6)))
        calendar.add_component(event)
    calendar.add_missing_timezones()
    return calendar.to_ical().decode("utf-8")


def _ics_dt(v: dt.datetime) -> str:
    if v.tzinfo is not None:
        return v.astimezone(dt.UTC).strftime("%Y%m%dT%H%M%SZ")
    return v.strftime("%Y%m%dT%H%M%S")


def icalendar_document(events: Iterable[CalendarEvent], *, dtstamp: dt.datetime,
                       prodid: str = "-//monitor//field schedule//EN", name: str | None = None,
                       time_zone: str | None = None) -> str:
    """An RFC 5545 VCALENDAR with one VEVENT per event.

    ``dtstamp`` (timezone-aware) is the creation time written on every event (required by
    RFC 5545 3.6.1 together with UID and, with no METHOD, DTSTART).  With ``time_zone`` (an IANA
    name), naive event times are local times in that zone: each DTSTART/DTEND carries its TZID and the
    calendar a VTIMEZONE for it (RFC 5545 3.6.5), written by the icalendar library from the zone
    database, so a phone in another zone shows the right hour.
    """
    if dtstamp.tzinfo is None:
        raise InputError("the calendar time stamp must be timezone-aware")
    if time_zone:
        return _icalendar_zoned(list(events), dtstamp=dtstamp, prodid=prodid, name=name, time_zone=time_zone)
    lines = ["BEGIN:VCALENDAR", "VERSION:2.0", f"PRODID:{prodid}", "CALSCALE:GREGORIAN"]
    if name:
        lines.append(f"X-WR-CALNAME:{_ics_escape(name)}")
    for e in events:
        lines += ["BEGIN:VEVENT", f"UID:{e.uid}", f"DTSTAMP:{_ics_dt(dtstamp)}",
                  f"DTSTART:{_ics_dt(e.start)}", f"DTEND:{_ics_dt(e.end)}",
                  f"SUMMARY:{_ics_escape(e.summary)}"]
        if e.description:
            lines.append(f"DESCRIPTION:{_ics_escape(e.description)}")
        if e.location:
            lines.append(f"LOCATION:{_ics_escape(e.location)}")
        if e.geo is not None:
            lines.append(f"GEO:{e.geo[0]:.6f};{e.geo[1]:.6f}")
        lines.append("END:VEVENT")
    lines.append("END:VCALENDAR")
    return "".join(_fold(line) + "\r\n" for line in lines)
