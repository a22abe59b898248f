"""Exports of stored records, read back with independent readers.

* tidy CSV read with Python's csv module (RFC 4180, Shafranovich 2005);
* GeoJSON per RFC 7946 (Butler et al. 2016): a FeatureCollection, positions [longitude, latitude] in WGS84
  (section 3.1.1), no "crs" member (section 4); expected positions from pyproj's own Transformer
  (EPSG:32630 -> EPSG:4326, always_xy), not from our writer;
* Darwin Core Archive per the Darwin Core text guide (TDWG): meta.xml names the core (rowType
  http://rs.tdwg.org/dwc/terms/Event) and its extensions; occurrenceStatus "present"/"absent" as the term's
  definition gives (Darwin Core list of terms, 2023-09-18).

Missing is not zero: missed and inaccessible visits are exported as visits (events) without values.
"""

from __future__ import annotations

import csv
import io
import json
import math
import zipfile

import pytest
from lxml import etree
from pyproj import Transformer

from monitor.db import Store
from monitor.services import exports
from tests.services import test_records_data as shared

DWC_TEXT = "{http://rs.tdwg.org/dwc/text/}"

demo_template = shared.demo_template  # fixtures: the built demo database, copied per test
demo_db = shared.demo_db


def _stored(db: str):
    store = Store.open(db)
    try:
        visits = store.frame("SELECT t.code AS station, v.date, v.status, v.id FROM visit v "
                             "JOIN station t ON t.id = v.station_id")
        values = store.frame("SELECT t.code AS station, v.date, v.status, sp.code AS species, o.measure, o.value, o.n "
                             "FROM observation o JOIN visit v ON v.id = o.visit_id JOIN station t ON t.id = v.station_id "
                             "JOIN species sp ON sp.id = o.species_id")
        stations = store.frame("SELECT code, x, y, accuracy_m FROM station")
    finally:
        store.dispose()
    for frame in (visits, values):
        frame["date"] = frame["date"].astype(str).str[:10]
    return visits, values, stations


def _sensitive_present(values) -> set[str]:
    # CHAORC is the demo's sensitive species (demo_programme/species.csv, sensitive = yes)
    return set(values.loc[(values["species"] == "CHAORC") & (values["value"] > 0), "station"])


def test_tidy_csv_keeps_zeros_and_leaves_missing_visits_without_values(demo_db, tmp_path):
    paths = exports.export_csv(demo_db, tmp_path / "out")
    visits, values, _ = _stored(demo_db)
    read = {}
    for name, path in paths.items():
        raw = path.read_bytes()
        assert b"\r\n" in raw and not raw.startswith(b"\xef\xbb\xbf")  # RFC 4180 CRLF, UTF-8 without BOM
        read[name] = list(csv.DictReader(io.StringIO(raw.decode("utf-8"), newline="")))
    assert len(read["visits"]) == len(visits)
    assert len(read["observations"]) == len(values)
    missed = {(r["station"], r["date"]) for r in read["visits"] if r["status"] in ("missed", "inaccessible")}
    assert len(missed) >= 5
    assert not any((r["station"], r["date"]) in missed for r in read["observations"])
    zeros = [r for r in read["observations"] if r["value"] == "0"]
    assert len(zeros) == int((values["value"] == 0).sum()) > 0
    freq = [r for r in read["observations"] if r["measure"] == "frequency"]
    assert freq and all(r["n"] == "25" for r in freq)
    assert all(r["n"] == "" for r in read["observations"] if r["measure"] in ("count", "cover"))


def test_geojson_is_rfc7946_wgs84_with_sensitive_stations_generalised(demo_db, tmp_path):
    path, generalised = exports.export_geojson(demo_db, tmp_path / "stations.geojson", generalise_m=1000.0)
    doc = json.loads(path.read_text(encoding="utf-8"))
    _, values, stations = _stored(demo_db)
    hidden = _sensitive_present(values)
    assert doc["type"] == "FeatureCollection" and "crs" not in doc
    assert generalised == len(hidden) > 0
    to_wgs84 = Transformer.from_crs("EPSG:32630", "EPSG:4326", always_xy=True)
    features = {f["id"]: f for f in doc["features"]}
    assert set(features) == set(stations["code"])
    for row in stations.to_dict(orient="records"):
        feature = features[row["code"]]
        assert feature["geometry"]["type"] == "Point"
        lon, lat = feature["geometry"]["coordinates"]
        assert -180 <= lon <= 180 and -90 <= lat <= 90
        x, y = row["x"], row["y"]
        if row["code"] in hidden:
            x, y = math.floor(x / 1000) * 1000 + 500, math.floor(y / 1000) * 1000 + 500
            assert feature["properties"]["data_generalizations"]
            assert feature["properties"]["coordinate_uncertainty_m"] >= 1000 * math.sqrt(2) / 2
        else:
            assert feature["properties"]["data_generalizations"] is None
        want_lon, want_lat = to_wgs84.transform(x, y)
        assert lon == pytest.approx(want_lon, abs=1e-7) and lat == pytest.approx(want_lat, abs=1e-7)


def test_darwin_core_archive_events_occurrences_and_generalisation(demo_db, tmp_path):
    path = exports.export_dwca(demo_db, tmp_path / "records.zip")
    visits, values, stations = _stored(demo_db)
    with zipfile.ZipFile(path) as zf:
        names = set(zf.namelist())
        assert {"meta.xml", "eml.xml", "event.txt", "occurrence.txt"} <= names
        meta = etree.fromstring(zf.read("meta.xml"))
        core = meta.find(f"{DWC_TEXT}core")
        assert core.get("rowType") == "http://rs.tdwg.org/dwc/terms/Event"
        assert core.find(f"{DWC_TEXT}files/{DWC_TEXT}location").text == "event.txt"
        extensions = {e.find(f"{DWC_TEXT}files/{DWC_TEXT}location").text: e.get("rowType")
                      for e in meta.findall(f"{DWC_TEXT}extension")}
        assert extensions["occurrence.txt"] == "http://rs.tdwg.org/dwc/terms/Occurrence"
        tables = {}
        for name in ("event.txt", "occurrence.txt"):
            lines = zf.read(name).decode("utf-8").splitlines()
            header = lines[0].split("\t")
            tables[name] = [dict(zip(header, line.split("\t"), strict=True)) for line in lines[1:]]
    events = {e["eventID"]: e for e in tables["event.txt"]}
    visit_events = [e for e in events.values() if e["eventDate"]]
    assert len(visit_events) == len(visits)
    occurrences = tables["occurrence.txt"]
    assert len(occurrences) == len(values)
    assert sum(o["occurrenceStatus"] == "absent" for o in occurrences) == int((values["value"] == 0).sum())
    # no occurrence (present or absent) hangs on a missed or inaccessible visit
    missing_events = {e["eventID"] for e in visit_events if "missed" in e["eventRemarks"]
                      or "inaccessible" in e["eventRemarks"]}
    assert missing_events and not any(o["eventID"] in missing_events for o in occurrences)
    hidden = _sensitive_present(values)
    for e in visit_events:
        station = e["eventID"].split(":")[2]
        assert bool(e["dataGeneralizations"]) == (station in hidden)
