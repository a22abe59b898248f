"""The programme database: SQLModel tables.

Integrity lives in the database as well as in Python: foreign keys (SQLite's
pragma is switched on at connect), unique keys and CHECK constraints on value
ranges.  No foreign key cascades a delete onto recorded observations: every
foreign key that points at a recorded row is ``ON DELETE RESTRICT``.

Constraint names follow one convention (``metadata.naming_convention``) so that
Alembic can alter tables on SQLite in batch mode.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import CheckConstraint, Column, ForeignKey, Index, Integer, MetaData, UniqueConstraint
from sqlmodel import Field, SQLModel

from monitor import columns as C
from monitor import measures
from monitor.settings import DEFAULT_CHANGE_MARGIN

NAMING_CONVENTION = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}
SQLModel.metadata = MetaData(naming_convention=NAMING_CONVENTION)
metadata = SQLModel.metadata


def utcnow() -> dt.datetime:
    """Now, in UTC, timezone-aware (every stored time is UTC)."""
    return dt.datetime.now(dt.UTC)


def _in(column: str, values: tuple[str, ...]) -> str:
    quoted = ", ".join(f"'{v}'" for v in values)
    return f"{column} IN ({quoted})"


def _fk(target: str, nullable: bool = False, index: bool = True) -> Column:
    """A RESTRICT foreign key: deleting a referenced row is refused, never cascaded."""
    return Column(Integer, ForeignKey(target, ondelete="RESTRICT"), nullable=nullable, index=index)


VISIT_STATUSES = C.VISIT_STATUSES
ROUND_STATUSES = ("planned", "open", "certified")
STATION_STATES = ("in_service", "retired", "lost")


class Programme(SQLModel, table=True):
    """A monitoring programme: one reserve's set of sites, stations and target species."""

    id: int | None = Field(default=None, primary_key=True)
    code: str = Field(unique=True, max_length=40)
    name: str
    description: str = ""
    organisation: str = ""
    contact: str = ""
    crs_epsg: int = Field(description="projected CRS of all x/y in metres")
    default_quadrat_width_m: float = 1.0
    default_quadrat_length_m: float = 1.0
    blanks_mean_zero: bool = False
    allow_lone_working: bool = False
    change_margin: float = Field(default=DEFAULT_CHANGE_MARGIN, description="margin of change that matters [fraction a year]")
    settings_json: str = Field(default="{}", description="further settings as JSON (effort, units, ...)")
    created_at: dt.datetime = Field(default_factory=lambda: utcnow())

    __table_args__ = (
        CheckConstraint("default_quadrat_width_m > 0", name="quadrat_width_positive"),
        CheckConstraint("default_quadrat_length_m > 0", name="quadrat_length_positive"),
        CheckConstraint("change_margin >= 0", name="margin_non_negative"),
    )


class Site(SQLModel, table=True):
    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    code: str = Field(max_length=40)
    name: str = ""
    habitat: str = ""
    area_m2: float
    boundary_geojson: str | None = Field(default=None, description="GeoJSON geometry in the programme CRS")
    base_x: float | None = Field(default=None, description="start point (car park / base) easting [m]")
    base_y: float | None = None
    access_until: dt.date | None = Field(default=None, description="landowner permission or permit valid until")
    access_notes: str = ""
    region: str | None = Field(default=None, max_length=40,
                               description="the programme's own grouping of sites for trends by region")

    __table_args__ = (
        UniqueConstraint("programme_id", "code", name="uq_site_programme_code"),
        CheckConstraint("area_m2 > 0", name="area_positive"),
    )


class Stratum(SQLModel, table=True):
    id: int | None = Field(default=None, primary_key=True)
    site_id: int = Field(sa_column=_fk("site.id"))
    code: str = Field(max_length=40)
    area_m2: float
    boundary_geojson: str | None = None

    __table_args__ = (
        UniqueConstraint("site_id", "code", name="uq_stratum_site_code"),
        CheckConstraint("area_m2 > 0", name="area_positive"),
    )


