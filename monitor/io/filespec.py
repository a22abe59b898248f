"""The files a programme is set up and run from: one definition each, used by the readers and the docs.

Every column (or key) of every file the tool reads is one :class:`Field` here: its name, type, unit,
allowed values, whether it is required, an example and what it means.  The readers take their
required and optional columns (and their fixed vocabularies) from these definitions, ``monitor setup
blank`` writes its example files from them, and ``docs/files.md`` is generated from them
(:func:`reference_markdown`; a test fails when the committed page and these definitions differ).
"""

from __future__ import annotations

from dataclasses import dataclass

from monitor import columns as C
from monitor import measures
from monitor.io import headers as H
from monitor.settings import (
    DEFAULT_CHANGE_MARGIN,
    DEFAULT_PROTOCOL_DESCRIPTION,
    DEFAULT_SETUP_MINUTES,
    FIELD_PACKS_OUTSIDE,
    GENERALISE_M,
    TRIGGER_KINDS,
)

# the vocabulary of management events (the events reader refuses any other kind)
EVENT_KINDS = ("grazing", "cutting", "mowing", "burning", "flooding", "drought", "scrub_clearance",
               "herbicide", "trampling", "other")
YES_NO = ("yes", "no")


@dataclass(frozen=True)
class Field:
    """One column of a table file, or one key of a JSON file."""

    name: str
    type: str                       # text, code, number, whole number, date, month-day, yes/no, ...
    required: bool
    example: str
    meaning: str
    unit: str = ""
    allowed: tuple[str, ...] = ()


@dataclass(frozen=True)
class FileSpec:
    """One file the tool reads."""

    key: str                         # the kind, as in: monitor setup KIND FILE
    name: str                        # the file's name in a set-up folder (or a usual name)
    form: str                        # "CSV or .xlsx", "GeoJSON", "JSON"
    purpose: str
    fields: tuple[Field, ...]
    read_by: str                     # the command that reads it
    notes: tuple[str, ...] = ()

    def required(self) -> list[str]:
        return [f.name for f in self.fields if f.required]

    def optional(self) -> list[str]:
        return [f.name for f in self.fields if not f.required]

    def field(self, name: str) -> Field:
        for f in self.fields:
            if f.name == name:
                return f
        raise KeyError(name)

    def example_row(self) -> dict[str, str]:
        return {f.name: f.example for f in self.fields}


F = Field

def _trials_words() -> str:
    """"Cells (frequency) or pins (pin_hits)", from the registry's k-of-n measures."""
    words = [f"{m.trials} ({m.code})" for m in measures.REGISTRY.values() if m.needs_n]
    return (" or ".join(words))[:1].upper() + (" or ".join(words))[1:]


_EXAMPLE_SPECIES = ("MARVIO", "GLASED", "HEABEL", "SILGRA", "CAREXA", "DROSPA", "LUZULA")


def _header_examples() -> str:
    """One example field-sheet header per measure, e.g. `HEABEL:frequency/25` (cells of 25)."""
    out = []
    for species, m in zip(_EXAMPLE_SPECIES * 4, measures.REGISTRY.values(), strict=False):
        if m.needs_n:
            n = 25 if m.trials == "cells" else 10
            out.append(f"`{m.header(species, n)}` ({m.trials} of {n})")
        else:
            out.append(f"`{m.header(species)}` ({m.rule.unit})")
    return ", ".join(out)


