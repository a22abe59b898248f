"""GeoJSON (RFC 7946), GPX 1.1 and iCalendar (RFC 5545) writers against their standards."""

import datetime as dt
import json

import icalendar
import numpy as np
import pandas as pd
import pytest
from lxml import etree

from monitor.io.spatial import (
    CalendarEvent,
    Route,
    Waypoint,
    from_wgs84,
    gpx_document,
    icalendar_document,
    stations_geojson,
    stations_gpx,
    to_wgs84,
)
from tests.conftest import GPX_SCHEMA

SCHEMA = etree.XMLSchema(etree.parse(str(GPX_SCHEMA)))  # the official GPX 1.1 schema

# invented stations in UTM zone 33N (EPSG:32633), metres
STATIONS = pd.DataFrame({
    "station": ["Q001", "Q002", "Q003"],
    "x": [500000.0, 500250.5, 499870.2],
    "y": [5000000.0, 5000123.4, 4999800.9],
    "site": ["NW", "NW", "SE"],
    "relocation_notes": ["2 m N of fence post <7> & cairn", "", "oak, 5 m at 120\u00b0"],
})


def test_geojson_longitude_first_in_wgs84():
    # UTM zone 33 has central meridian 15 degrees E (zone n: 6n - 183; UTM definition), so
    # easting 500000 m lies on 15 E exactly; latitude at northing 5,000,000 m is about 45.1 N.
    # RFC 7946 section 3.1.1: positions are [longitude, latitude].
    fc = stations_geojson(STATIONS, 32633)
    assert fc["type"] == "FeatureCollection"
    assert "crs" not in fc  # RFC 7946 section 4: no crs member, WGS84 implied
    lon, lat = fc["features"][0]["geometry"]["coordinates"]
    assert lon == pytest.approx(15.0, abs=1e-9)
    assert 45.0 < lat < 45.3
    f = fc["features"][1]
    assert f["type"] == "Feature" and f["geometry"]["type"] == "Point"
    assert f["properties"]["station"] == "Q002" and "x" not in f["properties"]
    json.dumps(fc)  # plain JSON types only


def test_pyproj_round_trip_within_a_millimetre():
    rng = np.random.default_rng(0)
    for epsg, (x0, y0) in {32633: (500000, 5000000), 27700: (400000, 300000), 2193: (1700000, 5900000)}.items():
        x = x0 + rng.uniform(-20000, 20000, 200)
        y = y0 + rng.uniform(-20000, 20000, 200)
        lon, lat = to_wgs84(x, y, epsg)
        bx, by = from_wgs84(lon, lat, epsg)
        assert np.max(np.hypot(bx - x, by - y)) < 1e-3


def test_geojson_coordinates_keep_millimetre_precision():
    fc = stations_geojson(STATIONS, 32633)
    lon = [f["geometry"]["coordinates"][0] for f in fc["features"]]
    lat = [f["geometry"]["coordinates"][1] for f in fc["features"]]
    x, y = from_wgs84(lon, lat, 32633)
    # 8 decimal places of a degree are about 1.1 mm of latitude: allow 2 mm after rounding
    assert np.max(np.hypot(x - STATIONS.x, y - STATIONS.y)) < 2e-3


def test_gpx_validates_against_gpx_1_1_schema():
    text = stations_gpx(STATIONS, 32633, name="Stations", desc_column="relocation_notes")
    doc = etree.fromstring(text.encode("utf-8"))
    SCHEMA.assertValid(doc)
    ns = {"g": "http://www.topografix.com/GPX/1/1"}
    wpts = doc.findall("g:wpt", ns)
    assert [w.findtext("g:name", namespaces=ns) for w in wpts] == ["Q001", "Q002", "Q003"]
    assert float(wpts[0].get("lon")) == pytest.approx(15.0, abs=1e-8)
    assert wpts[0].findtext("g:desc", namespaces=ns) == "2 m N of fence post <7> & cairn"