class Panel(SQLModel, table=True):
    """A revisit panel: its rule in revisit-design notation, e.g. "[1-0]" every year, "[1-3]" one in four."""

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    code: str = Field(max_length=40)
    rule: str = Field(description="revisit notation [visits-gap], e.g. [1-0] or [1-3]")
    start_year: int
    description: str = ""

    __table_args__ = (UniqueConstraint("programme_id", "code", name="uq_panel_programme_code"),)


class Station(SQLModel, table=True):
    """A permanent quadrat."""

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    code: str = Field(max_length=40)
    site_id: int = Field(sa_column=_fk("site.id"))
    stratum_id: int | None = Field(default=None, sa_column=_fk("stratum.id", nullable=True))
    panel_id: int | None = Field(default=None, sa_column=_fk("panel.id", nullable=True))
    placement: str = Field(description="how the position was chosen; 'targeted' is flagged in analyses")
    placement_seed: int | None = Field(default=None, description="seed of the placement run, if drawn")
    x: float
    y: float
    crs_epsg: int
    fix_method: str = Field(default="", description="e.g. 'GNSS RTK', 'handheld GPS', 'tape from marker'")
    accuracy_m: float | None = None
    quadrat_width_m: float
    quadrat_length_m: float
    transect: str | None = None
    distance_m: float | None = Field(default=None, description="distance along its transect [m]")
    established: dt.date | None = None
    state: str = "in_service"
    retired: dt.date | None = None
    retired_reason: str = ""
    replaced_by_id: int | None = Field(default=None, sa_column=_fk("station.id", nullable=True))
    marker: str = Field(default="", description="permanent marker, e.g. 'steel pin SW corner'")
    relocation_notes: str = Field(default="", description="offset and bearing from a landmark")

    __table_args__ = (
        UniqueConstraint("programme_id", "code", name="uq_station_programme_code"),
        CheckConstraint("quadrat_width_m > 0", name="quadrat_width_positive"),
        CheckConstraint("quadrat_length_m > 0", name="quadrat_length_positive"),
        CheckConstraint("accuracy_m IS NULL OR accuracy_m >= 0", name="accuracy_non_negative"),
        CheckConstraint("distance_m IS NULL OR distance_m >= 0", name="distance_non_negative"),
        CheckConstraint(_in("placement", C.PLACEMENTS), name="placement_known"),
        CheckConstraint(_in("state", STATION_STATES), name="state_known"),
        CheckConstraint("(state = 'in_service') = (retired IS NULL)", name="retired_has_date"),
    )


class Species(SQLModel, table=True):
    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    code: str = Field(max_length=40)
    scientific_name: str = ""
    common_name: str = ""
    sensitive: bool = Field(default=False, description="coordinates generalised in every export")

    __table_args__ = (UniqueConstraint("programme_id", "code", name="uq_species_programme_code"),)


class Measure(SQLModel, table=True):
    """The vocabulary of measures; rows are written by the first migration."""

    code: str = Field(primary_key=True, max_length=20)
    description: str
    unit: str
    needs_n: bool = Field(description="k of n: the record stores n (cells or pins)")


class Target(SQLModel, table=True):
    """What every visit records: a species and measure (with n cells or pins where it applies)."""

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    species_id: int = Field(sa_column=_fk("species.id"))
    measure: str = Field(sa_column=Column(ForeignKey("measure.code", ondelete="RESTRICT"), nullable=False))
    n: int | None = Field(default=None, description="cells in the grid or pins in the frame")

    __table_args__ = (
        UniqueConstraint("programme_id", "species_id", "measure", name="uq_target_programme_species_measure"),
        CheckConstraint(measures.target_n_check(), name="n_for_k_of_n"),
    )


class SeasonWindow(SQLModel, table=True):
    """When a plant can be recorded: programme-wide (species_id NULL) or per species (flowering).

    A window may wrap the new year (start after end, a southern summer); year NULL means every year.
    """

    __tablename__ = "season_window"

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    species_id: int | None = Field(default=None, sa_column=_fk("species.id", nullable=True))
    year: int | None = Field(default=None, description="this season only; NULL = every season")
    start_md: str = Field(max_length=5, description="MM-DD")
    end_md: str = Field(max_length=5, description="MM-DD")

    __table_args__ = (
        CheckConstraint("length(start_md) = 5 AND length(end_md) = 5", name="month_day_form"),
    )


