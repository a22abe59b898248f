"""Writers: tidy CSV (RFC 4180) and the Darwin Core Archive (TDWG Darwin Core, version 2023-09-18).

Invented programme, stations and species throughout.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import math
import zipfile

import pandas as pd
import pytest
from lxml import etree

from monitor.io.dwca import DWC_VERSION, ProgrammeMetadata, write_dwca
from monitor.io.records import read_field_records
from monitor.io.tidy import write_tidy_csv

# Darwin Core term local names used by the writer, each checked against the Darwin Core List of Terms
# (TDWG, https://dwc.tdwg.org/terms/, version 2023-09-18): Event, Location, Occurrence, Taxon,
# MeasurementOrFact classes and record-level terms.  Typed here from that list, not from our code.
DWC_TERMS_2023_09_18 = {
    # record-level
    "basisOfRecord", "dataGeneralizations", "informationWithheld",
    # Event
    "eventID", "parentEventID", "eventDate", "year", "month", "day", "samplingProtocol", "sampleSizeValue",
    "sampleSizeUnit", "samplingEffort", "habitat", "eventRemarks", "fieldNotes",
    # Occurrence
    "occurrenceID", "recordedBy", "individualCount", "organismQuantity", "organismQuantityType",
    "occurrenceStatus", "occurrenceRemarks",
    # Location
    "locationID", "locality", "decimalLatitude", "decimalLongitude", "geodeticDatum",
    "coordinateUncertaintyInMeters", "footprintWKT",
    # Taxon
    "scientificName", "vernacularName", "taxonID",
    # MeasurementOrFact
    "measurementID", "measurementType", "measurementValue", "measurementUnit", "measurementMethod",
    "measurementRemarks",
}
# Darwin Core text guide: the archive namespace, and rowType = the class IRI of the rows
TEXT_NS = "{http://rs.tdwg.org/dwc/text/}"
ROW_TYPES = {"http://rs.tdwg.org/dwc/terms/Event", "http://rs.tdwg.org/dwc/terms/Occurrence",
             # GBIF/OBIS extended measurement-or-fact extension row type (from memory)
             "http://rs.iobis.org/obis/terms/ExtendedMeasurementOrFact"}

RECORDS = ("station,date,observers,status,notes,ANEMNE:count,CALLUV:cover,PRIMUL:frequency/25,"
           "SUCCIS:pin_hits/10,cov:soil_moisture[%]\n"
           "Q01,2021-05-03,OB1;OB2,done,\"wet, windy\",12,35.5,7,3,31.5\n"
           "Q02,2021-05-04,OB1,done,,0,0,0,0,\n"
           "Q03,2021-05-04,,missed,gate locked,,,,,\n")


@pytest.fixture()
def programme(tmp_path):
    path = tmp_path / "season.csv"
    path.write_text(RECORDS, encoding="utf-8")
    rec = read_field_records(path)
    # WGS 84 / UTM zone 32N (EPSG:32632): easting 500000 lies on the central meridian 9 deg E by the UTM
    # definition (false easting 500 km on the central meridian), so longitudes there are exactly 9.
    stations = pd.DataFrame({
        "station": ["Q01", "Q02", "Q03"], "site": ["S1", "S1", "S2"],
        "x": [500000.0, 500120.0, 503000.0], "y": [5500040.0, 5500080.0, 5501000.0], "epsg": [32632] * 3,
        "accuracy_m": [0.5, 3.0, None], "quadrat_area_m2": [0.25, 0.25, 1.0],
    })
    species = pd.DataFrame({
        "species": ["ANEMNE", "CALLUV", "PRIMUL", "SUCCIS"],
        "scientific_name": ["Anemona inventa", "Callunella fictiva", "Primula imaginaria", "Succisa ficta"],
        "common_name": ["made-up anemone", None, None, None],
        "measure": ["count", "cover", "frequency", "pin_hits"], "n": [None, None, 25, 10],
        "sensitive": [False, False, True, False],
    })
    sites = pd.DataFrame({"site": ["S1", "S2"], "name": ["North Fen", "Stream Meadow"], "habitat": ["fen", "meadow"]})
    meta = ProgrammeMetadata(code="INVRES", title="Invented Reserve quadrats", abstract="Invented programme.",
                             creator="Team Alpha", organisation="Invented Trust", email="team@example.org")
    return rec, stations, species, sites, meta


def _table(zf, name):
    text = zf.read(name).decode("utf-8")
    lines = text.rstrip("\n").split("\n")
    header = lines[0].split("\t")
    return header, [dict(zip(header, line.split("\t"), strict=True)) for line in lines[1:]]


def test_tidy_csv_rfc4180_and_missing_not_zero(tmp_path, programme):
    rec = programme[0]
    paths = write_tidy_csv(rec.visits, rec.observations, tmp_path / "out", covariates=rec.covariates)
    raw = paths["visits"].read_bytes()
    # RFC 4180 sect. 2 rule 1: records end in CRLF; rule 6: a field with a comma is enclosed in quotes
    assert raw.count(b"\r\n") == 4 and b'"wet, windy"' in raw
    rows = list(csv.DictReader(io.StringIO(raw.decode("utf-8"), newline="")))
    assert [r["status"] for r in rows] == ["done", "done", "missed"]
    assert rows[0]["observers"] == "OB1;OB2" and rows[0]["notes"] == "wet, windy"
    obs = list(csv.DictReader(io.StringIO(paths["observations"].read_text(encoding="utf-8"), newline="")))
    assert len(obs) == 8 and not any(r["station"] == "Q03" for r in obs)
    assert {r["value"] for r in obs if r["station"] == "Q02"} == {"0"}
    assert [r["n"] for r in obs if r["measure"] == "frequency"] == ["25", "25"]


def test_dwca_meta_xml_structure_and_terms(tmp_path, programme):
    rec, stations, species, sites, meta = programme
    path = write_dwca(tmp_path / "dwca.zip", metadata=meta, stations=stations, species=species, visits=rec.visits,
                      observations=rec.observations, sites=sites, covariates=rec.covariates)
    assert DWC_VERSION == "2023-09-18"
    with zipfile.ZipFile(path) as zf:
        assert set(zf.namelist()) == {"meta.xml", "eml.xml", "event.txt", "occurrence.txt",
                                      "extendedmeasurementorfact.txt"}
        root = etree.fromstring(zf.read("meta.xml"))
        # text guide: root <archive> in the dwc/text namespace, exactly one <core>, extensions after it
        assert root.tag == TEXT_NS + "archive" and root.get("metadata") == "eml.xml"
        children = [c.tag for c in root]
        assert children[0] == TEXT_NS + "core" and children.count(TEXT_NS + "core") == 1
        assert set(children[1:]) == {TEXT_NS + "extension"}
        for el in root:
            assert el.get("rowType") in ROW_TYPES
            assert el.get("encoding") == "UTF-8" and el.get("ignoreHeaderLines") == "1"
            # text guide: "\t" in fieldsTerminatedBy means a tab
            assert el.get("fieldsTerminatedBy") == "\\t"
            location = el.find(TEXT_NS + "files/" + TEXT_NS + "location").text
            id_el = el.find(TEXT_NS + ("id" if el.tag == TEXT_NS + "core" else "coreid"))
            assert id_el is not None and id_el.get("index") == "0"
            header, _ = _table(zf, location)
            fields = el.findall(TEXT_NS + "field")
            # every column described once, at the index it has in the file, with a Darwin Core term IRI
            assert sorted(int(f.get("index")) for f in fields) == list(range(len(header)))
            for f in fields:
                term = f.get("term")
                assert term.startswith("http://rs.tdwg.org/dwc/terms/")
                local = term.rsplit("/", 1)[1]
                assert local in DWC_TERMS_2023_09_18, local
                assert header[int(f.get("index"))] == local
        ext_types = {el.get("rowType") for el in root.findall(TEXT_NS + "extension")}
        assert ext_types == ROW_TYPES - {"http://rs.tdwg.org/dwc/terms/Event"}


def test_dwca_event_hierarchy_and_occurrences(tmp_path, programme):
    rec, stations, species, sites, meta = programme
    path = write_dwca(tmp_path / "dwca.zip", metadata=meta, stations=stations, species=species, visits=rec.visits,
                      observations=rec.observations, sites=sites, covariates=rec.covariates)
    with zipfile.ZipFile(path) as zf:
        _, events = _table(zf, "event.txt")
        _, occurrences = _table(zf, "occurrence.txt")
        _, facts = _table(zf, "extendedmeasurementorfact.txt")
    by_id = {e["eventID"]: e for e in events}
    assert len(by_id) == len(events)  # identifiers unique
    sites_ev = [e for e in events if not e["parentEventID"]]
    stations_ev = [e for e in events if e["parentEventID"] in {s["eventID"] for s in sites_ev}]
    visits_ev = [e for e in events if e["eventDate"]]
    assert len(sites_ev) == 2 and len(stations_ev) == 3 and len(visits_ev) == 3
    for v in visits_ev:
        assert by_id[v["parentEventID"]] in stations_ev
    for o in occurrences:
        assert o["eventID"] in by_id and by_id[o["eventID"]]["eventDate"]
        # Darwin Core occurrenceStatus: "present" or "absent"
        assert o["occurrenceStatus"] in {"present", "absent"}
        assert o["basisOfRecord"] == "HumanObservation"
    missed = [v for v in visits_ev if "missed" in v["eventRemarks"]]
    assert len(missed) == 1 and not any(o["eventID"] == missed[0]["eventID"] for o in occurrences)
    q2 = [o for o in occurrences if ":Q02:" in o["eventID"]]
    assert len(q2) == 4 and {o["occurrenceStatus"] for o in q2} == {"absent"}
    count = next(o for o in occurrences if ":Q01:" in o["eventID"] and o["occurrenceID"].endswith("ANEMNE:count"))
    assert count["organismQuantity"] == "12" and count["organismQuantityType"] == "individuals"
    assert count["individualCount"] == "12" and count["scientificName"] == "Anemona inventa"
    # eMoF: cover 1 row, frequency k and n, pin hits k and n, per done visit; plus covariates
    q1_facts = [f for f in facts if ":Q01:" in f["eventID"]]
    kinds = sorted(f["measurementType"] for f in q1_facts)
    assert kinds == sorted(["cover", "occupied grid cells", "grid cells", "pins touching", "pins in frame",
                            "soil_moisture"])
    cover = next(f for f in q1_facts if f["measurementType"] == "cover")
    assert cover["measurementValue"] == "35.5" and cover["measurementUnit"] == "%"
    visit_q1 = next(v for v in visits_ev if ":Q01:" in v["eventID"])
    assert visit_q1["recordedBy"] == "OB1 | OB2"  # Darwin Core recommends " | " between list items
    assert visit_q1["sampleSizeValue"] == "0.25" and visit_q1["sampleSizeUnit"] == "square metre"


def test_dwca_sensitive_species_generalised(tmp_path, programme):
    rec, stations, species, sites, meta = programme
    path = write_dwca(tmp_path / "dwca.zip", metadata=meta, stations=stations, species=species, visits=rec.visits,
                      observations=rec.observations, sites=sites, generalise_m=1000)
    with zipfile.ZipFile(path) as zf:
        _, events = _table(zf, "event.txt")
        _, occurrences = _table(zf, "occurrence.txt")
    station_ev = {e["locationID"].split(":")[-1]: e for e in events if e["parentEventID"] and not e["eventDate"]}
    # PRIMUL (sensitive) is present at Q01 only (value 7); Q02 recorded it absent
    q1, q2 = station_ev["Q01"], station_ev["Q02"]
    assert "generalised" in q1["dataGeneralizations"] and q2["dataGeneralizations"] == ""
    from pyproj import Transformer

    to_wgs = Transformer.from_crs(32632, 4326, always_xy=True)
    lon_true, lat_true = to_wgs.transform(500000.0, 5500040.0)
    # UTM definition: easting 500000 is the central meridian, 9 deg E
    assert lon_true == pytest.approx(9.0, abs=1e-9)
    lat, lon = float(q1["decimalLatitude"]), float(q1["decimalLongitude"])
    # moved to the 1 km cell centre (500500, 5500500): hundreds of metres away, yet within the stated uncertainty
    moved = _haversine(lat_true, lon_true, lat, lon)
    assert 300 < moved <= float(q1["coordinateUncertaintyInMeters"])
    # the unprotected station keeps its position: Q02 at easting 500120 is ~120 m east of 9 deg E
    lon2_true, lat2_true = to_wgs.transform(500120.0, 5500080.0)
    assert float(q2["decimalLongitude"]) == pytest.approx(lon2_true, abs=2e-6)
    assert all("generalised" in o["dataGeneralizations"] for o in occurrences if ":Q01:" in o["eventID"])
    # every visit event of Q01 carries the generalised position too
    for e in events:
        if e["eventDate"] and ":Q01:" in e["eventID"]:
            assert (e["decimalLatitude"], e["decimalLongitude"]) == (q1["decimalLatitude"], q1["decimalLongitude"])


def test_eml_from_programme_metadata(tmp_path, programme):
    rec, stations, species, sites, meta = programme
    species = species.assign(sensitive=False)  # nothing generalised, so Q01 stays on 9 deg E exactly
    path = write_dwca(tmp_path / "dwca.zip", metadata=meta, stations=stations, species=species, visits=rec.visits,
                      observations=rec.observations)
    with zipfile.ZipFile(path) as zf:
        eml = etree.fromstring(zf.read("eml.xml"))
    # EML 2.1.1 (Jones et al., KNB): root eml:eml with packageId and system; dataset/title, creator, contact
    assert eml.tag == "{eml://ecoinformatics.org/eml-2.1.1}eml" and eml.get("packageId") == "INVRES"
    ds = eml.find("dataset")
    assert ds.findtext("title") == "Invented Reserve quadrats"
    assert ds.find("creator/organizationName").text == "Invented Trust"
    assert ds.find("contact/electronicMailAddress").text == "team@example.org"
    dates = ds.find("coverage/temporalCoverage/rangeOfDates")
    assert dates.findtext("beginDate/calendarDate") == "2021-05-03"
    assert dates.findtext("endDate/calendarDate") == "2021-05-04"
    box = ds.find("coverage/geographicCoverage/boundingCoordinates")
    west, east = float(box.findtext("westBoundingCoordinate")), float(box.findtext("eastBoundingCoordinate"))
    assert west <= 9.0 < east


def _haversine(lat1, lon1, lat2, lon2):
    # haversine on a sphere of radius 6371 km (mean Earth radius, IUGG)
    p1, p2 = math.radians(lat1), math.radians(lat2)
    a = math.sin((p2 - p1) / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(math.radians(lon2 - lon1) / 2) ** 2
    return 2 * 6_371_000 * math.asin(math.sqrt(a))


def test_visit_without_station_is_refused(tmp_path, programme):
    rec, stations, species, sites, meta = programme
    from monitor.errors import InputError

    with pytest.raises(InputError, match="Q03"):
        write_dwca(tmp_path / "x.zip", metadata=meta, stations=stations.iloc[:2], species=species,
                   visits=rec.visits, observations=rec.observations)
    assert dt.date(2021, 5, 3) in set(rec.visits["date"])