def test_gpx_route_and_metadata_validate():
    a = Waypoint(45.1, 15.0, "A")
    b = Waypoint(45.2, 15.1, "B", desc="d", cmt="c", sym="Flag", type="station")
    text = gpx_document([a, b], [Route("day", (a, b, a), desc="x")], name="n",
                        time=dt.datetime(2026, 5, 4, 8, 0, tzinfo=dt.UTC))
    SCHEMA.assertValid(etree.fromstring(text.encode("utf-8")))


def test_the_schema_rejects_bad_gpx():
    # the check can fail: latitude out of range and elements out of schema order are refused
    bad_lat = ('<gpx xmlns="http://www.topografix.com/GPX/1/1" version="1.1" creator="x">'
               '<wpt lat="95" lon="0"/></gpx>')
    bad_order = ('<gpx xmlns="http://www.topografix.com/GPX/1/1" version="1.1" creator="x">'
                 '<wpt lat="1" lon="0"><desc>d</desc><name>n</name></wpt></gpx>')
    no_creator = '<gpx xmlns="http://www.topografix.com/GPX/1/1" version="1.1"/>'
    for text in (bad_lat, bad_order, no_creator):
        assert not SCHEMA.validate(etree.fromstring(text.encode()))


def _events():
    return [
        CalendarEvent("2026-A-20260504-NW@monitor.invalid", dt.datetime(2026, 5, 4, 9, 0),
                      dt.datetime(2026, 5, 4, 15, 30), "Round NW; team A, 12 stations",
                      description="Team A: p1, p2\n1. Q001 09:10\n" + "long line " * 20,
                      location="NW start", geo=(45.1, 15.0)),
        CalendarEvent("2026-B-20260505-SE@monitor.invalid", dt.datetime(2026, 5, 5, 9, 0),
                      dt.datetime(2026, 5, 5, 16, 0), "Round SE \u00e9\u00e9\u00e9 " * 8),
    ]


def test_icalendar_parses_and_has_required_properties():
    stamp = dt.datetime(2026, 4, 1, 12, 0, tzinfo=dt.UTC)
    text = icalendar_document(_events(), dtstamp=stamp)
    cal = icalendar.Calendar.from_ical(text)
    # RFC 5545 3.6: VCALENDAR needs VERSION and PRODID; 3.6.1: VEVENT needs UID and DTSTAMP,
    # and DTSTART when the calendar has no METHOD
    assert str(cal["VERSION"]) == "2.0" and cal.get("PRODID")
    events = cal.walk("VEVENT")
    assert len(events) == 2
    for ev in events:
        for prop in ("UID", "DTSTAMP", "DTSTART"):
            assert ev.get(prop) is not None, prop
    assert events[0].decoded("DTSTART") == dt.datetime(2026, 5, 4, 9, 0)
    assert events[0].decoded("DTSTAMP") == stamp
    # escaped text comes back unchanged (RFC 5545 3.3.11)
    assert str(events[0]["SUMMARY"]) == "Round NW; team A, 12 stations"
    assert str(events[0]["DESCRIPTION"]).startswith("Team A: p1, p2\n1. Q001 09:10\n")
    assert str(events[1]["SUMMARY"]) == "Round SE \u00e9\u00e9\u00e9 " * 8
    assert events[0]["GEO"].latitude == pytest.approx(45.1)


def test_icalendar_lines_are_crlf_and_folded_at_75_octets():
    text = icalendar_document(_events(), dtstamp=dt.datetime(2026, 4, 1, tzinfo=dt.UTC))
    assert text.endswith("\r\n")
    lines = text.split("\r\n")[:-1]
    assert all(len(line.encode("utf-8")) <= 75 for line in lines)  # RFC 5545 section 3.1
    assert "\n" not in "".join(lines)
    assert any(line.startswith(" ") for line in lines)  # the long description was folded


def test_the_schema_is_the_official_file_unchanged():
    # SHA-256 recorded in tests/fixtures/gpx/README.md when the official GPX 1.1 schema was vendored
    import hashlib

    digest = hashlib.sha256(GPX_SCHEMA.read_bytes()).hexdigest()
    assert digest == "9e4d1988b862edbe556305b130f8f6f1b29864fefd0dc02d5dab04ccdd1f34d6"
    assert b'targetNamespace="http://www.topografix.com/GPX/1/1"' in GPX_SCHEMA.read_bytes()