class Round(SQLModel, table=True):
    """A survey round: one season's visits to the stations due."""

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    year: int
    window_start: dt.date
    window_end: dt.date
    status: str = "open"
    certified_by: str | None = None
    certified_at: dt.datetime | None = None

    __table_args__ = (
        UniqueConstraint("programme_id", "year", name="uq_round_programme_year"),
        CheckConstraint("window_start <= window_end", name="window_order"),
        CheckConstraint(_in("status", ROUND_STATUSES), name="status_known"),
    )


class Observer(SQLModel, table=True):
    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    code: str = Field(max_length=40)
    name: str = ""
    trained: dt.date | None = None
    calibrated: dt.date | None = None

    __table_args__ = (UniqueConstraint("programme_id", "code", name="uq_observer_programme_code"),)


class ProtocolVersion(SQLModel, table=True):
    __tablename__ = "protocol_version"

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    code: str = Field(max_length=40)
    description: str = ""
    effective_from: dt.date

    __table_args__ = (UniqueConstraint("programme_id", "code", name="uq_protocol_version_programme_code"),)


class ImportBatch(SQLModel, table=True):
    __tablename__ = "import_batch"

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    kind: str = Field(description="what was imported: records, sites, stations, ...")
    file_name: str
    content_hash: str = Field(max_length=64, description="sha256 of the file's bytes")
    row_count: int
    imported_by: str = ""
    imported_at: dt.datetime

    __table_args__ = (
        UniqueConstraint("programme_id", "kind", "content_hash", name="uq_import_batch_programme_kind_hash"),
        CheckConstraint("row_count >= 0", name="row_count_non_negative"),
    )


class Visit(SQLModel, table=True):
    """One visit of a station in a round.  repeat_no 0 is the visit; 1, 2, ... are marked repeats."""

    id: int | None = Field(default=None, primary_key=True)
    station_id: int = Field(sa_column=_fk("station.id"))
    round_id: int = Field(sa_column=_fk("round.id"))
    date: dt.date
    status: str
    repeat_no: int = 0
    protocol_id: int | None = Field(default=None, sa_column=_fk("protocol_version.id", nullable=True))
    notes: str = ""
    import_batch_id: int | None = Field(default=None, sa_column=_fk("import_batch.id", nullable=True))

    __table_args__ = (
        UniqueConstraint("station_id", "round_id", "repeat_no", name="uq_visit_station_round_repeat"),
        CheckConstraint(_in("status", VISIT_STATUSES), name="status_known"),
        CheckConstraint("repeat_no >= 0", name="repeat_non_negative"),
    )


class VisitObserver(SQLModel, table=True):
    __tablename__ = "visit_observer"

    visit_id: int = Field(sa_column=Column(Integer, ForeignKey("visit.id", ondelete="RESTRICT"), primary_key=True))
    observer_id: int = Field(
        sa_column=Column(Integer, ForeignKey("observer.id", ondelete="RESTRICT"), primary_key=True)
    )


class Observation(SQLModel, table=True):
    """One recorded value: a species and measure at a visit.  Zero is a recorded absence."""

    id: int | None = Field(default=None, primary_key=True)
    visit_id: int = Field(sa_column=_fk("visit.id"))
    species_id: int = Field(sa_column=_fk("species.id"))
    measure: str = Field(sa_column=Column(ForeignKey("measure.code", ondelete="RESTRICT"), nullable=False))
    value: float
    n: int | None = None

    __table_args__ = (
        UniqueConstraint("visit_id", "species_id", "measure", name="uq_observation_visit_species_measure"),
        # one per measure, from the registry (monitor/measures.py); a new measure's constraint comes with
        # its migration
        *(CheckConstraint(sql, name=name) for name, sql in measures.observation_checks()),
    )


class Covariate(SQLModel, table=True):
    """An environmental value at a station (visit_id NULL) or at one visit."""

    id: int | None = Field(default=None, primary_key=True)
    station_id: int = Field(sa_column=_fk("station.id"))
    visit_id: int | None = Field(default=None, sa_column=_fk("visit.id", nullable=True))
    name: str
    unit: str = ""
    value: float

    __table_args__ = (
        Index("ix_covariate_station_visit_name", "station_id", "visit_id", "name", unique=True),
    )


