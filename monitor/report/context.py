"""The report's content as documented dataclasses, and the builder that makes it.

``build_report_context`` turns what the service layer gathered (trend results,
this season's estimates, coverage, triggers, events, ...) into a
``ReportContext``: every number already formatted, every sentence already
written, every figure described.  Templates only lay it out; ``to_dict`` gives
the numbers as JSON (schema ``monitor.report/1``) for the next year's
comparison and for anyone who wants the figures without the page.

Nothing here fits a model or touches a database: trend results come in
already fitted (``monitor.trend.TrendResult`` or any object with the same
attributes), station changes come in already computed.
"""

from __future__ import annotations

import math
import platform
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from importlib import metadata

import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.errors import InputError
from monitor.families import describe as describe_family
from monitor.report.compare import SCHEMA, CallChange, compare_with_previous
from monitor.report.fits import FitRow
from monitor.report.figures import EventMark
from monitor.report.triggers import Trigger, TriggerOutcome, evaluate_triggers
from monitor.settings import DEFAULT_CHANGE_MARGIN, FEW_QUADRATS
from monitor.report.wording import (
    LevelNumbers,
    level_sentence,
    odds_trend_sentence,
    CALL_LABEL,
    CALL_MARKER,
    MEASURE_LABEL,
    MethodChange,
    TrendNumbers,
    caveat_sentences,
    decline_advice,
    detectable_change_not_computed_sentence,
    detectable_fall_sentence,
    plain_measures,
    season_label,
    signed_percent,
    SummaryTexts,
    summary_texts,
    few_quadrats_note,
    density_unit,
    quantity_text,
    quantity_interval_text,
    figure_number,
    report_title,
    trigger_cell,
    headline_sentences,
    comparison_note,
    visited_text,
    model_sentence,
    indices_figure_alt,
    indices_figure_caption,
    MAP_FIGURE_CAPTION,
    map_figure_alt,
    gradient_figure_alt,
    gradient_figure_caption,
    margin_text,
    methods_paragraphs,
    caution_sentences,
    total_floor_note,
    trend_sentence,
)

PROBABILITY_PLACEMENTS = (C.PLACEMENT_RANDOM, C.PLACEMENT_STRATIFIED, C.PLACEMENT_BALANCED,
                          C.PLACEMENT_SYSTEMATIC)

REFERENCES = (
    "Bates, D., Mächler, M., Bolker, B. and Walker, S. (2015). Fitting linear mixed-effects models "
    "using lme4. Journal of Statistical Software 67(1), 1–48.",
    "Breslow, N. E. and Clayton, D. G. (1993). Approximate inference in generalized linear mixed "
    "models. Journal of the American Statistical Association 88(421), 9–25.",
    "Dixon, P. M. and Pechmann, J. H. K. (2005). A statistical test to show negligible trend. "
    "Ecology 86(7), 1751–1756.",
    "Harrison, X. A. (2014). Using observation-level random effects to model overdispersion in count "
    "data in ecology and evolution. PeerJ 2, e616.",
    "Piepho, H.-P. and Ogutu, J. O. (2002). A simple mixed model for trend analysis in wildlife "
    "populations. Journal of Agricultural, Biological, and Environmental Statistics 7(3), 350–360.",
    "Warton, D. I. and Hui, F. K. C. (2011). The arcsine is asinine: the analysis of proportions in "
    "ecology. Ecology 92(1), 3–10.",
    "Harrower, M. and Brewer, C. A. (2003). ColorBrewer.org: an online tool for selecting colour "
    "schemes for maps. The Cartographic Journal 40(1), 27–37.",
)


SOFTWARE = ("numpy", "scipy", "pandas", "statsmodels", "matplotlib", "Jinja2", "shapely")


# --------------------------------------------------------------------------- small value types
@dataclass(frozen=True)
class Interval:
    """An estimate with its 95 % interval (fractions unless stated)."""

    estimate: float
    lower: float
    upper: float

    @classmethod
    def from_any(cls, obj) -> Interval | None:
        """From an object with estimate/lower/upper, a mapping with those keys, or a 3-tuple."""
        if obj is None:
            return None
        if isinstance(obj, Interval):
            return obj
        if isinstance(obj, Mapping):
            return cls(float(obj["estimate"]), float(obj["lower"]), float(obj["upper"]))
        if isinstance(obj, tuple | list):
            return cls(float(obj[0]), float(obj[1]), float(obj[2]))
        return cls(float(obj.estimate), float(obj.lower), float(obj.upper))

    def to_dict(self) -> dict:
        return {"estimate": _num(self.estimate), "lower": _num(self.lower), "upper": _num(self.upper)}


def _num(value) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


@dataclass(frozen=True)
class ProgrammeInfo:
    """What the report says about the programme.

    Attributes
    ----------
    name : str
        Programme name (title of the report).
    reserve : str
        The place monitored.
    description : str
        One or two sentences for the front page.
    placement : str
        How stations were chosen (``monitor.columns.PLACEMENTS``); decides the
        caution about what the trends describe.  Overridden per station by a
        ``placement`` column in ``stations``.
    crs : str
        Projected CRS of station coordinates, e.g. "EPSG:32633".
    prepared_by : str
    margin : float | None
        Margin of change that matters [fraction per year]; default: the results' own.
    """

    name: str
    reserve: str = ""
    description: str = ""
    placement: str = C.PLACEMENT_RANDOM
    crs: str = ""
    prepared_by: str = ""
    margin: float | None = None

    @classmethod
    def from_any(cls, obj) -> ProgrammeInfo:
        if isinstance(obj, ProgrammeInfo):
            return obj
        if isinstance(obj, Mapping):
            known = {k: obj[k] for k in cls.__dataclass_fields__ if k in obj}
            if "name" not in known:
                raise InputError("programme_meta needs a 'name'")
            return cls(**known)
        raise InputError("programme_meta must be a ProgrammeInfo or a mapping with at least 'name'")


