"""Darwin Core Archive for sampling-event data: event core, occurrence and measurement extensions, EML.

Standard followed: the Darwin Core standard of TDWG (Wieczorek et al. 2012), terms as defined in the
Darwin Core term list version 2023-09-18 (namespace ``http://rs.tdwg.org/dwc/terms/``), and the
Darwin Core text guide for the archive (``meta.xml`` in namespace ``http://rs.tdwg.org/dwc/text/``, a
star schema of one core file and extension files joined on the core id).  Every term used here exists
with the same meaning in that version.

Events form a hierarchy through ``parentEventID``: a site event holds its station events (the
permanent quadrats); a station event holds one event per visit.  Occurrences belong to visit events;
``occurrenceStatus`` is ``present`` when the value is above zero and ``absent`` for a recorded zero
(missed and inaccessible visits have no occurrences: missing is not absence).  Quantities follow the
terms' definitions: ``organismQuantity`` with ``organismQuantityType`` ("individuals", "% cover",
"cells occupied of 25", "pins touching of 10"), and the extended measurement-or-fact extension carries
cover, frequency (k and n) and pin hits (k and n) with units, plus visit covariates.

Stations where a species flagged sensitive has been recorded present get generalised coordinates in
every event of the station: the projected position snapped to the centre of a grid cell
(``generalise_m`` metres, default 1000) before conversion to WGS84, with the uncertainty widened to
cover the cell and ``dataGeneralizations`` saying so (as that term's definition asks).

References
----------
Wieczorek, J., Bloom, D., Guralnick, R., Blum, S., Döring, M., Giovanni, R., Robertson, T. and
Vieglais, D. (2012). Darwin Core: an evolving community-developed biodiversity data standard.
PLoS ONE 7(1): e29715.
Darwin Core Maintenance Group (2023). Darwin Core List of Terms, version 2023-09-18. TDWG.
Darwin Core Task Group (2009, rev. 2023). Darwin Core Text Guide. TDWG.
"""

from __future__ import annotations

import datetime as dt
import math
import os
import zipfile
from dataclasses import dataclass
from pathlib import Path

import pandas as pd
from lxml import etree

from monitor import columns as C
from monitor import measures
from monitor.errors import InputError
from monitor.io import headers as H

DWC_VERSION = "2023-09-18"
DWC = "http://rs.tdwg.org/dwc/terms/"
DWC_TEXT_NS = "http://rs.tdwg.org/dwc/text/"
ROW_EVENT = DWC + "Event"
ROW_OCCURRENCE = DWC + "Occurrence"
ROW_EMOF = "http://rs.iobis.org/obis/terms/ExtendedMeasurementOrFact"
EML_NS = "eml://ecoinformatics.org/eml-2.1.1"

EVENT_TERMS = ["eventID", "parentEventID", "eventDate", "year", "month", "day", "samplingProtocol",
               "sampleSizeValue", "sampleSizeUnit", "recordedBy", "eventRemarks", "locationID", "locality",
               "habitat", "decimalLatitude", "decimalLongitude", "geodeticDatum", "coordinateUncertaintyInMeters",
               "dataGeneralizations"]
OCCURRENCE_TERMS = ["eventID", "occurrenceID", "basisOfRecord", "scientificName", "vernacularName",
                    "occurrenceStatus", "individualCount", "organismQuantity", "organismQuantityType",
                    "dataGeneralizations"]
EMOF_TERMS = ["eventID", "occurrenceID", "measurementID", "measurementType", "measurementValue",
              "measurementUnit", "measurementMethod"]

@dataclass(frozen=True)
class ProgrammeMetadata:
    """What eml.xml says about the programme (the dataset)."""

    code: str                       # short code, the prefix of every identifier
    title: str
    abstract: str
    creator: str                    # person or team responsible
    organisation: str
    email: str
    licence: str = "https://creativecommons.org/licenses/by/4.0/legalcode"
    language: str = "en"
    protocol: str = "permanent quadrat monitoring"
    geographic_description: str = ""


def _clean(value: object) -> str:
    """A cell for a tab-delimited file: no tabs or line breaks inside, None/NaN as empty."""
    if value is None or value is pd.NA:
        return ""
    if isinstance(value, float):
        if math.isnan(value):
            return ""
        return str(int(value)) if value.is_integer() else repr(value)
    return " ".join(str(value).replace("\t", " ").split())


def _write_table(zf: zipfile.ZipFile, name: str, terms: list[str], rows: list[dict]) -> None:
    lines = ["\t".join(terms)]
    for row in rows:
        lines.append("\t".join(_clean(row.get(t)) for t in terms))
    zf.writestr(name, ("\n".join(lines) + "\n").encode("utf-8"))