class ManagementEvent(SQLModel, table=True):
    __tablename__ = "management_event"

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    site_id: int | None = Field(default=None, sa_column=_fk("site.id", nullable=True))
    station_id: int | None = Field(default=None, sa_column=_fk("station.id", nullable=True))
    kind: str = Field(description="grazing, cutting, burning, flooding, ...")
    start_date: dt.date
    end_date: dt.date | None = None
    notes: str = ""

    __table_args__ = (
        CheckConstraint("end_date IS NULL OR end_date >= start_date", name="dates_ordered"),
        CheckConstraint("site_id IS NOT NULL OR station_id IS NOT NULL", name="has_place"),
    )


class Photo(SQLModel, table=True):
    id: int | None = Field(default=None, primary_key=True)
    station_id: int = Field(sa_column=_fk("station.id"))
    visit_id: int | None = Field(default=None, sa_column=_fk("visit.id", nullable=True))
    path: str
    bearing_deg: float | None = None
    height_m: float | None = None
    notes: str = ""

    __table_args__ = (
        CheckConstraint("bearing_deg IS NULL OR (bearing_deg >= 0 AND bearing_deg < 360)", name="bearing_range"),
    )


class ChangeLog(SQLModel, table=True):
    """Every correction of a stored value: old, new, reason, who, when.  Rows are never updated."""

    __tablename__ = "change_log"

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    table_name: str
    row_id: int
    field: str
    old_value: str | None
    new_value: str | None
    reason: str
    changed_by: str
    changed_at: dt.datetime

    __table_args__ = (CheckConstraint("length(reason) > 0", name="reason_given"),)


MEASURE_ROWS = measures.measure_rows()


# --- revision 0002: stored season plans and quality flags -------------------------------------------------

PLAN_OUTCOMES = ("planned", "done", "partial", "missed", "inaccessible", "held_back")
FLAG_STATES = ("open", "resolved", "accepted")


class PlannedVisit(SQLModel, table=True):
    """A station's place in a season's plan: team, day, order on the day's route, and its outcome."""

    __tablename__ = "planned_visit"

    id: int | None = Field(default=None, primary_key=True)
    round_id: int = Field(sa_column=_fk("round.id"))
    station_id: int = Field(sa_column=_fk("station.id"))
    team: str | None = None
    day: dt.date | None = None
    route_order: int | None = None
    arrival: str | None = Field(default=None, max_length=5, description="planned arrival HH:MM")
    reason: str = Field(default="due", description="due (panel rule) or overdue (missed earlier)")
    outcome: str = "planned"
    visit_id: int | None = Field(default=None, sa_column=_fk("visit.id", nullable=True))
    seed: int | None = Field(default=None, description="seed of a randomised site order")

    __table_args__ = (
        UniqueConstraint("round_id", "station_id", name="uq_planned_visit_round_station"),
        CheckConstraint(_in("outcome", PLAN_OUTCOMES), name="outcome_known"),
        CheckConstraint("route_order IS NULL OR route_order >= 1", name="route_order_positive"),
    )


class QualityFlag(SQLModel, table=True):
    """A quality-check finding on stored data, open until someone resolves or accepts it."""

    __tablename__ = "quality_flag"

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    kind: str
    station_id: int | None = Field(default=None, sa_column=_fk("station.id", nullable=True))
    species_id: int | None = Field(default=None, sa_column=_fk("species.id", nullable=True))
    year: int | None = None
    detail: str
    severity: str = "warning"
    state: str = "open"
    note: str = ""
    raised_at: dt.datetime = Field(default_factory=lambda: utcnow())

    __table_args__ = (CheckConstraint(_in("state", FLAG_STATES), name="state_known"),)


# --- revision 0004: placement runs, station relocations, season plans as records ------------------------------