# --------------------------------------------------------------------------- report parts
@dataclass(frozen=True)
class SummaryRow:
    """One line of the summary table: a species and measure.

    ``texts`` holds the cells printed as they stand and the call line; ``marker`` is
    a shape (▲ ▼ ● ?) that carries the call without colour.  ``trigger_state``
    is "fired", "not fired" or "none" (no trigger set).
    """

    species: str
    species_name: str
    measure: str
    measure_label: str
    anchor: str
    call: str
    call_label: str
    marker: str
    annual_change: Interval
    period_change: Interval
    texts: SummaryTexts                  # the row's cells and the call line (report/wording.py)
    first_year: int
    last_year: int
    n_stations: int
    n_years: int
    n_obs: int
    family: str
    margin: float
    trigger_state: str
    trigger_text: str
    share_change: Interval | None = None  # percentage points, first year against last (shares only)

    def to_dict(self) -> dict:
        return {
            "species": self.species,
            "species_name": self.species_name,
            "measure": self.measure,
            "call": self.call,
            "annual_change": self.annual_change.to_dict(),
            "period_change": self.period_change.to_dict(),
            "years": [self.first_year, self.last_year],
            "n_stations": self.n_stations,
            "n_years": self.n_years,
            "n_obs": self.n_obs,
            "family": self.family,
            "margin": self.margin,
            "trigger": self.trigger_state,
            **({"share_change_points": self.share_change.to_dict()} if self.share_change is not None else {}),
        }


@dataclass(frozen=True)
class FigureRef:
    """A figure of the report: what to draw (``kind``), its file stem and its words.

    ``kind`` is "indices", "map" or "gradient"; ``alt`` is the text alternative
    for the image, ``caption`` the visible caption.
    """

    key: str
    kind: str
    alt: str
    caption: str


@dataclass(frozen=True)
class GradientData:
    """Abundance against a gradient this season: frame with columns ``gradient`` and ``value``."""

    frame: pd.DataFrame
    gradient_label: str
    value_label: str


@dataclass(frozen=True)
class PowerRow:
    """Detectable change at 80 % power for one species and measure."""

    species: str
    species_name: str
    measure_label: str
    detectable_change: float | None  # annual change detected with the stated power [fraction/yr]; None: not computed
    power: float
    n_stations: int | None
    n_years: int | None
    text: str

    def to_dict(self) -> dict:
        return {"species": self.species, "detectable_change": _num(self.detectable_change),
                "power": self.power, "n_stations": self.n_stations, "n_years": self.n_years}


@dataclass(frozen=True, eq=False)
class SpeciesSection:
    """Everything on one species-and-measure page.

    Attributes
    ----------
    summary : SummaryRow
    paragraph : str
        The plain-language trend sentence(s).
    caveats : tuple[str, ...]
    call_reason : str
        The trend engine's reason for the call.
    model_text : str
        Which model, on how many visits, stations, sites and years.
    indices : DataFrame | None
        year, index, lower, upper: the yearly estimates on the measure's own scale (``value_label``,
        e.g. "% cover") when the fit has them, else indices relative to the first year.
    fitted_trend : DataFrame | None
        year, fit, lower, upper: the fitted trend on the same scale (one baseline with the points).
    marks : tuple[EventMark, ...]
        Management events and method changes within the series.
    stations : DataFrame | None
        station, x, y (and site) for the map.
    station_changes : DataFrame | None
        station, annual_change.
    gradient : GradientData | None
    figures : tuple[FigureRef, ...]
    triggers : tuple[TriggerOutcome, ...]
    power : PowerRow | None
    """

    summary: SummaryRow
    paragraph: str
    caveats: tuple[str, ...]
    call_reason: str
    model_text: str
    indices: pd.DataFrame | None
    fitted_trend: pd.DataFrame | None
    marks: tuple[EventMark, ...]
    stations: pd.DataFrame | None
    station_changes: pd.DataFrame | None
    gradient: GradientData | None
    figures: tuple[FigureRef, ...]
    triggers: tuple[TriggerOutcome, ...]
    power: PowerRow | None
    advice: str | None = None
    interval_method: str = ""
    value_label: str = ""   # the scale of ``indices`` and ``fitted_trend``: a unit, or "" for indices

    def to_dict(self) -> dict:
        def rows(frame):
            if frame is None:
                return None
            return [{k: (_num(v) if k != C.YEAR else int(v)) for k, v in r.items()}
                    for r in frame.to_dict("records")]

        return {
            "species": self.summary.species,
            "measure": self.summary.measure,
            "paragraph": self.paragraph,
            "caveats": list(self.caveats),
            "call_reason": self.call_reason,
            "indices": rows(self.indices),
            "fitted_trend": rows(self.fitted_trend),
            "marks": [{"year": m.year, "label": m.label, "kind": m.kind} for m in self.marks],
        }


@dataclass(frozen=True)
class EstimateRow:
    """One line of this season's estimates table, formatted."""

    species: str
    species_name: str
    measure_label: str
    site: str
    quantity: str
    quantity_label: str
    estimate: float
    lower: float | None
    upper: float | None
    estimate_text: str
    interval_text: str
    n_stations: int | None
    site_name: str = ""
    notes: tuple[str, ...] = ()
    few_quadrats: bool = False

    def to_dict(self) -> dict:
        return {"species": self.species, "site": self.site, "quantity": self.quantity,
                "estimate": _num(self.estimate), "lower": _num(self.lower), "upper": _num(self.upper),
                "n_stations": self.n_stations}


@dataclass(frozen=True)
class CoverageRow:
    """Stations due, visited, missed and inaccessible at one site this season."""

    site: str
    due: int
    visited: int
    missed: int
    inaccessible: int
    visited_text: str   # "45 of 48 (94%)"
    site_name: str = ""