def _meta_xml(tables: list[tuple[str, str, list[str]]]) -> bytes:
    """meta.xml per the Darwin Core text guide: one core, extensions joined on coreid."""
    nsmap = {None: DWC_TEXT_NS}
    archive = etree.Element(f"{{{DWC_TEXT_NS}}}archive", nsmap=nsmap, metadata="eml.xml")
    for k, (location, row_type, terms) in enumerate(tables):
        tag = "core" if k == 0 else "extension"
        el = etree.SubElement(archive, f"{{{DWC_TEXT_NS}}}{tag}", encoding="UTF-8",
                              fieldsTerminatedBy="\\t", linesTerminatedBy="\\n", fieldsEnclosedBy="",
                              ignoreHeaderLines="1", rowType=row_type)
        files = etree.SubElement(el, f"{{{DWC_TEXT_NS}}}files")
        etree.SubElement(files, f"{{{DWC_TEXT_NS}}}location").text = location
        etree.SubElement(el, f"{{{DWC_TEXT_NS}}}{'id' if k == 0 else 'coreid'}", index="0")
        for index, term in enumerate(terms):
            etree.SubElement(el, f"{{{DWC_TEXT_NS}}}field", index=str(index), term=DWC + term)
    return etree.tostring(archive, xml_declaration=True, encoding="UTF-8", pretty_print=True)


def _eml_xml(meta: ProgrammeMetadata, bbox: tuple[float, float, float, float] | None,
             first: dt.date | None, last: dt.date | None) -> bytes:
    eml = etree.Element(f"{{{EML_NS}}}eml", nsmap={"eml": EML_NS}, packageId=meta.code, system="monitor",
                        scope="system")
    eml.set("{http://www.w3.org/XML/1998/namespace}lang", meta.language)
    ds = etree.SubElement(eml, "dataset")
    etree.SubElement(ds, "title").text = meta.title

    def party(tag: str) -> None:
        p = etree.SubElement(ds, tag)
        etree.SubElement(etree.SubElement(p, "individualName"), "surName").text = meta.creator
        etree.SubElement(p, "organizationName").text = meta.organisation
        etree.SubElement(p, "electronicMailAddress").text = meta.email

    party("creator")
    etree.SubElement(ds, "pubDate").text = dt.date.today().isoformat()
    etree.SubElement(ds, "language").text = meta.language
    etree.SubElement(etree.SubElement(ds, "abstract"), "para").text = meta.abstract
    etree.SubElement(etree.SubElement(ds, "intellectualRights"), "para").text = f"Licence: {meta.licence}"
    coverage = etree.SubElement(ds, "coverage")
    if bbox is not None:
        geo = etree.SubElement(coverage, "geographicCoverage")
        etree.SubElement(geo, "geographicDescription").text = meta.geographic_description or meta.title
        bounds = etree.SubElement(geo, "boundingCoordinates")
        west, south, east, north = bbox
        for tag, value in (("westBoundingCoordinate", west), ("eastBoundingCoordinate", east),
                           ("northBoundingCoordinate", north), ("southBoundingCoordinate", south)):
            etree.SubElement(bounds, tag).text = f"{value:.5f}"
    if first is not None and last is not None:
        dates = etree.SubElement(etree.SubElement(coverage, "temporalCoverage"), "rangeOfDates")
        etree.SubElement(etree.SubElement(dates, "beginDate"), "calendarDate").text = first.isoformat()
        etree.SubElement(etree.SubElement(dates, "endDate"), "calendarDate").text = last.isoformat()
    party("contact")
    methods = etree.SubElement(ds, "methods")
    step = etree.SubElement(etree.SubElement(methods, "methodStep"), "description")
    etree.SubElement(step, "para").text = meta.protocol
    return etree.tostring(eml, xml_declaration=True, encoding="UTF-8", pretty_print=True)


