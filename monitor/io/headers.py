"""Canonical names for the files a user hands in, and the ONE table mapping header variants onto them.

Names that already live in :mod:`monitor.columns` are reused; the rest are defined here until the
glossary takes them over.  Every reader in :mod:`monitor.io` maps a user's header through
:data:`HEADER_ALIASES` and nothing else, so "Quadrat", "quadrat_code" and "station" all mean
:data:`monitor.columns.STATION` everywhere.
"""

from __future__ import annotations

import re

from monitor import columns as C

# --- names not (yet) in monitor.columns --------------------------------------------------------
CODE = "code"                      # code column of a register file, renamed to the register's own key
NAME = "name"                      # human-readable name
HABITAT = "habitat"                # habitat description of a site
ACCESS_UNTIL = "access_until"      # access agreement ends on this date [ISO date]
EPSG = "epsg"                      # EPSG code of a projected CRS in metres [integer]
GEOMETRY = "geometry"              # shapely geometry in the programme CRS
FIX_METHOD = "fix_method"          # how a position was fixed (GNSS, RTK, tape, map ...)
ACCURACY = "accuracy_m"            # stated horizontal accuracy of a fix [m]
PLACEMENT = "placement"            # one of monitor.columns.PLACEMENTS
ESTABLISHED = "established"        # date the station was set out [ISO date]
MARKER = "marker"                  # what marks the station on the ground
RELOCATION_NOTES = "relocation_notes"  # offsets, bearings, landmarks
RETIRED = "retired"                # date the station was retired [ISO date], blank if in service
RETIRED_REASON = "retired_reason"  # why it was retired
REPLACED_BY = "replaced_by"        # station code that replaces it
SCIENTIFIC_NAME = "scientific_name"
COMMON_NAME = "common_name"
N = "n"                            # cells or pins of a frequency / pin-hit measure [integer > 0]
SENSITIVE = "sensitive"            # location must be generalised in exports [bool]
WINDOW_START = "window_start"      # season window start [MM-DD]
WINDOW_END = "window_end"          # season window end [MM-DD]
RULE = "rule"                      # revisit rule in McDonald (2003) notation, e.g. "[1-3]"
START_YEAR = "start_year"          # first year of a revisit rule [integer]
VISIT_YEARS = "visit_years"        # years visited in a row in a revisit cycle
REST_YEARS = "rest_years"          # years rested in a row in a revisit cycle
SCOPE = "scope"                    # "programme" or a species code
START = "start"                    # [MM-DD]
END = "end"                        # [MM-DD]
TRAINED = "trained"                # date of training or calibration [ISO date]
OBSERVERS = "observers"            # tuple of observer codes of a visit
REPEAT = "repeat"                  # deliberate second visit in a round [bool]
NOTES = "notes"
VALUE = "value"                    # the recorded value in the measure's unit
UNIT = "unit"                      # unit of a covariate
SOURCE_ROW = "source_row"          # 1-based row in the file, header = row 1
SOURCE_FIELD = "source_field"      # header as written in the file
SOURCE_TEXT = "source_text"        # a value's cell as typed (echoed in messages: '11', not 11.0)

SCOPE_PROGRAMME = "programme"


#: what a species code may be, so that the field sheets can carry it in a ``CODE:measure`` column header:
#: a letter or digit, then letters, digits, '_', '-' or '.' (no space, ':', '/', ',', ';', quotes or brackets)
SHEET_CODE_RE = re.compile(r"^[^\W_][\w.\-]*$")
#: a species code that would read as the covariate prefix ``cov:`` in a sheet header
RESERVED_SPECIES_CODES = ("cov",)


def species_code_problem(code: str) -> str | None:
    """Why a species code cannot go into a sheet's ``CODE:measure`` header, or None when it can."""
    if not SHEET_CODE_RE.match(code) or len(code) > 40:
        return ("a species code of letters, digits, '_', '-' or '.' (at most 40, no spaces or ':'), "
                "so that the field sheets can carry it in a column header such as 'CODE:count'")
    if code.lower() in RESERVED_SPECIES_CODES:
        return f"a species code other than '{code}', which the sheets read as the covariate prefix 'cov:'"
    return None


def normalise_header(text: str) -> str:
    """Case-fold, trim, and turn runs of spaces, dashes and dots into one underscore."""
    text = text.replace("\ufeff", "").strip().lower()
    return re.sub(r"[\s\-.]+", "_", text)