@dataclass(frozen=True)
class SeasonsRow:
    """How many seasons of data a species and measure has."""

    species: str
    species_name: str
    measure_label: str
    n_years: int
    first_year: int
    last_year: int


@dataclass(frozen=True)
class Photo:
    """One repeat photo of a station: when, which way, and the picture as a data URI (a thumbnail)."""

    date: str
    caption: str
    image: str


@dataclass(frozen=True)
class StationPhotos:
    """A station's repeat photos, oldest first, for setting side by side."""

    station: str
    site: str
    site_name: str
    photos: tuple[Photo, ...]


@dataclass(frozen=True)
class QualityFlag:
    """An open quality flag on a record."""

    station: str
    year: str
    species: str
    message: str


@dataclass(frozen=True)
class Coverage:
    """Data coverage this season: visits by site (with a total row), seasons per species, open flags."""

    sites: tuple[CoverageRow, ...]
    total: CoverageRow | None
    seasons: tuple[SeasonsRow, ...]
    flags: tuple[QualityFlag, ...]


@dataclass(frozen=True)
class Methods:
    """Methods section: two paragraphs, the margin, references and software versions."""

    paragraphs: tuple[str, ...]
    margin_text: str
    references: tuple[str, ...]
    software: tuple[tuple[str, str], ...]


@dataclass(frozen=True, eq=False)
class ReportContext:
    """The whole content of an annual report, in reading order.

    Attributes
    ----------
    title : str
    programme : ProgrammeInfo
    season : int
    generated : str
        Date the report was made (given by the caller, so output is reproducible).
    headline : tuple[str, ...]
        What needs attention, in a few short sentences.
    summary : tuple[SummaryRow, ...]
        One row per species and measure.
    triggers : tuple[TriggerOutcome, ...]
        Fired first, with their agreed responses.
    comparison : tuple[CallChange, ...] | None
        Against last year's report, when given.
    comparison_note : str
    species : tuple[SpeciesSection, ...]
    estimates : tuple[EstimateRow, ...]
    coverage : Coverage | None
    power : tuple[PowerRow, ...]
    methods : Methods
    cautions : tuple[str, ...]
    sites : Mapping[str, object]
        Site outlines for the maps (not printed as text).
    names : Mapping[str, str]
        Species code -> display name.
    """

    title: str
    programme: ProgrammeInfo
    season: int
    generated: str
    headline: tuple[str, ...]
    summary: tuple[SummaryRow, ...]
    triggers: tuple[TriggerOutcome, ...]
    comparison: tuple[CallChange, ...] | None
    comparison_note: str
    species: tuple[SpeciesSection, ...]
    estimates: tuple[EstimateRow, ...]
    coverage: Coverage | None
    power: tuple[PowerRow, ...]
    methods: Methods
    cautions: tuple[str, ...]
    sites: Mapping[str, object] = field(default_factory=dict)
    names: Mapping[str, str] = field(default_factory=dict)
    site_names: Mapping[str, str] = field(default_factory=dict)
    scope: str = ""                      # "" for the whole programme, else what the report is limited to
    photos: tuple = ()                   # StationPhotos, where stations have repeat photos
    few_quadrats_note: str = few_quadrats_note()  # the estimates table's footnote for a row marked †
    few_quadrats_threshold: int = FEW_QUADRATS
    #: target species whose trend could not be called (one season of data, ...), as dicts with the reason
    not_called: tuple[dict, ...] = ()
    fits: tuple[FitRow, ...] = ()        # every fit shown (overall and by area), when it was made
    fits_note: str = ""
    areas: tuple[FitRow, ...] = ()       # trends by site, stratum or region, beside the overall ones
    area_kind: str = ""                  # site, stratum or region ("" when not asked for)

    def to_dict(self) -> dict:
        """The report's numbers as JSON-ready data (schema ``monitor.report/1``)."""
        coverage = None
        if self.coverage is not None:
            coverage = {
                "sites": [{"site": r.site, "due": r.due, "visited": r.visited, "missed": r.missed,
                           "inaccessible": r.inaccessible} for r in self.coverage.sites],
                "seasons": [{"species": r.species, "n_years": r.n_years, "years": [r.first_year, r.last_year]}
                            for r in self.coverage.seasons],
                "open_flags": len(self.coverage.flags),
            }
        return {
            "schema": SCHEMA,
            "programme": self.programme.name,
            "season": self.season,
            "generated": self.generated,
            "summary": [r.to_dict() for r in self.summary],
            "triggers": [t.to_dict() for t in self.triggers],
            "species": [s.to_dict() for s in self.species],
            "estimates": [e.to_dict() for e in self.estimates],
            "coverage": coverage,
            "power": [p.to_dict() for p in self.power],
            "comparison": None if self.comparison is None else [c.to_dict() for c in self.comparison],
            "not_called": [dict(n) for n in self.not_called],
            "software": dict(self.methods.software),
            "areas": [a.to_dict() for a in self.areas],
            "fits": [f.to_dict() for f in self.fits],
        }


# --------------------------------------------------------------------------- helpers
def _attr(result, name, default=None):
    value = getattr(result, name, default)
    return default if value is None else value


def _frame(obj, what: str) -> pd.DataFrame | None:
    if obj is None:
        return None
    if isinstance(obj, pd.DataFrame):
        return obj.copy()
    try:
        return pd.DataFrame(list(obj))
    except Exception as exc:  # pragma: no cover - defensive
        raise InputError(f"{what} must be a table (DataFrame or list of records)") from exc


def _require(frame: pd.DataFrame, columns: Iterable[str], what: str) -> None:
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise InputError(f"{what} needs column(s) {', '.join(missing)}")


def slug(text: str) -> str:
    """A file-name-safe slug of any text: lower-case letters, digits and single hyphens."""
    out = re.sub(r"[^a-z0-9]+", "-", str(text).lower()).strip("-")
    return out[:40] or "x"