def write_dwca(path: str | os.PathLike[str], *, metadata: ProgrammeMetadata, stations: pd.DataFrame,
               species: pd.DataFrame, visits: pd.DataFrame, observations: pd.DataFrame,
               sites: pd.DataFrame | None = None, covariates: pd.DataFrame | None = None,
               generalise_m: float = 1000.0) -> Path:
    """Write a Darwin Core Archive (zip) of sampling-event data; return its path.

    Parameters
    ----------
    path : path
        The .zip to write.
    metadata : ProgrammeMetadata
        For eml.xml and identifiers.
    stations : DataFrame
        station, site, x, y [m], epsg, accuracy_m (optional), quadrat_area_m2.
    species : DataFrame
        species, scientific_name, common_name, measure, n, sensitive.
    visits, observations, covariates : DataFrame
        Canonical frames (``monitor.io.records``).
    sites : DataFrame, optional
        site, name, habitat (for the site events' locality and habitat).
    generalise_m : float
        Grid cell [m] for generalising stations where a sensitive species occurs.
    """
    from pyproj import Transformer

    if generalise_m <= 0:
        raise InputError(f"generalise_m must be > 0, got {generalise_m!r}")
    prefix = metadata.code
    species_info = {r[C.SPECIES]: r for r in species.to_dict("records")}
    station_info = {r[C.STATION]: r for r in stations.to_dict("records")}
    site_info = {r[C.SITE]: r for r in sites.to_dict("records")} if sites is not None else {}

    sensitive = {s for s, r in species_info.items() if bool(r.get(H.SENSITIVE))}
    generalised = set(observations.loc[observations[C.SPECIES].isin(sensitive) & (observations[H.VALUE] > 0),
                                       C.STATION]) if len(observations) else set()

    transformers: dict[int, Transformer] = {}

    def to_wgs84(x: float, y: float, epsg: int) -> tuple[float, float]:
        if epsg not in transformers:
            transformers[epsg] = Transformer.from_crs(int(epsg), 4326, always_xy=True)
        return transformers[epsg].transform(x, y)

    # station locations (generalised where needed)
    location: dict[str, dict] = {}
    for code, r in station_info.items():
        x, y, epsg = float(r[C.X]), float(r[C.Y]), int(r[H.EPSG])
        accuracy = r.get(H.ACCURACY)
        accuracy = 0.0 if accuracy is None or (isinstance(accuracy, float) and math.isnan(accuracy)) else float(accuracy)
        note = None
        if code in generalised:
            x = math.floor(x / generalise_m) * generalise_m + generalise_m / 2
            y = math.floor(y / generalise_m) * generalise_m + generalise_m / 2
            accuracy += generalise_m * math.sqrt(2) / 2
            note = (f"Coordinates generalised to the centre of a {generalise_m:g} m grid cell "
                    f"(EPSG:{epsg}) because a sensitive species occurs here; uncertainty widened to cover the cell.")
        lon, lat = to_wgs84(x, y, epsg)
        location[code] = {"decimalLatitude": round(lat, 6), "decimalLongitude": round(lon, 6),
                          "geodeticDatum": "EPSG:4326",
                          "coordinateUncertaintyInMeters": max(1, math.ceil(accuracy)) if accuracy else None,
                          "dataGeneralizations": note, "locationID": f"{prefix}:{code}"}

    events: list[dict] = []
    site_event: dict[str, str] = {}
    for site in sorted({r[C.SITE] for r in station_info.values()}):
        members = [location[s] for s, r in station_info.items() if r[C.SITE] == site]
        lat = sum(m["decimalLatitude"] for m in members) / len(members)
        lon = sum(m["decimalLongitude"] for m in members) / len(members)
        info = site_info.get(site, {})
        site_event[site] = f"{prefix}:{site}"
        spread = max(_metres(lat, lon, m["decimalLatitude"], m["decimalLongitude"]) for m in members)
        events.append({"eventID": site_event[site], "locationID": f"{prefix}:{site}",
                       "locality": info.get(H.NAME) or site, "habitat": info.get(H.HABITAT),
                       "decimalLatitude": round(lat, 3), "decimalLongitude": round(lon, 3),
                       "geodeticDatum": "EPSG:4326",
                       "coordinateUncertaintyInMeters": max(1000, math.ceil(spread + generalise_m)),
                       "dataGeneralizations": "Site centre rounded to 0.001 degree; uncertainty covers its stations.",
                       "samplingProtocol": metadata.protocol, "eventRemarks": "site"})
    station_event: dict[str, str] = {}
    for code, r in sorted(station_info.items()):
        station_event[code] = f"{site_event[r[C.SITE]]}:{code}"
        events.append({"eventID": station_event[code], "parentEventID": site_event[r[C.SITE]],
                       "samplingProtocol": metadata.protocol, "sampleSizeValue": r.get(C.QUADRAT_AREA),
                       "sampleSizeUnit": "square metre", "eventRemarks": "permanent quadrat", **location[code]})

    visit_event: dict[tuple[str, dt.date], str] = {}
    status_of: dict[tuple[str, dt.date], str] = {}
    for v in visits.sort_values([C.STATION, C.DATE]).to_dict("records"):
        code, date = v[C.STATION], v[C.DATE]
        if code not in station_event:
            raise InputError(f"visit to station {code!r} on {date} has no station in the stations table")
        event_id = f"{station_event[code]}:{date.isoformat()}"
        if event_id in visit_event.values():
            event_id += ":2"
        visit_event[(code, date)] = event_id
        status_of[(code, date)] = v[C.VISIT_STATUS]
        remarks = f"visit status: {v[C.VISIT_STATUS]}" + (f"; {v[H.NOTES]}" if v.get(H.NOTES) else "")
        events.append({"eventID": event_id, "parentEventID": station_event[code], "eventDate": date.isoformat(),
                       "year": date.year, "month": date.month, "day": date.day,
                       "samplingProtocol": v.get(C.PROTOCOL) or metadata.protocol,
                       "sampleSizeValue": station_info[code].get(C.QUADRAT_AREA), "sampleSizeUnit": "square metre",
                       "recordedBy": " | ".join(v.get(H.OBSERVERS) or ()), "eventRemarks": remarks,
                       **location[code]})

    occurrences: list[dict] = []
    measurements: list[dict] = []
    for o in observations.to_dict("records"):
        key = (o[C.STATION], o[C.DATE])
        if status_of.get(key) not in C.STATUSES_WITH_VALUES:
            continue  # missing is not absence: no occurrences for missed or inaccessible visits
        event_id = visit_event[key]
        info = species_info.get(o[C.SPECIES], {})
        measure, value = o[C.MEASURE], float(o[H.VALUE])
        n = o.get(H.N)
        n = None if n is None or n is pd.NA or (isinstance(n, float) and math.isnan(n)) else int(n)
        occurrence_id = f"{event_id}:{o[C.SPECIES]}:{measure}"
        row = {"eventID": event_id, "occurrenceID": occurrence_id, "basisOfRecord": "HumanObservation",
               "scientificName": info.get(H.SCIENTIFIC_NAME) or o[C.SPECIES],
               "vernacularName": info.get(H.COMMON_NAME),
               "occurrenceStatus": "present" if value > 0 else "absent",
               "dataGeneralizations": location[o[C.STATION]]["dataGeneralizations"]}
        # what each measure puts in the occurrence and in measurement-or-fact rows: the registry's mapping
        entry = measures.get(measure)
        if entry.kind == measures.KIND_COUNT:
            row.update(individualCount=int(value))
        if entry.dwc_quantity_type is not None:
            row.update(organismQuantity=value, organismQuantityType=entry.dwc_quantity_type.format(n=n))
        occurrences.append(row)
        facts: list[tuple[str, float | None, str, str]] = [
            (fact.type, value if fact.value == "value" else (float(n) if n else None), fact.unit,
             fact.method.format(n=n)) for fact in entry.dwc_facts]
        for k, (kind, fact_value, unit, method) in enumerate(facts, start=1):
            measurements.append({"eventID": event_id, "occurrenceID": occurrence_id,
                                 "measurementID": f"{occurrence_id}:m{k}", "measurementType": kind,
                                 "measurementValue": fact_value, "measurementUnit": unit,
                                 "measurementMethod": method})
    if covariates is not None:
        for c in covariates.to_dict("records"):
            key = (c[C.STATION], c[C.DATE])
            if key not in visit_event:
                continue
            measurements.append({"eventID": visit_event[key], "measurementID": f"{visit_event[key]}:cov:{c['name']}",
                                 "measurementType": c["name"], "measurementValue": float(c[H.VALUE]),
                                 "measurementUnit": c.get(H.UNIT), "measurementMethod": "visit covariate"})

    lats = [v["decimalLatitude"] for v in location.values()]
    lons = [v["decimalLongitude"] for v in location.values()]
    bbox = (min(lons), min(lats), max(lons), max(lats)) if lats else None
    dates = list(visits[C.DATE]) if len(visits) else []
    path = Path(path)
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED) as zf:
        _write_table(zf, "event.txt", EVENT_TERMS, events)
        _write_table(zf, "occurrence.txt", OCCURRENCE_TERMS, occurrences)
        _write_table(zf, "extendedmeasurementorfact.txt", EMOF_TERMS, measurements)
        zf.writestr("meta.xml", _meta_xml([("event.txt", ROW_EVENT, EVENT_TERMS),
                                           ("occurrence.txt", ROW_OCCURRENCE, OCCURRENCE_TERMS),
                                           ("extendedmeasurementorfact.txt", ROW_EMOF, EMOF_TERMS)]))
        zf.writestr("eml.xml", _eml_xml(metadata, bbox, min(dates) if dates else None, max(dates) if dates else None))
    return path


def _metres(lat1: float, lon1: float, lat2: float, lon2: float) -> float:
    """Great-circle distance [m] on a sphere of radius 6371 km (haversine)."""
    r = 6_371_000.0
    p1, p2 = math.radians(lat1), math.radians(lat2)
    dp, dl = p2 - p1, math.radians(lon2 - lon1)
    a = math.sin(dp / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(dl / 2) ** 2
    return 2 * r * math.asin(min(1.0, math.sqrt(a)))
