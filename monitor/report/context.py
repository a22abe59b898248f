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
from monitor.report.figures import EventMark
from monitor.report.fits import FitRow
from monitor.report.triggers import Trigger, TriggerOutcome, evaluate_triggers
from monitor.report.wording import (
    CALL_LABEL,
    CALL_MARKER,
    MEASURE_LABEL,
    LevelNumbers,
    MethodChange,
    TrendNumbers,
    caveat_sentences,
    decline_advice,
    detectable_change_not_computed_sentence,
    detectable_fall_sentence,
    level_sentence,
    odds_trend_sentence,
    percent,
    plain_measures,
    season_label,
    signed_percent,
    significant,
    summary_texts,
    total_floor_note,
    trend_sentence,
    whole,
)
from monitor.settings import DEFAULT_CHANGE_MARGIN, MIN_TREND_STATIONS, MIN_TREND_YEARS

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

FEW_QUADRATS = 10  # below this many quadrats an estimate is flagged (as monitor.estimate does; common practice)

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

    ``annual_text`` and ``period_text`` are printed as they stand; ``marker`` is
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
    annual_text: str
    period_text: str
    annual_estimate_text: str
    annual_ci_text: str
    period_estimate_text: str
    period_ci_text: str
    first_year: int
    last_year: int
    n_stations: int
    n_years: int
    n_obs: int
    family: str
    margin: float
    trigger_state: str
    trigger_text: str
    call_line: str = ""
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


def _sig(value: float, digits: int = 3) -> str:
    if value is None or not math.isfinite(value):
        return "n/a"
    if value == 0:
        return "0"
    magnitude = int(math.floor(math.log10(abs(value))))
    decimals = digits - 1 - magnitude
    rounded = round(value, decimals)  # negative decimals round to tens, hundreds, ...
    if decimals <= 0:
        return f"{rounded:,.0f}"
    return f"{rounded:,.{decimals}f}"


# each measure's estimate (monitor/measures.py) and a count's site total: column heading and unit
QUANTITY_LABEL = {"total": ("Estimated total", "")}
for _measure in measures.REGISTRY.values():
    QUANTITY_LABEL.setdefault(_measure.quantity, _measure.quantity_label)


def density_unit(value: float) -> tuple[str, float]:
    """The unit a density reads best in: per m², or per hectare when below 0.01 per m²."""
    if value is not None and math.isfinite(value) and 0 < abs(value) < 0.01:
        return "per ha", 10_000.0
    return "per m²", 1.0


def _format_quantity(quantity: str, value: float, scale: tuple[str, float] | None = None) -> str:
    """A value of this season's estimates to sensible significant figures (2; totals whole)."""
    if value is None or not math.isfinite(value):
        return "n/a"
    if quantity == "cover":
        return f"{significant(value, 2)}%"
    if quantity in ("frequency", "presence"):
        return f"{significant(value * 100, 2)}%"
    if quantity == "density":
        unit, factor = scale or density_unit(value)
        return f"{significant(value * factor, 2)} {unit}"
    return whole(value)


def _interval_text(quantity: str, lower: float | None, upper: float | None,
                   scale: tuple[str, float] | None) -> str:
    """``"8.2 to 18 per m²"``: the unit once, after the upper bound."""
    if lower is None or upper is None:
        return "—"
    if quantity == "density":
        unit, factor = scale or density_unit(upper)
        return f"{significant(lower * factor, 2)} to {significant(upper * factor, 2)} {unit}"
    return f"{_format_quantity(quantity, lower)} to {_format_quantity(quantity, upper)}"


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


def _first_lower(text: str) -> str:
    """Lower-case the first letter only: codes inside a label (transect SM-T) stay as stored."""
    return text[:1].lower() + text[1:] if text[:1].isupper() and not text[1:2].isupper() else text


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