# each measure's estimate (monitor/measures.py) and a count's site total: column heading and unit
QUANTITY_LABEL = {"total": ("Estimated total", "")}
for _measure in measures.REGISTRY.values():
    QUANTITY_LABEL.setdefault(_measure.quantity, _measure.quantity_label)


def software_versions(extra: Mapping[str, str] | None = None) -> tuple[tuple[str, str], ...]:
    """Versions of Python, monitor and the scientific libraries, as (name, version) pairs."""
    from monitor import __version__

    pairs = [("Python", platform.python_version()), ("monitor", __version__)]
    for name in SOFTWARE:
        try:
            pairs.append((name, metadata.version(name)))
        except metadata.PackageNotFoundError:
            continue
    if extra:
        listed = {name for name, _ in pairs}
        pairs.extend((str(k), str(v)) for k, v in extra.items() if str(k) not in listed)
    return tuple(pairs)


def _blank(value) -> bool:
    return value is None or value == "" or (isinstance(value, float) and math.isnan(value))


def _marks_for(species: str, events: pd.DataFrame | None, changes: Sequence[MethodChange],
               change_species: Sequence[str | None], first: int, last: int,
               sites: set[str] | None = None) -> tuple[EventMark, ...]:
    """Management events and method changes to mark on one species' plot: only those at the sites its
    stations lie in (``sites``; an event with no site is programme-wide) and for this species."""
    marks: list[EventMark] = []
    if events is not None and len(events):
        for row in events.to_dict("records"):
            sp = row.get(C.SPECIES)
            if not _blank(sp) and str(sp) != species:
                continue
            site = row.get(C.SITE)
            if sites is not None and not _blank(site) and str(site) not in sites:
                continue
            year = int(row[C.YEAR])
            if first <= year <= last:
                marks.append(EventMark(year, str(row.get("kind", "event")), "event"))
    for change, sp in zip(changes, change_species, strict=True):
        if sp is not None and sp != species:
            continue
        if first < change.year <= last:
            marks.append(EventMark(change.year, change.kind, "method"))
    return tuple(marks)


def _method_changes(frame: pd.DataFrame | None) -> tuple[list[MethodChange], list[str | None]]:
    if frame is None or not len(frame):
        return [], []
    _require(frame, [C.YEAR], "method_changes")
    changes, species = [], []
    for row in frame.to_dict("records"):
        changes.append(MethodChange(int(row[C.YEAR]), str(row.get("kind", "protocol")),
                                    str(row.get("description", "") or "")))
        sp = row.get(C.SPECIES)
        species.append(None if sp is None or (isinstance(sp, float) and math.isnan(sp)) else str(sp))
    return changes, species


def _level_numbers(level) -> LevelNumbers | None:
    """The fitted trend first against last year, from ``TrendResult.level_change`` (or its dict)."""
    if level is None:
        return None

    def get(obj, key):
        return obj.get(key) if isinstance(obj, Mapping) else getattr(obj, key)

    def est(part, key="estimate"):
        value = get(get(level, part), key)
        return math.nan if value is None else float(value)

    return LevelNumbers(str(get(level, "unit")), int(get(level, "first_year")), int(get(level, "last_year")),
                        est("first"), est("last"), est("difference"), est("difference", "lower"),
                        est("difference", "upper"))


def _change_applies(frame: pd.DataFrame | None, index: int, measure: str) -> bool:
    """A method change names the measures it concerns (column ``measures``, e.g. "frequency;pin_hits");
    none named means every measure."""
    if frame is None or "measures" not in frame.columns:
        return True
    value = frame["measures"].iloc[index]
    if _blank(value):
        return True
    named = value if isinstance(value, (list, tuple)) else str(value).replace(",", ";").split(";")
    return measure in {str(m).strip() for m in named}


class _CallView:
    """A trend result seen through the interval its call was made from.

    The trend engine calls a trend from the profile-likelihood interval of the annual change when it has
    one, and reports the Wald (or t) interval as ``annual_change``; the two can differ in the last digit.
    The report shows one: the call's.  The change over the period takes the same bounds, compounded over
    the years between the first and the last season.
    """

    def __init__(self, result, annual: Interval, period: Interval, method: str):
        self._result = result
        self.annual_change = annual
        self.period_change = period
        self.interval_method = method

    def __getattr__(self, name):
        return getattr(self._result, name)

    @classmethod
    def of(cls, result) -> _CallView:
        annual = Interval.from_any(_attr(result, "annual_change"))
        period = Interval.from_any(_attr(result, "period_change"))
        profile = Interval.from_any(getattr(result, "annual_change_profile", None))
        # the reference the interval rests on: "t, 10 df" with a year effect, "normal (z)" without
        reference = getattr(result, "interval_label", None)
        ref = f" ({reference})" if isinstance(reference, str) and reference else ""
        if profile is None or not (math.isfinite(profile.lower) and math.isfinite(profile.upper)):
            return cls(result, annual, period, "Wald" + ref)
        first, last = (int(y) for y in _attr(result, "years"))
        span = last - first

        def over(rate: float) -> float:
            return math.expm1(math.log1p(rate) * span) if rate > -1 else -1.0

        return cls(result, Interval(annual.estimate, profile.lower, profile.upper),
                   Interval(period.estimate, over(profile.lower), over(profile.upper)), "profile likelihood" + ref)