# The ONE table: user header variant (normalised) -> canonical name.  Canonical names map to themselves.
HEADER_ALIASES: dict[str, str] = {
    # identifiers
    "code": CODE, "id": CODE,
    "station": C.STATION, "station_code": C.STATION, "quadrat": C.STATION, "quadrat_code": C.STATION,
    "plot": C.STATION, "plot_code": C.STATION,
    "site": C.SITE, "site_code": C.SITE,
    "stratum": C.STRATUM, "stratum_code": C.STRATUM,
    "transect": C.TRANSECT, "transect_code": C.TRANSECT, "line": C.TRANSECT,
    "panel": C.PANEL, "panel_code": C.PANEL,
    "species": C.SPECIES, "species_code": C.SPECIES, "taxon": C.SPECIES, "taxon_code": C.SPECIES,
    "measure": C.MEASURE, "method": C.MEASURE,
    "protocol": C.PROTOCOL, "protocol_version": C.PROTOCOL,
    # names
    "name": NAME, "site_name": NAME, "observer_name": NAME, "full_name": NAME,
    "habitat": HABITAT, "habitat_type": HABITAT,
    "scientific_name": SCIENTIFIC_NAME, "latin_name": SCIENTIFIC_NAME, "scientificname": SCIENTIFIC_NAME,
    "common_name": COMMON_NAME, "vernacular_name": COMMON_NAME, "english_name": COMMON_NAME,
    # geometry
    "x": C.X, "easting": C.X, "east": C.X,
    "y": C.Y, "northing": C.Y, "north": C.Y,
    "epsg": EPSG, "crs": EPSG, "srid": EPSG, "epsg_code": EPSG,
    "fix_method": FIX_METHOD, "fix": FIX_METHOD, "gps_method": FIX_METHOD,
    "accuracy_m": ACCURACY, "accuracy": ACCURACY, "precision_m": ACCURACY, "gps_accuracy_m": ACCURACY,
    "quadrat_width_m": C.QUADRAT_WIDTH, "width_m": C.QUADRAT_WIDTH, "quadrat_width": C.QUADRAT_WIDTH,
    "quadrat_length_m": C.QUADRAT_LENGTH, "length_m": C.QUADRAT_LENGTH, "quadrat_length": C.QUADRAT_LENGTH,
    "distance_m": C.DISTANCE, "distance": C.DISTANCE, "distance_along_m": C.DISTANCE,
    "area_m2": C.AREA, "area": C.AREA,
    "placement": PLACEMENT, "selection": PLACEMENT, "how_chosen": PLACEMENT,
    "established": ESTABLISHED, "established_date": ESTABLISHED, "date_established": ESTABLISHED,
    "marker": MARKER, "marker_type": MARKER,
    "relocation_notes": RELOCATION_NOTES, "relocation": RELOCATION_NOTES,
    "retired": RETIRED, "retired_date": RETIRED, "date_retired": RETIRED,
    "retired_reason": RETIRED_REASON, "retirement_reason": RETIRED_REASON,
    "replaced_by": REPLACED_BY, "replacement": REPLACED_BY,
    "access_until": ACCESS_UNTIL, "access_end": ACCESS_UNTIL,
    # species and windows
    "n": N, "cells": N, "pins": N, "grid_cells": N,
    "sensitive": SENSITIVE, "is_sensitive": SENSITIVE,
    "window_start": WINDOW_START, "season_start": WINDOW_START,
    "window_end": WINDOW_END, "season_end": WINDOW_END,
    "rule": RULE, "revisit_rule": RULE, "revisit": RULE,
    "start_year": START_YEAR, "first_year": START_YEAR,
    "scope": SCOPE, "applies_to": SCOPE,
    "start": START, "from": START, "end": END, "to": END, "until": END,
    "trained": TRAINED, "trained_date": TRAINED, "calibrated": TRAINED, "training_date": TRAINED,
    # visits
    "date": C.DATE, "visit_date": C.DATE, "survey_date": C.DATE,
    "observers": OBSERVERS, "observer": OBSERVERS, "recorders": OBSERVERS, "recorder": OBSERVERS,
    "surveyors": OBSERVERS, "surveyor": OBSERVERS,
    "status": C.VISIT_STATUS, "visit_status": C.VISIT_STATUS, "outcome": C.VISIT_STATUS,
    "repeat": REPEAT, "is_repeat": REPEAT,
    "notes": NOTES, "note": NOTES, "comments": NOTES, "remarks": NOTES,
    "value": VALUE, "val": VALUE,
}


def canonical_header(raw: str) -> str:
    """Map one header as written to its canonical name (unchanged, normalised, when not in the table)."""
    key = normalise_header(raw)
    return HEADER_ALIASES.get(key, key)