def _figure_alt_indices(name: str, measure_label: str, first: int, last: int, annual_text: str,
                        marks: Sequence[EventMark]) -> str:
    text = (f"Yearly index of {name} ({measure_label}) from {first} to {last}, relative to {first}, with "
            f"95% intervals and the fitted trend line, {annual_text}.")
    events = sorted({f"{m.label} {m.year}" for m in marks if m.kind == "event"})
    methods = sorted({str(m.year) for m in marks if m.kind == "method"})
    if events:
        text += " Management events marked: " + ", ".join(events) + "."
    if methods:
        text += " Method changed in " + ", ".join(methods) + "."
    return text


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
    estimates_df = _frame(estimates, "estimates")
    coverage_df = _frame(coverage, "coverage")
    flags_df = _frame(quality_flags, "quality_flags")
    events_df = _frame(events, "events")
    power_df = _frame(power, "power")
    method_df = _frame(method_changes, "method_changes")
    changes, change_species = _method_changes(method_df)
    site_names = {str(k): str(v) for k, v in (site_names or {}).items() if not _blank(v)}
    site_of = ({str(s): str(t) for s, t in zip(stations[C.STATION], stations[C.SITE], strict=True)}
               if stations is not None and C.SITE in stations.columns else {})
    if events_df is not None and len(events_df):
        _require(events_df, [C.YEAR], "events")
    station_changes = station_changes or {}
    gradients = gradients or {}

    # one interval throughout: the one the call was made from (profile likelihood when the engine gives
    # it, else the engine's own), so the headline, the triggers and "why this call" agree to the digit
    call_views = {key: _CallView.of(result) for key, result in trend_results.items()}
    outcomes = evaluate_triggers(triggers, call_views)
    by_key: dict[tuple[str, str], list[TriggerOutcome]] = {}
    for outcome in outcomes:
        by_key.setdefault((outcome.trigger.species, outcome.trigger.measure), []).append(outcome)

    power_rows: dict[tuple[str, str], PowerRow] = {}
    if power_df is not None and len(power_df):
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
            power_rows[(sp, ms)] = PowerRow(sp, names.get(sp, sp), MEASURE_LABEL.get(ms, ms),
                                            change, pw, ns, ny, text)

    summary: list[SummaryRow] = []
    sections: list[SpeciesSection] = []
    margins = set()
    families = set()
    random_effects: set[str] = set()
    for i, ((sp, ms), result) in enumerate(call_views.items()):
        name = names.get(sp, sp)
        annual = Interval.from_any(_attr(result, "annual_change"))
        period = Interval.from_any(_attr(result, "period_change"))
        first, last = (int(y) for y in _attr(result, "years"))
        call = str(_attr(result, "call", C.CALL_UNCLEAR))
        margin = float(programme.margin if programme.margin is not None else _attr(result, "margin", DEFAULT_CHANGE_MARGIN))
        margins.add(margin)
        family = str(_attr(result, "family", ""))
        families.add(family)
        n_stations = int(_attr(result, "n_stations", 0))
        n_years = int(_attr(result, "n_years", last - first + 1))
        measure_label = MEASURE_LABEL.get(ms, ms)
        outs = by_key.get((sp, ms), [])
        if not outs:
            trigger_state, trigger_text = "none", "none set"
        elif any(o.fired for o in outs):
            trigger_state, trigger_text = "fired", "\u26a0 Fired"
        else:
            trigger_state, trigger_text = "not fired", "Not fired"
        anchor = f"sp-{i + 1}"
        # k-of-n and cover rates are changes in the odds: labelled so wherever they are printed, and a
        # share's row leads with the change of the share itself (percentage points)
        odds = str(_attr(result, "change_scale", "count") or "count") != "count"
        numbers = TrendNumbers(annual.estimate, annual.lower, annual.upper, period.estimate, first, last,
                               call, margin)
        level = _level_numbers(_attr(result, "level_change"))
        texts = summary_texts(numbers, period.lower, period.upper, odds=odds, level=level)
        annual_text = texts.annual_text
        share_change = (Interval(level.difference, level.difference_lower, level.difference_upper)
                        if odds and level is not None and level.is_share else None)
        row = SummaryRow(
            species=sp, species_name=name, measure=ms, measure_label=measure_label, anchor=anchor,
            call=call, call_label=CALL_LABEL.get(call, call), marker=CALL_MARKER.get(call, "?"),
            annual_change=annual, period_change=period,
            annual_text=annual_text,
            period_text=texts.period_text,
            annual_estimate_text=texts.annual_estimate_text,
            annual_ci_text=texts.annual_ci_text,
            period_estimate_text=texts.period_estimate_text,
            period_ci_text=texts.period_ci_text,
            first_year=first, last_year=last, n_stations=n_stations, n_years=n_years,
            n_obs=int(_attr(result, "n_obs", 0)), family=family, margin=margin,
            trigger_state=trigger_state, trigger_text=trigger_text,
            call_line=texts.call_line, share_change=share_change,
        )
        summary.append(row)

        if odds and level is not None:
            paragraph = odds_trend_sentence(name, ms, numbers, level)
        else:
            paragraph = trend_sentence(name, ms, numbers) + ("" if level is None else " " + level_sentence(level))
        random_sd = dict(_attr(result, "random_sd", {}) or {})
        random_effects.update(random_sd)
        diagnostics = tuple(
            (str(getattr(d, "code", "")), str(getattr(d, "message", "")), str(getattr(d, "severity", "warning")))
            for d in (_attr(result, "diagnostics", ()) or ())
        )
        applies = [_change_applies(method_df, k, ms) for k in range(len(changes))]
        sp_changes = [(c, s) for c, s, ok in zip(changes, change_species, applies, strict=True)
                      if ok and (s is None or s == sp)]
        caveats = caveat_sentences(
            n_stations, n_years, first, last,
            observation_sd=random_sd.get("observation"),
            family=family, dispersion=_attr(result, "dispersion"),
            method_changes=[c for c, _ in sp_changes], diagnostics=diagnostics,
            converged=bool(_attr(result, "converged", True)),
        )
        changes_df_sp = station_changes.get((sp, ms))
        species_sites = None
        if changes_df_sp is not None and len(changes_df_sp) and site_of:
            species_sites = {site_of[s] for s in changes_df_sp[C.STATION].astype(str) if s in site_of}
        marks = _marks_for(sp, events_df, [c for c, _ in sp_changes], [s for _, s in sp_changes], first, last,
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
        stem = f"{i + 1:02d}-{slug(sp)}-{slug(ms)}"
        figures = []
        if indices is not None and len(indices):
            figures.append(FigureRef(
                key=f"{stem}-indices", kind="indices",
                alt=_figure_alt_indices(name, measure_label, first, last, annual_text, marks),
                caption=("Yearly estimates (points, 95% intervals) and fitted trend (line, 95% band), "
                         + (f"as {value_label}." if value_label else f"relative to {first}.")),
            ))
        changes_df = station_changes.get((sp, ms))
        station_frame = None
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
                alt=(f"Map of {len(stations)} stations"
                     + (f" in {len(sites)} sites" if sites else "")
                     + f" coloured by each station's own annual change in {name}: {n_fall} falling "
                       f"(down triangles), {n_rise} rising (up triangles), {n_none} with too few years "
                       "(open circles)."),
                caption=("Stations coloured by their own change (orange falling, purple rising); open circles: "
                         "too few years for a station's own trend; grey crosses: never recorded there. "
                         "Grid north is up."),
            ))
        gradient = gradients.get((sp, ms))
        if gradient is not None:
            _require(gradient.frame, ["gradient", "value"], "gradient")
            g = gradient.frame[["gradient", "value"]].dropna()
            figures.append(FigureRef(
                key=f"{stem}-gradient", kind="gradient",
                alt=(f"{gradient.value_label} of {name} against {gradient.gradient_label} in {season} at "
                     f"{len(g)} stations, from {_sig(g['gradient'].min())} to {_sig(g['gradient'].max())}."),
                caption=f"{season}: {_first_lower(gradient.value_label)} against {_first_lower(gradient.gradient_label)}.",
            ))
        n_sites = int(_attr(result, "n_sites", 0) or 0)
        model_text = (
            f"Model: {describe_family(family)}; {row.n_obs:,} values from {n_stations} stations"
            + (f" in {n_sites} sites" if n_sites else "")
            + f", {n_years} seasons {first}–{last}."
        )
        has_trigger = bool(by_key.get((sp, ms)))
        fired_here = any(o.fired for o in by_key.get((sp, ms), ()))
        advice = None if fired_here else decline_advice(name, call, annual.estimate, annual.upper, has_trigger,
                                                               margin)
        sections.append(SpeciesSection(
            summary=row, paragraph=paragraph, caveats=tuple(caveats),
            call_reason=str(_attr(result, "call_reason", "")), model_text=model_text,
            indices=None if indices is None else pd.DataFrame(indices)[[C.YEAR, "index", "lower", "upper"]],
            fitted_trend=None if fitted is None else pd.DataFrame(fitted)[[C.YEAR, "fit", "lower", "upper"]],
            marks=marks, stations=station_frame, station_changes=changes_df, gradient=gradient,
            figures=tuple(figures), triggers=tuple(by_key.get((sp, ms), ())),
            power=power_rows.get((sp, ms)), advice=advice, interval_method=result.interval_method,
            value_label=value_label,
        ))

    # this season's estimates
    estimate_rows: list[EstimateRow] = []
    if estimates_df is not None and len(estimates_df):
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
                estimate_text=_format_quantity(q, value, scale),
                interval_text=_interval_text(q, lo, hi, scale),
                n_stations=ns, site_name=site_names.get(site, ""), notes=tuple(notes),
                few_quadrats=ns is not None and ns < FEW_QUADRATS,
            ))

    # coverage
    coverage_obj = None
    if coverage_df is not None or flags_df is not None:
        site_rows: list[CoverageRow] = []
        total = None
        if coverage_df is not None and len(coverage_df):
            _require(coverage_df, [C.SITE, "due", "visited", "missed", "inaccessible"], "coverage")

            def cov_row(site, due, visited, missed, inaccessible):
                share = f" ({visited / due * 100:.0f}%)" if due else ""
                return CoverageRow(str(site), int(due), int(visited), int(missed), int(inaccessible),
                                   f"{int(visited)} of {int(due)}{share}", site_names.get(str(site), ""))

            for r in coverage_df.to_dict("records"):
                site_rows.append(cov_row(r[C.SITE], r["due"], r["visited"], r["missed"], r["inaccessible"]))
            total = cov_row("All sites", *(int(coverage_df[c].sum())
                                           for c in ("due", "visited", "missed", "inaccessible")))
        seasons = tuple(SeasonsRow(r.species, r.species_name, r.measure_label, r.n_years, r.first_year,
                                   r.last_year) for r in summary)
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
        coverage_obj = Coverage(tuple(site_rows), total, seasons, tuple(flags))

    # comparison with last year
    comparison = None
    comparison_note = ""
    if previous is not None:
        comparison = tuple(compare_with_previous([r.to_dict() for r in summary], previous,
                                                 corrections=corrections, names=names))
        n_changed = sum(c.changed for c in comparison)
        prev_season = previous.get("season", "last year")
        comparison_note = (f"Compared with the report for {prev_season}: "
                           f"{n_changed} call{'s' if n_changed != 1 else ''} changed.")

    # headline
    headline: list[str] = []
    fired = [o for o in outcomes if o.fired]
    if fired:
        headline.append(f"{len(fired)} management trigger{'s have' if len(fired) != 1 else ' has'} fired: "
                        + "; ".join(f"{names.get(o.trigger.species, o.trigger.species)} "
                                    f"({MEASURE_LABEL.get(o.trigger.measure, o.trigger.measure)})"
                                    for o in fired) + ". Agreed responses are listed below.")
    counts = {c: sum(r.call == c for r in summary) for c in (C.CALL_DECLINING, C.CALL_RISING, C.CALL_STABLE,
                                                              C.CALL_UNCLEAR)}
    parts = [f"{n} {CALL_LABEL[c].lower()}" for c, n in counts.items() if n]
    headline.append(f"Of {len(summary)} species and measures: " + ", ".join(parts) + ".")
    approaching = [o for o in outcomes if not o.fired and o.years_to_threshold is not None]
    if approaching:
        headline.append(f"{len(approaching)} trigger{'s are' if len(approaching) != 1 else ' is'} being approached "
                        "at the current rate.")

    methods = _methods(families, margins, software, random_effects)
    cautions = _cautions(programme, stations, margins)
    return ReportContext(
        title=f"{programme.name}: monitoring report {season}",
        programme=programme, season=int(season), generated=generated, headline=tuple(headline),
        summary=tuple(summary), triggers=tuple(outcomes), comparison=comparison,
        comparison_note=comparison_note, species=tuple(sections), estimates=tuple(estimate_rows),
        coverage=coverage_obj, power=tuple(power_rows.values()), methods=methods, cautions=cautions,
        sites=dict(sites or {}), names=names, site_names=site_names, scope=scope, photos=tuple(photos),
    )