# --------------------------------------------------------------------------- the builder
def build_report_context(
    programme_meta: ProgrammeInfo | Mapping,
    season: int,
    trend_results: Mapping[tuple[str, str], object],
    estimates: pd.DataFrame | Sequence[Mapping] | None = None,
    coverage: pd.DataFrame | Sequence[Mapping] | None = None,
    quality_flags: pd.DataFrame | Sequence[Mapping] | None = None,
    triggers: Sequence[Trigger] = (),
    events: pd.DataFrame | Sequence[Mapping] | None = None,
    previous: Mapping | None = None,
    power: pd.DataFrame | Sequence[Mapping] | None = None,
    *,
    stations: pd.DataFrame | None = None,
    sites: Mapping[str, object] | None = None,
    station_changes: Mapping[tuple[str, str], pd.DataFrame] | None = None,
    gradients: Mapping[tuple[str, str], GradientData] | None = None,
    method_changes: pd.DataFrame | Sequence[Mapping] | None = None,
    species_names: Mapping[str, str] | None = None,
    corrections: Mapping[str, int] | None = None,
    generated: str = "",
    software: Mapping[str, str] | None = None,
    site_names: Mapping[str, str] | None = None,
    scope: str = "",
    photos: Sequence = (),
) -> ReportContext:
    """Build the whole content of an annual report from results already computed.

    Parameters
    ----------
    programme_meta : ProgrammeInfo or mapping
        At least ``name``; see ``ProgrammeInfo``.
    season : int
        The season (year) reported.
    trend_results : mapping (species, measure) -> TrendResult-like
        Fitted trends, in the order the report shows them.  Each needs the
        monitor.trend.TrendResult attributes ``measure, family, n_obs, n_stations, n_sites,
        years, n_years, annual_change, period_change, random_sd, dispersion,
        indices, fitted_trend, diagnostics, call, call_reason, margin,
        converged`` (and ``slope``, ``slope_se`` for upper-bound triggers).
    estimates : table, optional
        This season's estimates, one row per species, measure, site and
        quantity: columns ``species``, ``measure``, ``site`` ("all" for the
        reserve), ``quantity`` ("density" [per m²], "total" [individuals],
        "cover" [%], "frequency" [share of cells], "presence" [share]),
        ``estimate``, ``lower``, ``upper`` (95 %), optional ``n_stations``.
    coverage : table, optional
        This season's visits by site: ``site``, ``due``, ``visited``,
        ``missed``, ``inaccessible`` (stations).
    quality_flags : table, optional
        Open quality flags: ``message`` and optional ``station``, ``year``,
        ``species``, ``status`` (rows whose status is not "open" are dropped).
    triggers : sequence of Trigger
        Management triggers set in advance; evaluated here.
    events : table, optional
        Management events: ``year``, ``kind`` (grazing, cutting, burning, ...),
        optional ``species`` (only that species' plots), ``site``, ``description``.
    previous : mapping, optional
        Last year's ``report.json``; adds the comparison of calls.
    power : table, optional
        ``species``, ``measure``, ``detectable_change`` (smallest annual fall
        detected [fraction per year]), optional ``power`` (default 0.8),
        ``n_stations``, ``n_years``.
    stations : DataFrame, optional
        ``station``, ``x``, ``y`` [m], optional ``site``, ``placement``; enables maps.
    sites : mapping site -> polygon, optional
        Outlines for the maps (shapely or GeoJSON-like, projected metres).
    station_changes : mapping (species, measure) -> DataFrame, optional
        Each station's own annual change (``monitor.trend.station_changes``).
    gradients : mapping (species, measure) -> GradientData, optional
    method_changes : table, optional
        ``year``, ``kind`` ("protocol" or "observer"), ``description``,
        optional ``species``; marked on index plots and in caveats.
    species_names : mapping code -> display name, optional
    corrections : mapping species -> int, optional
        Corrected records since the previous report (for the comparison).
    generated : str
        Date to print as "made on" (the caller's clock, for reproducible output).
    software : mapping, optional
        Extra software versions to list (e.g. R packages used as test references).
    site_names : mapping code -> name, optional
        Printed beside site codes.
    scope : str
        What the report is limited to ("site SM (Stream Meadow)"), "" for the whole programme.
    photos : sequence of StationPhotos
        Stations' repeat photos, shown where they exist.

    Returns
    -------
    ReportContext

    Raises
    ------
    monitor.errors.InputError
        A table lacks a required column, or there is no trend result.
    """
    programme = ProgrammeInfo.from_any(programme_meta)
    if not trend_results:
        raise InputError("no trend results to report")
    names = dict(species_names or {})
    site_names = {str(k): str(v) for k, v in (site_names or {}).items() if not _blank(v)}
    events_df = _frame(events, "events")
    if events_df is not None and len(events_df):
        _require(events_df, [C.YEAR], "events")
    method_df = _frame(method_changes, "method_changes")
    changes, change_species = _method_changes(method_df)

    # one interval throughout: the one the call was made from (profile likelihood when the engine gives
    # it, else the engine's own), so the headline, the triggers and "why this call" agree to the digit
    call_views = {key: _CallView.of(result) for key, result in trend_results.items()}
    outcomes = evaluate_triggers(triggers, call_views)
    by_key: dict[tuple[str, str], list[TriggerOutcome]] = {}
    for outcome in outcomes:
        by_key.setdefault((outcome.trigger.species, outcome.trigger.measure), []).append(outcome)

    shared = _Shared(
        programme=programme, season=int(season), names=names, events=events_df, method_frame=method_df,
        changes=changes, change_species=change_species,
        site_of=({str(s): str(t) for s, t in zip(stations[C.STATION], stations[C.SITE], strict=True)}
                 if stations is not None and C.SITE in stations.columns else {}),
        stations=stations, sites=sites, station_changes=station_changes or {}, gradients=gradients or {},
        outcomes=by_key, power=_power_rows(_frame(power, "power"), names),
    )
    entries = [_species_entry(i, key, result, shared) for i, (key, result) in enumerate(call_views.items())]
    summary = [row for row, _section in entries]
    families = {row.family for row in summary}
    margins = {row.margin for row in summary}
    random_effects = {effect for key in call_views for effect in (_attr(call_views[key], "random_sd", {}) or {})}
    comparison, note = _comparison(summary, previous, corrections, names)
    return ReportContext(
        title=report_title(programme.name, season),
        programme=programme, season=int(season), generated=generated,
        headline=_headline(summary, outcomes, names),
        summary=tuple(summary), triggers=tuple(outcomes), comparison=comparison, comparison_note=note,
        species=tuple(section for _row, section in entries),
        estimates=tuple(_estimate_rows(_frame(estimates, "estimates"), names, site_names)),
        coverage=_coverage(_frame(coverage, "coverage"), _frame(quality_flags, "quality_flags"), summary,
                           site_names),
        power=tuple(shared.power.values()), methods=_methods(families, margins, software, random_effects),
        cautions=_cautions(programme, stations, margins),
        sites=dict(sites or {}), names=names, site_names=site_names, scope=scope, photos=tuple(photos),
    )