PROGRAMME = FileSpec(
    "programme", "programme.json", "JSON",
    "The programme: its name, coordinate system, default quadrat size, time zone, settings and protocols.",
    (
        F("code", "code", True, "HVR", "Short code of the programme (unique in the database)."),
        F("name", "text", True, "Hollowmere Vale Reserve plant monitoring", "Name printed on reports."),
        F("crs_epsg", "EPSG code", True, "32630",
          "Projected coordinate system of every x/y and site boundary, in metres (e.g. 32630, 27700)."),
        F("description", "text", False, "Permanent quadrats across four sites", "What the programme monitors."),
        F("organisation", "text", False, "Hollowmere Vale Trust", "Who runs it (printed on reports)."),
        F("contact", "text", False, "monitoring officer", "Who to ask (printed on reports)."),
        F("time_zone", "IANA time zone", False, "Europe/London",
          "Time zone of the field days (calendar files); default UTC."),
        F("default_quadrat_width_m", "number > 0", False, "1.0", "Quadrat width when a station gives none.", "m"),
        F("default_quadrat_length_m", "number > 0", False, "1.0", "Quadrat length when a station gives none.", "m"),
        F("blanks_mean_zero", "true/false", False, "false",
          "Whether a blank value cell on a field sheet means zero (otherwise: not recorded)."),
        F("allow_lone_working", "true/false", False, "false",
          "Whether a team of one may be planned (follow your organisation's lone-working policy)."),
        F("change_margin", "fraction a year, above 0, below 1", False, f"{DEFAULT_CHANGE_MARGIN:g}",
          "The margin of annual change that matters to management (a trend inside it is 'stable').",
          "fraction a year"),
        F("settings", "object", False, '{"minutes_per_quadrat": {"count": 6}, "triggers": [...]}',
          "Further settings (see the settings keys below), checked when the file is read."),
        F("protocols", "list of objects", False,
          '[{"code": "P1", "description": "10-pin frame", "effective_from": "2015-01-01"}]',
          "Protocol versions with the date each took effect, and optionally the measures a version "
          'changed ("measures": ["frequency"]): the report notes a change only on those measures.'),
    ),
    "monitor setup all FOLDER",
)

SETTINGS = FileSpec(
    "settings", "programme.json: settings", "JSON",
    "The programme's further settings; every key may be left out (its default applies). A value of the "
    "wrong kind is refused naming the key, when the file is read and whenever the stored settings are used.",
    (
        F("minutes_per_quadrat", "object: measure -> number >= 0", False, '{"count": 6, "cover": 4}',
          "Minutes to record one species' measure in one quadrat, for the season planner; measures left out "
          "take the planner's defaults.", "min"),
        F("setup_minutes", "number >= 0", False, f"{DEFAULT_SETUP_MINUTES:g}",
          f"Minutes per station for relocating, marking and photographs (default {DEFAULT_SETUP_MINUTES:g}).", "min"),
        F("covariate_units", "object: name -> text", False, '{"soil_moisture": "%"}',
          "Visit covariates recorded on field sheets, with their units."),
        F("required_covariates", "list of names", False, '["soil_moisture"]',
          "Covariates every visit must carry (quality check); default: every covariate with a unit."),
        F("triggers", "list of objects", False, "[...]", "Management triggers (see the trigger keys below)."),
        F("generalise_m", "number > 0", False, f"{GENERALISE_M:g}",
          "Grid cell to whose centre stations of sensitive species are moved in exports, report maps and "
          f"outside crews' field packs (default {GENERALISE_M:g}).", "m"),
        F(FIELD_PACKS_OUTSIDE, "true/false", False, "false",
          "Whether field packs are for crews from outside the programme (sensitive stations generalised)."),
        F("email", "text", False, "monitoring@example.org", "Contact address in exported archives' metadata."),
        F("licence", "text", False, "CC-BY-4.0", "Licence of exported archives."),
        F("protocol_description", "text", False, DEFAULT_PROTOCOL_DESCRIPTION,
          "The protocol named in exported archives' metadata."),
    ),
    "monitor setup all FOLDER",
)

TRIGGER = FileSpec(
    "trigger", "programme.json: settings.triggers[]", "JSON",
    "A management trigger agreed in advance: the threshold, and the response if it is crossed.",
    (
        F("species", "code", True, "MARVIO", "Species code the trigger watches."),
        F("measure", "choice", True, "count", "Measure of that species.", allowed=C.MEASURES),
        F("kind", "choice", True, "decline",
          "decline: a fall of more than threshold over years; upper_bound_below: the upper 95% bound of "
          "the annual change is below threshold (a decline is established).", allowed=TRIGGER_KINDS),
        F("threshold", "number", True, "0.4",
          "decline: share lost (0.4 = 40%); upper_bound_below: annual change (0 = any decline).", "fraction"),
        F("years", "whole number >= 1", False, "10", "decline only: the years the fall is counted over.",
          "years"),
        F("objective", "text", True, "Keep the marsh violetwort in Stream Meadow", "The management objective."),
        F("response", "text", True, "Review the autumn grazing with the grazier", "The response agreed."),
    ),
    "monitor report YEAR",
)