def _margin_text(margins: set[float]) -> str:
    if len(margins) == 1:
        return f"±{percent(next(iter(margins)))} a year"
    return "between " + " and ".join(f"±{percent(m)}" for m in (min(margins), max(margins))) + " a year"


def _methods(families: set[str], margins: set[float], software: Mapping[str, str] | None,
             random_effects: set[str]) -> Methods:
    family_list = "; ".join(describe_family(f) for f in sorted(families) if f)
    grouping = ("a random intercept for each station nested in its site" if "site" in random_effects
                else "a random intercept for each station")
    if "observer" in random_effects:
        grouping += ", and one for each observer"
    if "year" in random_effects:
        grouping += (", and a random effect for each year shared by all stations (good and bad years; the "
                     "intervals then rest on a t reference with degrees of freedom from the number of years, "
                     "Piepho & Ogutu 2002)")
    margin_text = _margin_text(margins)
    first = (
        "Each species and measure was analysed with a generalised linear mixed model fitted by maximum "
        f"likelihood (Laplace approximation; Breslow & Clayton 1993), with {grouping}, "
        "so that the trend is the typical change within stations rather than "
        f"a change in which stations were visited. Models used: {family_list}. Year as a continuous "
        "covariate gives the annual change, exp(slope) − 1, with its 95% interval (for frequencies, pin hits, "
        "presence and cover a change in the odds, p / (1 − p)); year as a factor gives the yearly estimates, "
        "shown with the fitted trend on the measure's own scale (mean over stations). The change over the "
        "period is the annual change compounded over the years between the first and last season."
    )
    second = (
        "The models assume that change is steady on the log (or logit) scale over the period, that stations "
        "differ only through their random effects, and that the method of recording stayed the same (changes "
        "are marked on the plots). Missed and inaccessible visits are treated as missing, never as zero. Each "
        "call compares the 95% interval of the annual change with zero and with a margin of "
        f"{margin_text}, the smallest change this programme treats as mattering: declining or rising "
        "when the interval lies clearly on one side, stable when it lies within the margin, unclear "
        f"otherwise, including whenever fewer than {MIN_TREND_STATIONS} stations or {MIN_TREND_YEARS} seasons "
        "are available (after Dixon & Pechmann 2005)."
    )
    return Methods((first, second), margin_text, REFERENCES, software_versions(software))