# --------------------------------------------------------------------------- one function per section
@dataclass(frozen=True)
class _Shared:
    """What every species' entry reads: the programme, names, marks, maps and trigger outcomes."""

    programme: ProgrammeInfo
    season: int
    names: Mapping[str, str]
    events: pd.DataFrame | None
    method_frame: pd.DataFrame | None
    changes: Sequence[MethodChange]
    change_species: Sequence[str | None]
    site_of: Mapping[str, str]
    stations: pd.DataFrame | None
    sites: Mapping[str, object] | None
    station_changes: Mapping[tuple[str, str], pd.DataFrame]
    gradients: Mapping[tuple[str, str], GradientData]
    outcomes: Mapping[tuple[str, str], Sequence[TriggerOutcome]]
    power: Mapping[tuple[str, str], PowerRow]


def _power_rows(power_df: pd.DataFrame | None, names: Mapping[str, str]) -> dict[tuple[str, str], PowerRow]:
    """The power table: the smallest steady fall each species' monitoring can detect."""
    power_rows: dict[tuple[str, str], PowerRow] = {}
    if power_df is None or not len(power_df):
        return power_rows
    _require(power_df, [C.SPECIES, C.MEASURE, "detectable_change"], "power")
    for row in power_df.to_dict("records"):
        sp, ms = str(row[C.SPECIES]), str(row[C.MEASURE])
        pw = float(row.get("power", 0.8) or 0.8)
        ns = row.get("n_stations")
        ny = row.get("n_years")
        ns = None if ns is None or (isinstance(ns, float) and math.isnan(ns)) else int(ns)
        ny = None if ny is None or (isinstance(ny, float) and math.isnan(ny)) else int(ny)
        change = row.get("detectable_change")
        change = None if change is None or not math.isfinite(float(change)) else float(change)
        if change is None:  # never "nan%": say that it could not be computed, and why
            text = detectable_change_not_computed_sentence(str(row.get("note") or ""))
        else:
            text = detectable_fall_sentence(change, pw, ns, ny)
        power_rows[(sp, ms)] = PowerRow(sp, names.get(sp, sp), MEASURE_LABEL.get(ms, ms), change, pw, ns, ny, text)
    return power_rows


def _species_entry(i: int, key: tuple[str, str], result, shared: _Shared) -> tuple[SummaryRow, SpeciesSection]:
    """One species and measure: its summary row and its section."""
    sp, ms = key
    name = shared.names.get(sp, sp)
    annual = Interval.from_any(_attr(result, "annual_change"))
    period = Interval.from_any(_attr(result, "period_change"))
    first, last = (int(y) for y in _attr(result, "years"))
    call = str(_attr(result, "call", C.CALL_UNCLEAR))
    programme = shared.programme
    margin = float(programme.margin if programme.margin is not None else _attr(result, "margin", DEFAULT_CHANGE_MARGIN))
    family = str(_attr(result, "family", ""))
    n_stations = int(_attr(result, "n_stations", 0))
    n_years = int(_attr(result, "n_years", last - first + 1))
    outs = shared.outcomes.get(key, ())
    trigger_state, trigger_text = trigger_cell([o.fired for o in outs])
    # k-of-n and cover rates are changes in the odds: labelled so wherever they are printed, and a
    # share's row leads with the change of the share itself (percentage points)
    odds = str(_attr(result, "change_scale", "count") or "count") != "count"
    numbers = TrendNumbers(annual.estimate, annual.lower, annual.upper, period.estimate, first, last, call, margin)
    level = _level_numbers(_attr(result, "level_change"))
    texts = summary_texts(numbers, period.lower, period.upper, odds=odds, level=level)
    share_change = (Interval(level.difference, level.difference_lower, level.difference_upper)
                    if odds and level is not None and level.is_share else None)
    row = SummaryRow(
        species=sp, species_name=name, measure=ms, measure_label=MEASURE_LABEL.get(ms, ms), anchor=f"sp-{i + 1}",
        call=call, call_label=CALL_LABEL.get(call, call), marker=CALL_MARKER.get(call, "?"),
        annual_change=annual, period_change=period,
        texts=texts,
        first_year=first, last_year=last, n_stations=n_stations, n_years=n_years,
        n_obs=int(_attr(result, "n_obs", 0)), family=family, margin=margin,
        trigger_state=trigger_state, trigger_text=trigger_text,
        share_change=share_change,
    )
    if odds and level is not None:
        paragraph = odds_trend_sentence(name, ms, numbers, level)
    else:
        paragraph = trend_sentence(name, ms, numbers) + ("" if level is None else " " + level_sentence(level))
    return row, _species_section(i, row, result, paragraph, shared)


