"""Readers for the files that set a programme up: sites, stations, species, panels, seasons, observers.

Each reader returns a canonical DataFrame (column names from :mod:`monitor.columns` and
:mod:`monitor.io.headers`) or raises :class:`monitor.errors.InputError` carrying every problem found,
one line each naming file, row, field, value and what was expected.

Standards followed:

* GeoJSON per RFC 7946 (Butler et al. 2016).  RFC 7946 coordinates are WGS84 longitude/latitude; a
  projected boundary file is the pre-RFC "GeoJSON 2008" usage with a named ``crs`` member, which we
  accept (sect. 4 of RFC 7946 allows prior arrangement between parties) because the programme's
  boundaries are surveyed in a projected CRS in metres.
* Revisit rules in the notation of McDonald (2003), ``[a-b]``: visit ``a`` consecutive years, then rest
  ``b`` years; ``[1-0]`` is every year, ``[1-3]`` every fourth year.

References
----------
McDonald, T. L. (2003). Review of environmental monitoring methods: survey designs. Environmental
Monitoring and Assessment 85, 277-292.
Butler, H. et al. (2016). The GeoJSON Format. IETF RFC 7946.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import os
import re
from pathlib import Path

import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.errors import InputError, InputProblem
from monitor.io import filespec as FS
from monitor.io import headers as H
from monitor.io._tables import (
    Problems,
    RawTable,
    check_columns,
    file_label,
    get,
    parse_bool,
    parse_date,
    parse_int,
    parse_month_day,
    parse_number,
    read_raw_table,
)

# --- CRS ---------------------------------------------------------------------------------------------
_EPSG_RE = re.compile(r"^(?:urn:ogc:def:crs:)?epsg:{1,2}(?:[\d.]*:)?(\d+)$", re.IGNORECASE)


def parse_epsg(value: object) -> int | None:
    """An EPSG code from 27700, '27700', 'EPSG:27700' or 'urn:ogc:def:crs:EPSG::27700'; None otherwise."""
    if isinstance(value, bool):
        return None
    if isinstance(value, int):
        return value if value > 0 else None
    if isinstance(value, float) and value.is_integer() and value > 0:
        return int(value)
    if not isinstance(value, str):
        return None
    text = value.strip()
    if text.isdigit():
        return int(text)
    m = _EPSG_RE.match(text)
    return int(m[1]) if m else None


def projected_crs_problem(epsg: int) -> str | None:
    """None if the EPSG code is a projected CRS with axes in metres, else what is wrong (one phrase)."""
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    try:
        crs = CRS.from_epsg(epsg)
    except CRSError:
        return "a known EPSG code"
    if not crs.is_projected:
        return f"a projected CRS in metres; EPSG:{epsg} ({crs.name}) is not projected"
    units = {axis.unit_name for axis in crs.axis_info}
    if units != {"metre"}:
        return f"a projected CRS in metres; EPSG:{epsg} ({crs.name}) has units {', '.join(sorted(units))}"
    return None


def _crs_from_geojson(doc: dict) -> object:
    crs = doc.get("crs")
    if crs is None:
        return None
    if isinstance(crs, dict):
        props = crs.get("properties")
        if isinstance(props, dict) and "name" in props:
            return props["name"]
        if "epsg" in crs:
            return crs["epsg"]
    return crs


# --- sites -------------------------------------------------------------------------------------------
SITE_COLUMNS = [C.SITE, H.NAME, H.HABITAT, C.AREA, H.ACCESS_UNTIL, H.EPSG, H.GEOMETRY]


def read_sites_geojson(source: str | os.PathLike[str], *, epsg: int | None = None) -> pd.DataFrame:
    """Read site boundaries from a GeoJSON FeatureCollection of Polygon / MultiPolygon features.

    Parameters
    ----------
    source : path
        GeoJSON file.  Properties: ``code`` (required, unique), ``name``, ``habitat``, ``area_m2``
        (computed from the geometry when absent), ``access_until`` (ISO date).
    epsg : int, optional
        EPSG code of the projected CRS in metres.  Required unless the file has a ``crs`` member; when
        both are given they must agree.

    Returns
    -------
    DataFrame with columns site, name, habitat, area_m2 [m^2], access_until (date or None), epsg,
    geometry (shapely).  Rows are in file order; the row number in messages is the feature number.
    """
    from shapely.geometry import shape
    from shapely.validation import explain_validity

    path = Path(source)
    file = file_label(path)
    problems = Problems(file)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputError(InputProblem(file, None, None, None, f"a readable file ({exc.strerror})")) from None
    if not data.strip():
        raise InputError(InputProblem(file, None, None, None, "a GeoJSON FeatureCollection; the file is empty"))
    try:
        doc = json.loads(data.decode("utf-8-sig"))  # RFC 7946 sect. 11: UTF-8
    except UnicodeDecodeError:
        raise InputError(InputProblem(file, None, None, None, "UTF-8 text (RFC 7946 section 11)")) from None
    except json.JSONDecodeError as exc:
        raise InputError(InputProblem(file, exc.lineno, None, exc.msg, "valid JSON (RFC 8259)")) from None
    if not isinstance(doc, dict) or doc.get("type") != "FeatureCollection":
        got = doc.get("type") if isinstance(doc, dict) else type(doc).__name__
        raise InputError(InputProblem(file, None, "type", got, "a GeoJSON FeatureCollection (RFC 7946 section 3.3)"))
    features = doc.get("features")
    if not isinstance(features, list) or not features:
        raise InputError(InputProblem(file, None, "features", None, "a non-empty list of features"))

    file_crs = _crs_from_geojson(doc)
    file_epsg = parse_epsg(file_crs) if file_crs is not None else None
    if file_crs is not None and file_epsg is None:
        problems.add(None, "crs", file_crs, "an EPSG code such as 'EPSG:27700'")
    chosen = epsg if epsg is not None else file_epsg
    if epsg is not None and file_epsg is not None and epsg != file_epsg:
        problems.add(None, "crs", f"EPSG:{file_epsg}", f"the same CRS as given (EPSG:{epsg})")
    if chosen is None and file_crs is None:
        problems.add(None, "crs", None, "a projected CRS as an EPSG code: a 'crs' member or the epsg argument "
                                        "(RFC 7946 WGS84 longitude/latitude cannot give areas in m^2)")
    elif chosen is not None:
        why = projected_crs_problem(chosen)
        if why:
            problems.add(None, "crs", f"EPSG:{chosen}", why)

    records = []
    seen: dict[str, int] = {}
    for number, feature in enumerate(features, start=1):
        if not isinstance(feature, dict) or feature.get("type") != "Feature":
            problems.add(number, "type", feature.get("type") if isinstance(feature, dict) else feature,
                         "a Feature (RFC 7946 section 3.2)")
            continue
        props = feature.get("properties") or {}
        if not isinstance(props, dict):
            problems.add(number, "properties", props, "an object of properties")
            continue
        props = {H.canonical_header(str(k)): v for k, v in props.items()}
        code = props.get(H.CODE, props.get(C.SITE))
        code = str(code).strip() if code is not None else ""
        if not code:
            problems.add(number, "code", None, "a site code in properties.code")
        elif code in seen:
            problems.add(number, "code", code, f"a unique site code (also feature {seen[code]})")
        else:
            seen[code] = number
        geometry_doc = feature.get("geometry")
        geometry = None
        gtype = geometry_doc.get("type") if isinstance(geometry_doc, dict) else None
        if gtype not in ("Polygon", "MultiPolygon"):
            problems.add(number, "geometry", gtype, "a Polygon or MultiPolygon (RFC 7946 sections 3.1.6-3.1.7)")
        else:
            try:
                geometry = shape(geometry_doc)
            except Exception as exc:  # noqa: BLE001 - shapely raises several types for bad coordinates
                problems.add(number, "geometry", type(exc).__name__,
                             "coordinates as linear rings of [x, y] positions (RFC 7946 section 3.1.6)")
                geometry = None
            if geometry is not None:
                if geometry.is_empty:
                    problems.add(number, "geometry", "empty", "a non-empty polygon")
                    geometry = None
                elif not geometry.is_valid:
                    problems.add(number, "geometry", explain_validity(geometry),
                                 "a valid polygon (OGC simple features: rings closed, not self-intersecting)")
                    geometry = None
        area = props.get(C.AREA)
        if area is not None and area != "":
            value = parse_number(str(area))
            if value is None or value <= 0:
                problems.add(number, "area_m2", area, "an area in m^2 greater than 0")
                area = None
            else:
                area = value
        else:
            area = float(geometry.area) if geometry is not None else None
        access = props.get(H.ACCESS_UNTIL)
        access_date = None
        if access not in (None, ""):
            access_date, why = parse_date(str(access))
            if access_date is None:
                problems.add(number, "access_until", access, "an ISO date YYYY-MM-DD")
        records.append({
            C.SITE: code, H.NAME: _text_or_none(props.get(H.NAME)), H.HABITAT: _text_or_none(props.get(H.HABITAT)),
            C.AREA: area, H.ACCESS_UNTIL: access_date, H.EPSG: chosen, H.GEOMETRY: geometry,
        })
    problems.raise_if_any()
    frame = pd.DataFrame(records, columns=SITE_COLUMNS)
    frame.attrs["epsg"] = chosen
    frame.attrs["file"] = file
    return frame


def _text_or_none(value: object) -> str | None:
    if value is None:
        return None
    text = str(value).strip()
    return text or None


# --- generic register reading -------------------------------------------------------------------------
def _open(source: str | os.PathLike[str]) -> tuple[RawTable, Problems]:
    table = read_raw_table(source)
    return table, table.problems()


def _unique_codes(table: RawTable, key: str, problems: Problems) -> dict[str, int]:
    seen: dict[str, int] = {}
    for number, cells in table.rows:
        code = get(table, cells, key)
        if not code:
            problems.add(number, table.raw_name(key) if key in table.headers else key, None, "a code")
        elif code in seen:
            problems.add(number, table.raw_name(key), code, f"a unique code (also on row {seen[code]})")
        else:
            seen[code] = number
    return seen


def _register_key(table: RawTable, own: str) -> None:
    """Registers accept 'code' for their key column (e.g. a stations file with 'code' for 'station')."""
    if own not in table.headers and H.CODE in table.headers:
        table.headers[table.headers.index(H.CODE)] = own


def _number(table: RawTable, cells: list[str], number: int, name: str, problems: Problems, *,
            required: bool, positive: bool = False, minimum: float | None = None) -> float | None:
    text = get(table, cells, name)
    if not text:
        if required:
            problems.add(number, table.raw_name(name) if name in table.headers else name, None, "a number")
        return None
    value = parse_number(text)
    if value is None:
        problems.add(number, table.raw_name(name), text, "a number with '.' as decimal mark, |x| <= 1e12")
        return None
    if positive and value <= 0:
        problems.add(number, table.raw_name(name), text, "a number greater than 0")
        return None
    if minimum is not None and value < minimum:
        problems.add(number, table.raw_name(name), text, f"a number >= {minimum:g}")
        return None
    return value


def _date(table: RawTable, cells: list[str], number: int, name: str, problems: Problems) -> dt.date | None:
    text = get(table, cells, name)
    if not text:
        return None
    value, why = parse_date(text)
    if value is None:
        problems.add(number, table.raw_name(name), text, why or "a date")
    return value


# --- stations ------------------------------------------------------------------------------------------
STATION_REQUIRED = FS.STATIONS.required()   # the one definition of the file (docs/files.md is made from it)
STATION_OPTIONAL = FS.STATIONS.optional()
STATION_COLUMNS = STATION_REQUIRED[:4] + [H.EPSG, H.FIX_METHOD, H.ACCURACY, C.QUADRAT_WIDTH, C.QUADRAT_LENGTH,
                                          C.QUADRAT_AREA, H.PLACEMENT, C.TRANSECT, C.DISTANCE, C.PANEL,
                                          H.ESTABLISHED, H.MARKER, H.RELOCATION_NOTES, C.STRATUM, H.RETIRED,
                                          H.RETIRED_REASON, H.REPLACED_BY, "source_row"]


def read_stations_csv(source: str | os.PathLike[str], *, sites: pd.DataFrame | None = None,
                      epsg: int | None = None) -> pd.DataFrame:
    """Read permanent quadrats (stations) from CSV or .xlsx.

    Required columns: station (or code), site, x, y [m], quadrat_width_m, quadrat_length_m (> 0),
    placement (one of monitor.columns.PLACEMENTS).  Optional: epsg (per row), fix_method, accuracy_m,
    transect, distance_m, panel, established, marker, relocation_notes, stratum, retired,
    retired_reason, replaced_by.

    When ``sites`` (from :func:`read_sites_geojson`) is given, each station's site must exist and the
    station must lie inside (or on) its site boundary, after transforming its coordinates to the sites'
    CRS with pyproj when the two CRS differ.  The CRS of a row is its epsg cell, else ``epsg``, else the
    sites' CRS.
    """
    table, problems = _open(source)
    _register_key(table, C.STATION)
    if check_columns(table, STATION_REQUIRED, STATION_OPTIONAL, problems):
        problems.raise_if_any()
    _unique_codes(table, C.STATION, problems)
    site_epsg = sites.attrs.get("epsg") if sites is not None else None
    site_geoms = dict(zip(sites[C.SITE], sites[H.GEOMETRY], strict=True)) if sites is not None else {}
    checked_epsg: dict[int, str | None] = {}
    transformers: dict[int, object] = {}
    records = []
    for number, cells in table.rows:
        raw = table.raw_name
        rec: dict[str, object] = {"source_row": number, C.STATION: get(table, cells, C.STATION)}
        site = get(table, cells, C.SITE)
        rec[C.SITE] = site
        if not site:
            problems.add(number, raw(C.SITE), None, "a site code")
        elif sites is not None and site not in site_geoms:
            problems.add(number, raw(C.SITE), site, _closest("a site in the sites file", site, site_geoms))
        x = _number(table, cells, number, C.X, problems, required=True)
        y = _number(table, cells, number, C.Y, problems, required=True)
        row_epsg: int | None = None
        epsg_text = get(table, cells, H.EPSG)
        if epsg_text:
            row_epsg = parse_epsg(epsg_text)
            if row_epsg is None:
                problems.add(number, raw(H.EPSG), epsg_text, "an EPSG code such as 27700 or EPSG:27700")
        row_epsg = row_epsg or epsg or site_epsg
        if row_epsg is None:
            problems.add(number, raw(H.EPSG) if H.EPSG in table.headers else "epsg", None,
                         "the CRS of x/y as an EPSG code (a column, the epsg argument, or the sites file)")
        else:
            if row_epsg not in checked_epsg:
                checked_epsg[row_epsg] = projected_crs_problem(row_epsg)
            if checked_epsg[row_epsg]:
                problems.add(number, raw(H.EPSG) if H.EPSG in table.headers else "epsg", f"EPSG:{row_epsg}",
                             checked_epsg[row_epsg] or "")
                row_epsg = None
        rec[C.X], rec[C.Y], rec[H.EPSG] = x, y, row_epsg
        width = _number(table, cells, number, C.QUADRAT_WIDTH, problems, required=True, positive=True)
        length = _number(table, cells, number, C.QUADRAT_LENGTH, problems, required=True, positive=True)
        rec[C.QUADRAT_WIDTH], rec[C.QUADRAT_LENGTH] = width, length
        rec[C.QUADRAT_AREA] = width * length if width and length else None
        placement = get(table, cells, H.PLACEMENT).lower()
        if placement not in C.PLACEMENTS:
            problems.add(number, raw(H.PLACEMENT), get(table, cells, H.PLACEMENT),
                         _closest(f"one of {', '.join(C.PLACEMENTS)}", placement, C.PLACEMENTS))
        rec[H.PLACEMENT] = placement
        rec[H.ACCURACY] = _number(table, cells, number, H.ACCURACY, problems, required=False, minimum=0)
        rec[C.DISTANCE] = _number(table, cells, number, C.DISTANCE, problems, required=False, minimum=0)
        if rec[C.DISTANCE] is not None and not get(table, cells, C.TRANSECT):
            problems.add(number, raw(C.DISTANCE), get(table, cells, C.DISTANCE),
                         "a transect code beside a distance along a transect")
        for name in (H.FIX_METHOD, C.TRANSECT, C.PANEL, H.MARKER, H.RELOCATION_NOTES, C.STRATUM,
                     H.RETIRED_REASON, H.REPLACED_BY):
            rec[name] = get(table, cells, name) or None
        rec[H.ESTABLISHED] = _date(table, cells, number, H.ESTABLISHED, problems)
        rec[H.RETIRED] = _date(table, cells, number, H.RETIRED, problems)
        if rec[H.ESTABLISHED] and rec[H.RETIRED] and rec[H.RETIRED] < rec[H.ESTABLISHED]:
            problems.add(number, raw(H.RETIRED), rec[H.RETIRED].isoformat(), "a retirement on or after establishment")
        # inside its site?
        if (sites is not None and site in site_geoms and x is not None and y is not None and row_epsg
                and site_geoms[site] is not None and site_epsg):
            px, py = x, y
            if row_epsg != site_epsg:
                if row_epsg not in transformers:
                    from pyproj import Transformer

                    transformers[row_epsg] = Transformer.from_crs(row_epsg, site_epsg, always_xy=True)
                px, py = transformers[row_epsg].transform(x, y)
            from shapely.geometry import Point

            boundary = site_geoms[site]
            if not boundary.covers(Point(px, py)):
                distance = boundary.distance(Point(px, py))
                problems.add(number, f"{raw(C.X)}/{raw(C.Y)}", f"({x:g}, {y:g})",
                             f"a position inside site '{site}' (it lies {distance:.1f} m outside the boundary)")
        records.append(rec)
    codes = {r[C.STATION] for r in records}
    for rec in records:
        rep = rec[H.REPLACED_BY]
        if rep and rep not in codes:
            problems.add(rec["source_row"], table.raw_name(H.REPLACED_BY), rep, "a station code in this file")
    problems.raise_if_any()
    frame = pd.DataFrame(records, columns=STATION_COLUMNS)
    frame.attrs["file"] = table.file
    return frame


def _closest(expected: str, value: str, choices) -> str:
    import difflib

    close = difflib.get_close_matches(value, [str(c) for c in choices], n=3, cutoff=0.6)
    return expected + (f"; closest: {', '.join(close)}" if close else "")


# --- species -------------------------------------------------------------------------------------------
SPECIES_REQUIRED = FS.SPECIES.required()
SPECIES_OPTIONAL = FS.SPECIES.optional()
SPECIES_COLUMNS = [C.SPECIES, H.SCIENTIFIC_NAME, H.COMMON_NAME, C.MEASURE, H.N, H.SENSITIVE,
                   H.WINDOW_START, H.WINDOW_END, "source_row"]
MEASURES_WITH_N = measures.k_of_n_codes()   # from the registry (monitor/measures.py)


def read_species_csv(source: str | os.PathLike[str]) -> pd.DataFrame:
    """Read the species list: code, scientific_name, common_name, measure, n, sensitive, window_start/end.

    ``n`` (cells or pins, integer > 0) is required for frequency and pin_hits and must be blank
    otherwise; ``sensitive`` is yes/no (blank = no); windows are MM-DD, both or neither.
    """
    table, problems = _open(source)
    _register_key(table, C.SPECIES)
    if check_columns(table, SPECIES_REQUIRED, SPECIES_OPTIONAL, problems):
        problems.raise_if_any()
    _unique_codes(table, C.SPECIES, problems)
    records = []
    for number, cells in table.rows:
        raw = table.raw_name
        rec: dict[str, object] = {"source_row": number, C.SPECIES: get(table, cells, C.SPECIES)}
        why = H.species_code_problem(str(rec[C.SPECIES])) if rec[C.SPECIES] else None
        if why:
            problems.add(number, raw(C.SPECIES), rec[C.SPECIES], why)
        rec[H.SCIENTIFIC_NAME] = get(table, cells, H.SCIENTIFIC_NAME)
        if not rec[H.SCIENTIFIC_NAME]:
            problems.add(number, raw(H.SCIENTIFIC_NAME), None, "a scientific name")
        rec[H.COMMON_NAME] = get(table, cells, H.COMMON_NAME) or None
        measure = get(table, cells, C.MEASURE).lower().replace(" ", "_").replace("-", "_")
        if measure not in C.MEASURES:
            problems.add(number, raw(C.MEASURE), get(table, cells, C.MEASURE),
                         _closest(f"one of {', '.join(C.MEASURES)}", measure, C.MEASURES))
        rec[C.MEASURE] = measure
        n_text = get(table, cells, H.N)
        n = None
        if measure in MEASURES_WITH_N:
            n = parse_int(n_text) if n_text else None
            if n is None or n <= 0:
                problems.add(number, raw(H.N) if H.N in table.headers else "n", n_text or None,
                             f"a whole number of cells or pins > 0 for measure '{measure}'")
                n = None
        elif n_text:
            problems.add(number, raw(H.N), n_text, f"a blank n for measure '{measure}'")
        rec[H.N] = n
        sens = parse_bool(get(table, cells, H.SENSITIVE))
        if sens is None:
            problems.add(number, raw(H.SENSITIVE), get(table, cells, H.SENSITIVE), "yes or no")
        rec[H.SENSITIVE] = bool(sens)
        _window(table, cells, number, H.WINDOW_START, H.WINDOW_END, problems, rec)
        records.append(rec)
    problems.raise_if_any()
    frame = pd.DataFrame(records, columns=SPECIES_COLUMNS)
    frame[H.N] = frame[H.N].astype("Int64")
    frame.attrs["file"] = table.file
    return frame


def _window(table: RawTable, cells: list[str], number: int, start: str, end: str, problems: Problems,
            rec: dict, *, required: bool = False) -> None:
    values = {}
    for name in (start, end):
        text = get(table, cells, name)
        values[name] = parse_month_day(text) if text else None
        if text and values[name] is None:
            problems.add(number, table.raw_name(name), text, "a month-day MM-DD")
        elif not text and required:
            problems.add(number, table.raw_name(name) if name in table.headers else name, None, "a month-day MM-DD")
    if (values[start] is None) != (values[end] is None) and not required:
        missing = start if values[start] is None else end
        if get(table, cells, missing) == "":
            problems.add(number, table.raw_name(missing) if missing in table.headers else missing, None,
                         "both window ends or neither")
    rec[start], rec[end] = values[start], values[end]


# --- panels --------------------------------------------------------------------------------------------
_RULE_RE = re.compile(r"^\s*[\[(]?\s*(\d+)\s*-\s*(\d+)\s*[\])]?\s*$")


def parse_revisit_rule(text: str) -> tuple[int, int] | None:
    """``"[a-b]"`` -> (a, b): visited a consecutive years then rested b years (McDonald 2003).

    Also accepts ``(a-b)`` and bare ``a-b``.  ``a`` must be >= 1.  Returns None when not a rule.
    """
    m = _RULE_RE.match(text or "")
    if not m:
        return None
    a, b = int(m[1]), int(m[2])
    if a < 1 or a + b > 100:
        return None
    return a, b


def panel_due(visit_years: int, rest_years: int, start_year: int, year: int) -> bool:
    """True if a panel with rule [visit_years-rest_years] starting in start_year is visited in ``year``."""
    if year < start_year:
        return False
    return (year - start_year) % (visit_years + rest_years) < visit_years


PANEL_COLUMNS = [C.PANEL, H.RULE, H.VISIT_YEARS, H.REST_YEARS, H.START_YEAR, "source_row"]


def read_panels_csv(source: str | os.PathLike[str]) -> pd.DataFrame:
    """Read panels: code, rule (``[1-0]`` always, ``[1-3]`` every fourth year, ...), start_year.

    start_year is required whenever the rule rests (b > 0).
    """
    table, problems = _open(source)
    _register_key(table, C.PANEL)
    if check_columns(table, FS.PANELS.required(), FS.PANELS.optional(), problems):
        problems.raise_if_any()
    _unique_codes(table, C.PANEL, problems)
    records = []
    for number, cells in table.rows:
        raw = table.raw_name
        rule_text = get(table, cells, H.RULE)
        rule = parse_revisit_rule(rule_text)
        if rule is None:
            problems.add(number, raw(H.RULE), rule_text or None,
                         "a revisit rule [a-b] (McDonald 2003): a >= 1 years visited, b years rested, e.g. [1-0] or [1-3]")
            rule = (None, None)
        start_text = get(table, cells, H.START_YEAR)
        start = parse_int(start_text) if start_text else None
        if start_text and (start is None or not 1900 <= start <= 2200):
            problems.add(number, raw(H.START_YEAR), start_text, "a four-digit year")
            start = None
        elif not start_text and rule[1]:
            problems.add(number, raw(H.START_YEAR) if H.START_YEAR in table.headers else "start_year", None,
                         f"a start year for a rule that rests ({rule_text})")
        records.append({C.PANEL: get(table, cells, C.PANEL), H.RULE: rule_text, H.VISIT_YEARS: rule[0],
                        H.REST_YEARS: rule[1], H.START_YEAR: start, "source_row": number})
    problems.raise_if_any()
    frame = pd.DataFrame(records, columns=PANEL_COLUMNS)
    for name in (H.VISIT_YEARS, H.REST_YEARS, H.START_YEAR):
        frame[name] = frame[name].astype("Int64")
    frame.attrs["file"] = table.file
    return frame


# --- season windows ---------------------------------------------------------------------------------
WINDOW_COLUMNS = [H.SCOPE, C.YEAR, H.START, H.END, "source_row"]


def read_season_windows_csv(source: str | os.PathLike[str], *, species: pd.DataFrame | None = None) -> pd.DataFrame:
    """Read season windows: scope ('programme' or a species code), start and end as MM-DD, optional year.

    A window may wrap the new year (start after end).  With ``species`` given, species scopes must
    be known codes.  One window per scope and year (blank year = every year).
    """
    table, problems = _open(source)
    if check_columns(table, FS.WINDOWS.required(), FS.WINDOWS.optional(), problems):
        problems.raise_if_any()
    known = set(species[C.SPECIES]) if species is not None else None
    seen: dict[tuple[str, int | None], int] = {}
    records = []
    for number, cells in table.rows:
        raw = table.raw_name
        scope = get(table, cells, H.SCOPE)
        if scope.lower() == H.SCOPE_PROGRAMME:
            scope = H.SCOPE_PROGRAMME
        elif not scope:
            problems.add(number, raw(H.SCOPE), None, "'programme' or a species code")
        elif known is not None and scope not in known:
            problems.add(number, raw(H.SCOPE), scope, _closest("'programme' or a species code in the species list",
                                                               scope, sorted(known)))
        year_text = get(table, cells, C.YEAR)
        year = parse_int(year_text) if year_text else None
        if year_text and (year is None or not 1900 <= year <= 2200):
            problems.add(number, raw(C.YEAR), year_text, "a four-digit year or blank")
        key = (scope, year)
        if key in seen:
            problems.add(number, raw(H.SCOPE), scope, f"one window per scope and year (also row {seen[key]})")
        seen.setdefault(key, number)
        rec: dict[str, object] = {H.SCOPE: scope, C.YEAR: year, "source_row": number}
        _window(table, cells, number, H.START, H.END, problems, rec, required=True)
        records.append(rec)
    problems.raise_if_any()
    frame = pd.DataFrame(records, columns=WINDOW_COLUMNS)
    frame[C.YEAR] = frame[C.YEAR].astype("Int64")
    frame.attrs["file"] = table.file
    return frame


# --- observers -------------------------------------------------------------------------------------
OBSERVER_COLUMNS = [C.OBSERVER, H.NAME, H.TRAINED, "source_row"]


def read_observers_csv(source: str | os.PathLike[str]) -> pd.DataFrame:
    """Read the register of observers: code, name, trained (ISO date, optional)."""
    table, problems = _open(source)
    _register_key(table, C.OBSERVER)
    if C.OBSERVER not in table.headers and H.OBSERVERS in table.headers:
        table.headers[table.headers.index(H.OBSERVERS)] = C.OBSERVER
    if check_columns(table, FS.OBSERVERS.required(), FS.OBSERVERS.optional(), problems):
        problems.raise_if_any()
    _unique_codes(table, C.OBSERVER, problems)
    records = []
    for number, cells in table.rows:
        code = get(table, cells, C.OBSERVER)
        if ";" in code or "," in code:
            problems.add(number, table.raw_name(C.OBSERVER), code, "one observer code without ';' or ','")
        name = get(table, cells, H.NAME)
        if not name:
            problems.add(number, table.raw_name(H.NAME), None, "a name")
        records.append({C.OBSERVER: code, H.NAME: name,
                        H.TRAINED: _date(table, cells, number, H.TRAINED, problems), "source_row": number})
    problems.raise_if_any()
    frame = pd.DataFrame(records, columns=OBSERVER_COLUMNS)
    frame.attrs["file"] = table.file
    return frame


def station_area(width_m: float, length_m: float) -> float:
    """Quadrat area [m^2] = width * length."""
    if not (width_m > 0 and length_m > 0) or not math.isfinite(width_m * length_m):
        raise InputError(f"quadrat sides must be > 0 m, got {width_m!r} x {length_m!r}")
    return width_m * length_m