def _cautions(programme: ProgrammeInfo, stations: pd.DataFrame | None, margins: set[float]) -> tuple[str, ...]:
    placements = []
    if stations is not None and "placement" in stations.columns:
        placements = [str(p) for p in stations["placement"].dropna()]
    if not placements:
        placements = [programme.placement]
    non_prob = [p for p in placements if p not in PROBABILITY_PLACEMENTS]
    if non_prob:
        design = (f"Trends describe the monitored stations only: {len(non_prob)} of {len(placements)} "
                  f"station{'s were' if len(placements) != 1 else ' was'} not placed at random "
                  f"({', '.join(sorted(set(non_prob)))}), so they do not speak for the whole reserve.")
        if len(placements) == 1:
            design = ("Trends describe the monitored stations only: the stations were not placed at random "
                      f"({non_prob[0]}), so they do not speak for the whole reserve.")
    else:
        design = ("Stations were placed by a random (probability) design, so the trends speak for the "
                  "sampled area, within the intervals shown; they do not speak for places outside it.")
    return (
        design,
        "Management decisions rest with the land manager and local rules; this report informs them and does "
        "not make them.",
        f"A stable call means any change is smaller than the margin ({_margin_text(margins)}), not that "
        "there is none; an unclear call means the data cannot tell yet, not that nothing is happening.",
        "Indices are relative to the first season of each series; they are not population sizes.",
        "Missed and inaccessible visits are treated as missing, never as absences.",
    )


__all__ = [
    "Coverage", "CoverageRow", "EstimateRow", "FigureRef", "GradientData", "Interval", "Methods", "Photo",
    "PowerRow", "StationPhotos",
    "ProgrammeInfo", "QualityFlag", "ReportContext", "SeasonsRow", "SpeciesSection", "SummaryRow",
    "build_report_context", "signed_percent", "slug", "software_versions", "CallChange",
]