def _species_section(i: int, row: SummaryRow, result, paragraph: str, shared: _Shared) -> SpeciesSection:
    """A species' section: its paragraph, caveats, figures, triggers, power and advice."""
    sp, ms, name = row.species, row.measure, row.species_name
    first, last = row.first_year, row.last_year
    random_sd = dict(_attr(result, "random_sd", {}) or {})
    diagnostics = tuple(
        (str(getattr(d, "code", "")), str(getattr(d, "message", "")), str(getattr(d, "severity", "warning")))
        for d in (_attr(result, "diagnostics", ()) or ())
    )
    applies = [_change_applies(shared.method_frame, k, ms) for k in range(len(shared.changes))]
    sp_changes = [(c, s) for c, s, ok in zip(shared.changes, shared.change_species, applies, strict=True)
                  if ok and (s is None or s == sp)]
    caveats = caveat_sentences(
        row.n_stations, row.n_years, first, last,
        observation_sd=random_sd.get("observation"),
        family=row.family, dispersion=_attr(result, "dispersion"),
        method_changes=[c for c, _ in sp_changes], diagnostics=diagnostics,
        converged=bool(_attr(result, "converged", True)),
    )
    changes_df = shared.station_changes.get((sp, ms))
    species_sites = None
    if changes_df is not None and len(changes_df) and shared.site_of:
        species_sites = {shared.site_of[s] for s in changes_df[C.STATION].astype(str) if s in shared.site_of}
    marks = _marks_for(sp, shared.events, [c for c, _ in sp_changes], [s for _, s in sp_changes], first, last,
                       species_sites)
    indices = _attr(result, "indices")
    fitted = _attr(result, "fitted_trend")
    # the yearly estimates and the fitted line on the measure's own scale, one baseline, where the fit has them
    yearly, line = _attr(result, "yearly"), _attr(result, "trend_line")
    value_label = ""
    if yearly is not None and line is not None and len(yearly):
        indices = pd.DataFrame(yearly).rename(columns={"estimate": "index"})
        fitted = line
        value_label = str(_attr(result, "natural_unit", "") or "")
    figures, station_frame = _species_figures(i, row, indices, value_label, marks, changes_df, shared)
    outs = tuple(shared.outcomes.get((sp, ms), ()))
    model_text = model_sentence(describe_family(row.family), row.n_obs, row.n_stations,
                                int(_attr(result, "n_sites", 0) or 0), row.n_years, first, last)
    fired_here = any(o.fired for o in outs)
    advice = None if fired_here else decline_advice(name, row.call, row.annual_change.estimate,
                                                    row.annual_change.upper, bool(outs), row.margin)
    return SpeciesSection(
        summary=row, paragraph=paragraph, caveats=tuple(caveats),
        call_reason=str(_attr(result, "call_reason", "")), model_text=model_text,
        indices=None if indices is None else pd.DataFrame(indices)[[C.YEAR, "index", "lower", "upper"]],
        fitted_trend=None if fitted is None else pd.DataFrame(fitted)[[C.YEAR, "fit", "lower", "upper"]],
        marks=marks, stations=station_frame, station_changes=changes_df, gradient=shared.gradients.get((sp, ms)),
        figures=tuple(figures), triggers=outs,
        power=shared.power.get((sp, ms)), advice=advice, interval_method=result.interval_method,
        value_label=value_label,
    )


def _species_figures(i: int, row: SummaryRow, indices, value_label: str, marks: Sequence[EventMark],
                     changes_df: pd.DataFrame | None, shared: _Shared) -> tuple[list[FigureRef], pd.DataFrame | None]:
    """A species' figures (yearly estimates, map of stations' own changes, gradient) with their alt text
    and captions, and the stations the map shows."""
    sp, ms, name = row.species, row.measure, row.species_name
    stem = f"{i + 1:02d}-{slug(sp)}-{slug(ms)}"
    figures = []
    if indices is not None and len(indices):
        figures.append(FigureRef(
            key=f"{stem}-indices", kind="indices",
            alt=indices_figure_alt(name, row.measure_label, row.first_year, row.last_year, row.texts.annual_text,
                                   sorted({f"{m.label} {m.year}" for m in marks if m.kind == "event"}),
                                   sorted({str(m.year) for m in marks if m.kind == "method"})),
            caption=indices_figure_caption(value_label, row.first_year),
        ))
    stations, station_frame = shared.stations, None
    if stations is not None and len(stations):
        _require(stations, [C.STATION, C.X, C.Y], "stations")
        station_frame = stations
        if changes_df is not None and len(changes_df):
            _require(changes_df, [C.STATION, "annual_change"], "station_changes")
            values = pd.to_numeric(changes_df["annual_change"], errors="coerce")
            n_fall = int((values < 0).sum())
            n_rise = int((values >= 0).sum())
            n_none = int(len(stations) - n_fall - n_rise)
        else:
            n_fall = n_rise = 0
            n_none = len(stations)
        figures.append(FigureRef(
            key=f"{stem}-map", kind="map",
            alt=map_figure_alt(len(stations), len(shared.sites) if shared.sites else 0, name, n_fall, n_rise, n_none),
            caption=MAP_FIGURE_CAPTION,
        ))
    gradient = shared.gradients.get((sp, ms))
    if gradient is not None:
        _require(gradient.frame, ["gradient", "value"], "gradient")
        g = gradient.frame[["gradient", "value"]].dropna()
        figures.append(FigureRef(
            key=f"{stem}-gradient", kind="gradient",
            alt=gradient_figure_alt(gradient.value_label, name, gradient.gradient_label, shared.season, len(g),
                                    figure_number(g["gradient"].min()), figure_number(g["gradient"].max())),
            caption=gradient_figure_caption(shared.season, gradient.value_label, gradient.gradient_label),
        ))
    return figures, station_frame