SITES = FileSpec(
    "sites", "sites.geojson", "GeoJSON",
    "Site boundaries: a FeatureCollection of Polygon or MultiPolygon features in the programme's "
    "projected CRS (a `crs` member naming it, e.g. \"EPSG:32630\"). The fields are each feature's properties.",
    (
        F("code", "code", True, "SM", "Site code (unique)."),
        F(H.NAME, "text", False, "Stream Meadow", "Site name, printed beside the code."),
        F(H.HABITAT, "text", False, "wet grassland", "Habitat description."),
        F(C.AREA, "number > 0", False, "109200", "Area; computed from the boundary when blank.", "m²"),
        F(H.ACCESS_UNTIL, "date", False, "2030-12-31",
          "The access agreement ends on this date; planning holds the site back after it."),
    ),
    "monitor setup sites FILE",
)

STATIONS = FileSpec(
    "stations", "stations.csv", "CSV or .xlsx",
    "The permanent quadrats (stations), one row each.",
    (
        F(C.STATION, "code", True, "SM-01", "Station code (unique); the header may also be `code`."),
        F(C.SITE, "code", True, "SM", "Code of the site it lies in (the position must be inside)."),
        F(C.X, "number", True, "512210.0", "Easting in the CRS (crs_epsg, or the row's epsg).", "m"),
        F(C.Y, "number", True, "5742010.0", "Northing.", "m"),
        F(C.QUADRAT_WIDTH, "number > 0", True, "1.0", "Quadrat width.", "m"),
        F(C.QUADRAT_LENGTH, "number > 0", True, "1.0", "Quadrat length.", "m"),
        F(H.PLACEMENT, "choice", True, "random", "How the position was chosen.", allowed=C.PLACEMENTS),
        F(H.EPSG, "EPSG code", False, "", "CRS of this row's x/y when not the programme's."),
        F(H.FIX_METHOD, "text", False, "handheld GPS", "How the position was fixed."),
        F(H.ACCURACY, "number >= 0", False, "3.0", "Stated accuracy of the fix.", "m"),
        F(C.TRANSECT, "code", False, "", "Transect code, as written on the ground (kept as typed)."),
        F(C.DISTANCE, "number >= 0", False, "", "Distance along the transect (needs a transect).", "m"),
        F(C.PANEL, "code", False, "ANNUAL", "Revisit panel (a code of panels.csv)."),
        F(H.ESTABLISHED, "date", False, "2024-04-10", "Date the station was set out."),
        F(H.MARKER, "text", False, "steel pin at SW corner", "What marks it on the ground."),
        F(H.RELOCATION_NOTES, "text", False, "5 m at bearing 000 from the fence post",
          "How to find it again."),
        F(C.STRATUM, "code", False, "", "Left blank: strata are set by `monitor design place SITE --method stratified`."),
        F(H.RETIRED, "date", False, "", "Date it was retired; blank while in service."),
        F(H.RETIRED_REASON, "text", False, "", "Why it was retired."),
        F(H.REPLACED_BY, "code", False, "", "Station that replaces it (in this file or the programme)."),
    ),
    "monitor setup stations FILE",
)

SPECIES = FileSpec(
    "species", "species.csv", "CSV or .xlsx",
    "The target species and the measure recorded for each.",
    (
        F(C.SPECIES, "code", True, "MARVIO", "Species code (unique); the header may also be `code`."),
        F(H.SCIENTIFIC_NAME, "text", True, "Viola paludicola", "Scientific name."),
        F(C.MEASURE, "choice", True, "count", "What is recorded in each quadrat.", allowed=C.MEASURES),
        F(H.COMMON_NAME, "text", False, "marsh violetwort", "Common name, printed beside the code."),
        F(H.N, "whole number > 0", False, "",
          _trials_words() + " per quadrat; required for those, blank otherwise."),
        F(H.SENSITIVE, "yes/no", False, "no", "Yes: positions are generalised in exports.", allowed=YES_NO),
        F(H.WINDOW_START, "month-day", False, "05-01", "Start of the species' season window (MM-DD)."),
        F(H.WINDOW_END, "month-day", False, "07-15", "End of the window (MM-DD); both or neither."),
    ),
    "monitor setup species FILE",
)