class PlacementRun(SQLModel, table=True):
    """One run of a design method in a site: its method, seed and everything needed to extend it.

    ``params_json`` holds the method's inputs (bounds and Halton start of a balanced run, minimum
    separation, exclusion polygons as GeoJSON, quadrat size, allocation) and its stations in
    order with their Halton indices.  An extension is a run of its own pointing at the run it extends.
    """

    __tablename__ = "placement_run"

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    site_id: int = Field(sa_column=_fk("site.id"))
    method: str
    seed: int
    extends_id: int | None = Field(default=None, sa_column=_fk("placement_run.id", nullable=True))
    n_stations: int
    params_json: str = "{}"
    created_at: dt.datetime = Field(default_factory=lambda: utcnow())

    __table_args__ = (
        CheckConstraint(_in("method", C.PLACEMENTS), name="method_known"),
        CheckConstraint("n_stations >= 0", name="n_non_negative"),
    )


class StationRelocation(SQLModel, table=True):
    """A quadrat moved, or re-marked after its marker was lost: the new station continues the old one."""

    __tablename__ = "station_relocation"

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    from_station_id: int = Field(sa_column=Column(Integer, ForeignKey("station.id", ondelete="RESTRICT"),
                                                  nullable=False, unique=True))
    to_station_id: int = Field(sa_column=Column(Integer, ForeignKey("station.id", ondelete="RESTRICT"),
                                                nullable=False, unique=True))
    date: dt.date
    reason: str
    lost: bool = Field(default=False, description="the marker was lost (position re-established) rather than moved")
    distance_m: float = Field(description="straight-line distance from the old position [m]")
    recorded_by: str = ""
    recorded_at: dt.datetime = Field(default_factory=lambda: utcnow())

    __table_args__ = (
        CheckConstraint("length(reason) > 0", name="reason_given"),
        CheckConstraint("distance_m >= 0", name="distance_non_negative"),
        CheckConstraint("from_station_id <> to_station_id", name="two_stations"),
    )


class SeasonPlanRecord(SQLModel, table=True):
    """A stored season plan: its seed, routing and summary (one per round)."""

    __tablename__ = "season_plan"

    id: int | None = Field(default=None, primary_key=True)
    round_id: int = Field(sa_column=Column(Integer, ForeignKey("round.id", ondelete="RESTRICT"), nullable=False,
                                           unique=True))
    seed: int
    summary: str = ""
    extra_team_days: int = 0
    randomise_site_order: bool = False
    site_order: str = Field(default="", description="sites in planning order, ';'-joined")
    day_start: str = Field(default="09:00", max_length=5, description="HH:MM")
    path_factor: float = Field(default=1.0, description="winding factor on straight lines where no paths are given")
    routing: str = Field(default="straight", description="straight (x winding factor) or paths (network)")
    allow_lone_working: bool = False
    details_json: str = Field(default="{}", description="start points, blocked dates, unplanned stations' reasons")
    created_at: dt.datetime = Field(default_factory=lambda: utcnow())

    __table_args__ = (
        CheckConstraint("extra_team_days >= 0", name="extra_non_negative"),
        CheckConstraint("path_factor >= 1", name="path_factor_at_least_one"),
        CheckConstraint("routing IN ('straight', 'paths')", name="routing_known"),
    )


class SeasonPlanTeam(SQLModel, table=True):
    """A team of a stored plan: members, hours, walking speed, working weekdays and blocked dates."""

    __tablename__ = "season_plan_team"

    id: int | None = Field(default=None, primary_key=True)
    plan_id: int = Field(sa_column=_fk("season_plan.id"))
    code: str = Field(max_length=40)
    members: str = Field(description="member codes or names, ';'-joined")
    hours_per_day: float
    walking_speed_kmh: float
    working_weekdays: str = Field(default="0;1;2;3;4", description="Monday = 0, ';'-joined")
    blocked_dates: str = Field(default="", description="ISO dates, ';'-joined")

    __table_args__ = (
        UniqueConstraint("plan_id", "code", name="uq_season_plan_team_plan_code"),
        CheckConstraint("hours_per_day > 0", name="hours_positive"),
        CheckConstraint("walking_speed_kmh > 0", name="speed_positive"),
    )