def _estimate_rows(estimates_df: pd.DataFrame | None, names: Mapping[str, str],
                   site_names: Mapping[str, str]) -> list[EstimateRow]:
    """This season's estimates, one row per species, measure, site and quantity."""
    estimate_rows: list[EstimateRow] = []
    if estimates_df is None or not len(estimates_df):
        return estimate_rows
    _require(estimates_df, [C.SPECIES, C.MEASURE, C.SITE, "quantity", "estimate"], "estimates")
    for row in estimates_df.to_dict("records"):
        q = str(row["quantity"])
        label, _unit = QUANTITY_LABEL.get(q, (q, ""))
        lo, hi = row.get("lower"), row.get("upper")
        lo = None if lo is None or pd.isna(lo) else float(lo)
        hi = None if hi is None or pd.isna(hi) else float(hi)
        ns = row.get("n_stations")
        ns = None if ns is None or pd.isna(ns) else int(ns)
        value = float(row["estimate"])
        # one unit for the estimate and both bounds of a row (per ha when the density is tiny)
        scale = density_unit(max(abs(value), abs(hi or 0.0))) if q == "density" else None
        notes: list[str] = []
        counted = row.get("counted")
        if q == "total" and lo is not None and counted is not None and not pd.isna(counted) \
                and counted > 0 and abs(lo - float(counted)) < 0.5:
            notes.append(total_floor_note(float(counted)))
        site = str(row[C.SITE])
        estimate_rows.append(EstimateRow(
            species=str(row[C.SPECIES]), species_name=names.get(str(row[C.SPECIES]), str(row[C.SPECIES])),
            measure_label=MEASURE_LABEL.get(str(row[C.MEASURE]), str(row[C.MEASURE])),
            site=site, quantity=q, quantity_label=label,
            estimate=value, lower=lo, upper=hi,
            estimate_text=quantity_text(q, value, scale),
            interval_text=quantity_interval_text(q, lo, hi, scale),
            n_stations=ns, site_name=site_names.get(site, ""), notes=tuple(notes),
            few_quadrats=ns is not None and ns < FEW_QUADRATS,
        ))
    return estimate_rows


def _coverage(coverage_df: pd.DataFrame | None, flags_df: pd.DataFrame | None, summary: Sequence[SummaryRow],
              site_names: Mapping[str, str]) -> Coverage | None:
    """Data coverage: stations due and visited by site, seasons behind each trend, open quality flags."""
    if coverage_df is None and flags_df is None:
        return None
    site_rows: list[CoverageRow] = []
    total = None
    if coverage_df is not None and len(coverage_df):
        _require(coverage_df, [C.SITE, "due", "visited", "missed", "inaccessible"], "coverage")

        def cov_row(site, due, visited, missed, inaccessible):
            return CoverageRow(str(site), int(due), int(visited), int(missed), int(inaccessible),
                               visited_text(visited, due), site_names.get(str(site), ""))

        for r in coverage_df.to_dict("records"):
            site_rows.append(cov_row(r[C.SITE], r["due"], r["visited"], r["missed"], r["inaccessible"]))
        total = cov_row("All sites", *(int(coverage_df[c].sum()) for c in ("due", "visited", "missed", "inaccessible")))
    seasons = tuple(SeasonsRow(r.species, r.species_name, r.measure_label, r.n_years, r.first_year, r.last_year)
                    for r in summary)
    flags: list[QualityFlag] = []
    if flags_df is not None and len(flags_df):
        _require(flags_df, ["message"], "quality_flags")
        for r in flags_df.to_dict("records"):
            if "status" in r and str(r["status"]).lower() != "open":
                continue

            def text(v):
                return "" if v is None or (isinstance(v, float) and math.isnan(v)) else str(v)

            flags.append(QualityFlag(text(r.get(C.STATION)), season_label(r.get(C.YEAR)),
                                     text(r.get(C.SPECIES)), plain_measures(text(r["message"]))))
    return Coverage(tuple(site_rows), total, seasons, tuple(flags))


def _comparison(summary: Sequence[SummaryRow], previous: Mapping | None, corrections: Mapping[str, int] | None,
                names: Mapping[str, str]) -> tuple[tuple | None, str]:
    """The comparison of this season's calls with last season's report, and the line above it."""
    if previous is None:
        return None, ""
    comparison = tuple(compare_with_previous([r.to_dict() for r in summary], previous,
                                             corrections=corrections, names=names))
    return comparison, comparison_note(previous.get("season", "last year"), sum(c.changed for c in comparison))


def _headline(summary: Sequence[SummaryRow], outcomes: Sequence[TriggerOutcome],
              names: Mapping[str, str]) -> tuple[str, ...]:
    """The "At a glance" lines."""
    fired = [f"{names.get(o.trigger.species, o.trigger.species)} "
             f"({MEASURE_LABEL.get(o.trigger.measure, o.trigger.measure)})" for o in outcomes if o.fired]
    counts = [(c, sum(r.call == c for r in summary))
              for c in (C.CALL_DECLINING, C.CALL_RISING, C.CALL_STABLE, C.CALL_UNCLEAR)]
    approaching = [o for o in outcomes if not o.fired and o.years_to_threshold is not None]
    return headline_sentences(fired, counts, len(summary), len(approaching))


def _methods(families: set[str], margins: set[float], software: Mapping[str, str] | None,
             random_effects: set[str]) -> Methods:
    family_list = "; ".join(describe_family(f) for f in sorted(families) if f)
    margin = margin_text(margins)
    return Methods(methods_paragraphs(family_list, random_effects, margin), margin, REFERENCES,
                   software_versions(software))


def _cautions(programme: ProgrammeInfo, stations: pd.DataFrame | None, margins: set[float]) -> tuple[str, ...]:
    placements = []
    if stations is not None and "placement" in stations.columns:
        placements = [str(p) for p in stations["placement"].dropna()]
    if not placements:
        placements = [programme.placement]
    non_probability = [p for p in placements if p not in PROBABILITY_PLACEMENTS]
    return caution_sentences(placements, non_probability, margin_text(margins))


__all__ = [
    "Coverage", "CoverageRow", "EstimateRow", "FigureRef", "GradientData", "Interval", "Methods", "Photo",
    "PowerRow", "StationPhotos",
    "ProgrammeInfo", "QualityFlag", "ReportContext", "SeasonsRow", "SpeciesSection", "SummaryRow",
    "build_report_context", "signed_percent", "slug", "software_versions", "CallChange",
]