PANELS = FileSpec(
    "panels", "panels.csv", "CSV or .xlsx",
    "Revisit panels: which years a group of stations is visited.",
    (
        F(C.PANEL, "code", True, "ANNUAL", "Panel code (unique); the header may also be `code`."),
        F(H.RULE, "revisit rule", True, "[1-0]",
          "[a-b]: visited a years in a row, then rested b years (McDonald 2003); [1-0] every year, "
          "[1-3] every fourth year."),
        F(H.START_YEAR, "year", False, "2024", "First year of the rule; required when the rule rests."),
    ),
    "monitor setup panels FILE",
)

WINDOWS = FileSpec(
    "windows", "windows.csv", "CSV or .xlsx",
    "Season windows: when visits may be made, for the whole programme or one species.",
    (
        F(H.SCOPE, "'programme' or species code", True, "programme", "What the window applies to."),
        F(H.START, "month-day", True, "05-01", "First day (MM-DD); a window may wrap the new year."),
        F(H.END, "month-day", True, "09-15", "Last day (MM-DD)."),
        F(C.YEAR, "year", False, "", "Only this year; blank for every year."),
    ),
    "monitor setup windows FILE",
)

OBSERVERS = FileSpec(
    "observers", "observers.csv", "CSV or .xlsx",
    "The register of observers (codes used on field sheets).",
    (
        F(C.OBSERVER, "code", True, "OBS01", "Observer code (unique, no ';' or ','); the header may be `code`."),
        F(H.NAME, "text", True, "A. Surveyor", "Name."),
        F(H.TRAINED, "date", False, "2024-04-12", "Date of training or calibration."),
    ),
    "monitor setup observers FILE",
)

EVENTS = FileSpec(
    "events", "management_events.csv", "CSV or .xlsx",
    "Management events (grazing, cutting, ...) at a site or a station; shown on the report where they apply.",
    (
        F("kind", "choice", True, "grazing", "What was done.", allowed=EVENT_KINDS),
        F("start_date", "date", True, "2024-09-01", "First day."),
        F(C.SITE, "code", False, "SM", "Site code (a site or a station is needed)."),
        F(C.STATION, "code", False, "", "Station code, for an event at one station."),
        F("end_date", "date", False, "2024-10-31", "Last day (not before the start)."),
        F("notes", "text", False, "sheep, light grazing", "Notes."),
    ),
    "monitor setup events FILE",
)

RECORDS = FileSpec(
    "records", "field records (any name).csv", "CSV or .xlsx",
    "A season's field records, one row per station visit (the entry sheet of a field pack), with one "
    "value column per species and measure.",
    (
        F(C.STATION, "code", True, "SM-01", "Station code."),
        F(C.DATE, "date", True, "2024-06-12", "Date of the visit (ISO; DD/MM/YYYY only when unambiguous)."),
        F(C.VISIT_STATUS, "choice", True, "done", "Outcome of the visit; values only with done or partial.",
          allowed=C.VISIT_STATUSES),
        F(H.OBSERVERS, "codes", False, "OBS01;OBS02", "Observer codes, separated by ';'."),
        F(H.REPEAT, "yes/no", False, "no", "A deliberate second visit in the same round.", allowed=YES_NO),
        F(C.PROTOCOL, "code", False, "P1", "Protocol version (default: the one in force on the date)."),
        F(H.NOTES, "text", False, "ground wet", "Notes."),
        F("SPECIES:measure", "number", False, "12",
          "One column per species and measure: " + _header_examples() + ". Blank = not "
          "recorded; 0 = recorded absent."),
        F("cov:NAME[UNIT]", "number", False, "31", "A covariate measured at the visit, e.g. `cov:soil_moisture[%]`."),
    ),
    "monitor records import FILE",
    ("The long layout is also read: the visit columns above plus `species`, `measure`, `value` and, for "
     f"{' and '.join(measures.k_of_n_codes())}, `n` (one row per station, date, species and measure).",),
)