class SeasonPlanTeamDay(SQLModel, table=True):
    """One team's day of a stored plan: site, start point, route length and times."""

    __tablename__ = "season_plan_team_day"

    id: int | None = Field(default=None, primary_key=True)
    plan_id: int = Field(sa_column=_fk("season_plan.id"))
    team: str = Field(max_length=40)
    date: dt.date
    site: str = Field(max_length=40)
    start_x: float
    start_y: float
    route_m: float
    start_time: str = Field(max_length=5, description="HH:MM")
    end_time: str = Field(max_length=5, description="HH:MM")

    __table_args__ = (
        UniqueConstraint("plan_id", "team", "date", name="uq_season_plan_team_day_plan_team_date"),
        CheckConstraint("route_m >= 0", name="route_non_negative"),
    )


# --- revision 0003: stored fits, reports issued, regions of sites -----------------------------------------

AREA_KINDS = ("all", "site", "stratum", "region")


class StoredFit(SQLModel, table=True):
    """One fitted trend, kept so that it is made once and reused while its data, model and engine stand.

    ``spec_json`` holds every option that changes the fit; ``data_fingerprint`` the SHA-256 of the exact
    table fitted; ``result_json`` the whole result in a versioned JSON form (``monitor.trend.storage``).
    The call and annual change are copied out of the result for the history query.
    """

    __tablename__ = "stored_fit"

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    species_id: int = Field(sa_column=_fk("species.id"))
    measure: str = Field(sa_column=Column(ForeignKey("measure.code", ondelete="RESTRICT"), nullable=False))
    area_kind: str = Field(default="all", max_length=10, description="all, site, stratum or region")
    area: str = Field(default="", max_length=40, description="code of the site, stratum or region; '' for all")
    spec_json: str
    spec_hash: str = Field(max_length=64)
    engine_version: str = Field(max_length=200)
    data_fingerprint: str = Field(max_length=64)
    result_json: str
    n_obs: int
    first_year: int
    last_year: int
    call: str
    annual_change: float | None = None
    annual_lower: float | None = None
    annual_upper: float | None = None
    fit_seconds: float = Field(description="wall-clock time of the fit [s]")
    fitted_by: str
    fitted_at: dt.datetime = Field(default_factory=lambda: utcnow())

    __table_args__ = (
        UniqueConstraint("programme_id", "species_id", "measure", "area_kind", "area", "spec_hash", "engine_version",
                         "data_fingerprint", name="uq_stored_fit_identity"),
        CheckConstraint(_in("area_kind", AREA_KINDS), name="area_kind_known"),
        CheckConstraint("(area_kind = 'all') = (area = '')", name="area_named"),
        CheckConstraint("n_obs > 0", name="n_obs_positive"),
        CheckConstraint("fit_seconds >= 0", name="fit_seconds_non_negative"),
    )


class ReportIssue(SQLModel, table=True):
    """An annual report as written: the season, when, by whom, and (through report_fit) the fits it gave."""

    __tablename__ = "report_issue"

    id: int | None = Field(default=None, primary_key=True)
    programme_id: int = Field(sa_column=_fk("programme.id"))
    year: int
    folder: str = ""
    issued_by: str
    issued_at: dt.datetime = Field(default_factory=lambda: utcnow())


class ReportFit(SQLModel, table=True):
    """A fit shown in a report (its call is what the managers were told that year)."""

    __tablename__ = "report_fit"

    id: int | None = Field(default=None, primary_key=True)
    report_id: int = Field(sa_column=_fk("report_issue.id"))
    fit_id: int = Field(sa_column=_fk("stored_fit.id"))

    __table_args__ = (UniqueConstraint("report_id", "fit_id", name="uq_report_fit_report_fit"),)


# --- revision 0006: people who sign in to the browser workspace -------------------------------------------

WEB_ROLES = ("reader", "recorder", "owner")


class WebUser(SQLModel, table=True):
    """A person who signs in to ``monitor serve`` on a shared programme, with the rights of one database group
    (reader, recorder, owner).  Only a password hash is stored (scrypt, salted; ``monitor.web.security``)."""

    __tablename__ = "web_user"

    id: int | None = Field(default=None, primary_key=True)
    login: str = Field(max_length=80, unique=True)
    role: str
    password_hash: str
    active: bool = True
    created_at: dt.datetime = Field(default_factory=lambda: utcnow())

    __table_args__ = (CheckConstraint(_in("role", WEB_ROLES), name="role_known"),
                      CheckConstraint("length(login) > 0", name="login_given"))
