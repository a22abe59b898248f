"""Canonical column names and units: the project's glossary.

Every DataFrame passed between layers uses these names.  Importers map a user's
headers onto them in one table (``monitor.io``); nothing downstream guesses.
"""

from __future__ import annotations

# --- identifiers -------------------------------------------------------------
PROGRAMME = "programme"      # programme code
SITE = "site"                # site code
STRATUM = "stratum"          # stratum code within a site (optional)
REGION = "region"            # the programme's own grouping of sites (optional; a property of each site)
STATION = "station"          # permanent quadrat code, unique in a programme
LINEAGE = "lineage"          # first station of a relocation chain: a moved quadrat continues its series
TRANSECT = "transect"        # transect code (stations laid along a line)
SPECIES = "species"          # species code
MEASURE = "measure"          # one of MEASURES below
OBSERVER = "observer"        # observer code (or ';'-joined codes for a visit)
PANEL = "panel"              # revisit panel code
PROTOCOL = "protocol"        # protocol version code

# --- time ----------------------------------------------------------------------
YEAR = "year"                # survey season (calendar year) [integer]
DATE = "date"                # visit date [ISO 8601 date]
VISIT_STATUS = "status"      # one of VISIT_STATUSES

# --- values, one set per measure ------------------------------------------------
COUNT = "count"              # individuals (or ramets) in the quadrat [non-negative integer]
COVER = "cover_pct"          # percent of quadrat area covered, 0-100 [%]
OCCUPIED = "occupied"        # gridded frequency: cells occupied, k [integer, 0 <= k <= n]
CELLS = "cells"              # gridded frequency: cells in the grid, n [integer > 0], often 25
HITS = "hits"                # point frame: pins touching the species, k [integer, 0 <= k <= n]
PINS = "pins"                # point frame: pins in the frame, n [integer > 0], often 10
PRESENT = "present"          # presence [0/1]
HEIGHT = "height_cm"         # mean shoot height in the quadrat [cm, > 0]

# --- geometry -------------------------------------------------------------------
X = "x"                      # easting [m], projected CRS of the programme
Y = "y"                      # northing [m]
DISTANCE = "distance_m"      # distance along a transect from its start [m]
AREA = "area_m2"             # area [m^2]
QUADRAT_WIDTH = "quadrat_width_m"    # quadrat side [m]
QUADRAT_LENGTH = "quadrat_length_m"  # quadrat side [m]
QUADRAT_AREA = "quadrat_area_m2"     # quadrat area [m^2] = width * length

# --- vocabularies ---------------------------------------------------------------
MEASURE_COUNT = "count"
MEASURE_COVER = "cover"
MEASURE_FREQUENCY = "frequency"   # k of n grid cells occupied
MEASURE_PIN_HITS = "pin_hits"     # k of n point-frame pins touching
MEASURE_PRESENCE = "presence"
MEASURE_SHOOT_HEIGHT = "shoot_height"   # mean shoot height [cm]
# The measures themselves (value columns, ranges, units, wording, families, estimators, exports) are
# the registry in monitor/measures.py; MEASURES (every code, in registry order) and MEASURE_COLUMNS
# (code -> its value columns in a long analysis table) are read from it on first use.


def __getattr__(name: str):
    if name in ("MEASURES", "MEASURE_COLUMNS"):
        from monitor import measures
        return measures.codes() if name == "MEASURES" else {c: m.columns for c, m in measures.REGISTRY.items()}
    raise AttributeError(f"module 'monitor.columns' has no attribute {name!r}")


STATUS_DONE = "done"
STATUS_PARTIAL = "partial"
STATUS_MISSED = "missed"
STATUS_INACCESSIBLE = "inaccessible"
VISIT_STATUSES = (STATUS_DONE, STATUS_PARTIAL, STATUS_MISSED, STATUS_INACCESSIBLE)
# visits that carry observations; missed/inaccessible visits never do (missing is not zero)
STATUSES_WITH_VALUES = (STATUS_DONE, STATUS_PARTIAL)

# how a station's position was chosen; "targeted" stations are flagged in analyses
PLACEMENT_RANDOM = "random"
PLACEMENT_STRATIFIED = "stratified"
PLACEMENT_BALANCED = "balanced"
PLACEMENT_SYSTEMATIC = "systematic"
PLACEMENT_TRANSECT = "transect"
PLACEMENT_TARGETED = "targeted"
PLACEMENTS = (
    PLACEMENT_RANDOM,
    PLACEMENT_STRATIFIED,
    PLACEMENT_BALANCED,
    PLACEMENT_SYSTEMATIC,
    PLACEMENT_TRANSECT,
    PLACEMENT_TARGETED,
)

# --- trend calls ----------------------------------------------------------------
CALL_RISING = "rising"
CALL_DECLINING = "declining"
CALL_STABLE = "stable"
CALL_UNCLEAR = "unclear"
CALLS = (CALL_RISING, CALL_DECLINING, CALL_STABLE, CALL_UNCLEAR)