RECORDS_LONG_EXTRA = (C.SPECIES, C.MEASURE, H.VALUE)

CREWS = FileSpec(
    "crews", "crews.json", "JSON",
    "Teams for planning a season (`monitor season plan YEAR --crews FILE`).",
    (
        F("teams", "list of objects", True, '[{"code": "A", "members": ["OBS01", "OBS02"]}]',
          "The teams (keys below)."),
        F("start_points", "object", False, '{"SM": [511985, 5741990]}',
          "Where a team starts at each site: site code -> [easting, northing] in metres.", "m"),
        F("day_start", "time HH:MM", False, "08:30", "When the working day starts; default 09:00."),
        F("blocked_dates", "list of dates", False, '["2024-06-21"]', "Days nobody works."),
        F("path_factor", "number >= 1", False, "1.2", "Walking distance over straight-line distance; default 1."),
    ),
    "monitor season plan YEAR --crews FILE",
)

CREW_TEAM = FileSpec(
    "crew team", "crews.json: teams[]", "JSON",
    "One team of a crews file.",
    (
        F("code", "code", True, "A", "Team code."),
        F("members", "list of codes or names", True, '["OBS01", "OBS02"]', "Who is in it."),
        F("hours_per_day", "number > 0", False, "7", "Working hours a day; default 7.", "h"),
        F("walking_speed_kmh", "number > 0", False, "3", "Walking speed; default 3.", "km/h"),
        F("working_weekdays", "list of weekdays", False, '["mon", "tue", "wed", "thu", "fri"]',
          "Days of the week the team works; default Monday to Friday."),
        F("blocked_dates", "list of dates", False, '["2024-07-01"]', "Days this team does not work."),
    ),
    "monitor season plan YEAR --crews FILE",
)

# the set-up folder, in the order `monitor setup all` loads it
SETUP_FOLDER = (PROGRAMME, SITES, PANELS, STATIONS, SPECIES, WINDOWS, OBSERVERS, EVENTS)
ALL_FILES = SETUP_FOLDER + (SETTINGS, TRIGGER, RECORDS, CREWS, CREW_TEAM)
REQUIRED_IN_FOLDER = ("programme", "sites", "stations", "species")


# --- the reference page --------------------------------------------------------------------------
def _cell(text: str) -> str:
    return text.replace("|", "\\|").replace("\n", " ")


def reference_markdown() -> str:
    """docs/files.md: every file the tool reads, generated from these definitions."""
    lines = [
        "# The files monitor reads",
        "",
        "<!-- generated from monitor/io/filespec.py by `python -m monitor.io.filespec > docs/files.md`; "
        "tests/io/test_filespec.py fails when they differ -->",
        "",
        "Every column (or key) of every file the tool reads. Header names are case-blind; spaces, dashes and "
        "dots count as underscores. Dates are ISO `YYYY-MM-DD`; numbers use `.` as the decimal mark. "
        "CSV files may be UTF-8 or Windows-1252. `monitor setup blank FOLDER` writes the set-up files "
        "with these headers and one example row each.",
        "",
    ]
    for spec in ALL_FILES:
        where = " (required in a set-up folder)" if spec.key in REQUIRED_IN_FOLDER else ""
        lines += [f"## {spec.name}{where}", "", f"{spec.form}. {spec.purpose} Read by `{spec.read_by}`.", ""]
        lines += ["| column | type | unit | allowed values | required | example | meaning |",
                  "|---|---|---|---|---|---|---|"]
        for f in spec.fields:
            lines.append("| " + " | ".join(_cell(v) for v in (
                f"`{f.name}`", f.type, f.unit, ", ".join(f.allowed), "yes" if f.required else "no",
                f"`{f.example}`" if f.example else "", f.meaning)) + " |")
        lines.append("")
        for note in spec.notes:
            lines += [note, ""]
    return "\n".join(lines)


if __name__ == "__main__":  # pragma: no cover - the way docs/files.md is regenerated
    print(reference_markdown(), end="")
