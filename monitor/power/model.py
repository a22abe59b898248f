"""What a power study is made of: the population model, the change to detect, the design.

The population model is the one the trend engine fits (``monitor.trend``), written on the link
scale for station ``i`` in site ``j`` in year offset ``t`` (0 = first survey year)::

    eta_ijt = b0 + log(a) [counts only] + beta * t + u_i + v_j + w_t + g_jt + e_ijt
    u_i ~ N(0, (s_station * a**-b)^2),  v_j ~ N(0, s_site^2),  e_ijt ~ N(0, (s_obs * a**-b)^2)
    w_t ~ N(0, s_year^2)       one fluctuation a year shared by every station (weather: good and bad years);
                               independent, or a stationary AR(1) over years: corr(w_t, w_t') = rho^|t - t'|
    g_jt ~ N(0, s_site_year^2) a site's own fluctuation in year t

    poisson-lognormal  y ~ Poisson(exp(eta))
    poisson            y ~ Poisson(exp(eta))                      (no e)
    negbin             y ~ NB2(mean exp(eta), size theta * a**(2b)) (no e)
    binomial           k ~ Binomial(n, expit(eta))                 (e optional)
    logit-normal       logit(cover/100) = eta + r,  r ~ N(0, (s_res * a**-b)^2)
    lognormal          log(y) = eta + r,  r ~ N(0, (s_res * a**-b)^2)   (a positive continuous value)

The families are the registry's objects (``monitor.families``): each simulates its own response
(``ModelFamily.simulate``) and gives the per-visit variance of the approximation
(``ModelFamily.visit_variance``); the dispersion is the field its ``dispersion_field`` names.

``a`` is the quadrat area relative to the reference area at which the variance components were
estimated, and ``b`` the user's exponent in ``SD proportional to area**-b``; beta = log(1 + r)
for a steady annual change ``r``.  The year and site-by-year effects are shared by many quadrats,
so quadrat area does not scale them.  Because stations in one year are not independent, the
information about a trend comes from the number of years (Urquhart, Paulsen & Larsen 1998;
Piepho & Ogutu 2002).

References
----------
Urquhart, N. S., Paulsen, S. G. & Larsen, D. P. (1998) Monitoring for policy-relevant regional
  trends over time. Ecological Applications 8(2), 246-257.
Piepho, H.-P. & Ogutu, J. O. (2002) A simple mixed model for trend analysis in wildlife
  populations. Journal of Agricultural, Biological, and Environmental Statistics 7(3), 350-360.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from monitor import columns as col
from monitor import measures
from monitor.errors import DesignError, EstimationError, InputError
from monitor.families import COUNT, NAMES
from monitor.families import family as family_of
from monitor.power.panels import RevisitDesign, parse_revisit
from monitor.settings import DEFAULT_CHANGE_MARGIN

FAMILIES = NAMES   # the registry's families (monitor.families), the trend engine's
SIDES = ("two-sided", "decline", "rise")


def _default_measure(family: str, trials: int) -> str:
    """The measure a simulated table carries by default: the first measure the family serves
    (presence for binomial data with one trial); a family no measure serves yet writes counts."""
    fam = family_of(family)
    if fam.has_trials and trials == 1:
        return col.MEASURE_PRESENCE
    return next((m for m in col.MEASURES if fam.serves(m)), col.MEASURE_COUNT)


@dataclass(frozen=True)
class VarianceComponents:
    """Population model for simulation: family, mean level and variance components.

    Parameters
    ----------
    family : str
        One of ``FAMILIES`` (the trend engine's families, ``monitor.families``).
    intercept : float
        ``b0``: link-scale level in the first survey year for a station and site with zero random
        effects, at the reference quadrat area [log count, or logit of a proportion].
    station_sd, site_sd : float
        Standard deviations of the station and site random intercepts [link scale].
    observation_sd : float
        Observation-level random effect SD (overdispersion) for poisson-lognormal and binomial.
    residual_sd : float
        Residual SD for logit-normal and lognormal [link scale] (their ``dispersion_field``).
    year_sd : float
        SD of the year effect shared by every station (w_t) [link scale].
    year_rho : float
        Correlation of consecutive years' effects: 0 (default) independent years, else a stationary
        order-1 autoregression with corr(w_t, w_t') = year_rho^|t - t'| (the trend engine's
        ``--year-effect ar1``); -1 < year_rho < 1.
    site_year_sd : float
        SD of the site-by-year effect (g_jt) [link scale].
    theta : float or None
        NB2 size for negbin (variance = mu + mu^2/theta; its ``dispersion_field``).
    trials : int
        ``n`` for binomial measures: grid cells, pins, or 1 for presence.
    measure : str or None
        The measure whose columns the simulated table carries; by default count for count
        families, frequency for binomial, cover for logit-normal.
    quadrat_area : float or None
        Reference quadrat area [m^2] at which these components hold.
    stations_per_site : float
        Used to set the number of sites when a design does not give it.
    cover_resolution : float or None
        Logit-normal only: cover is recorded to this step [percent] (e.g. 1), so small covers
        round to 0 as in the field; None keeps it continuous.  The trend engine adjusts the
        logit by the smallest non-zero cover, so the recording step changes the analysis.
    """

    family: str
    intercept: float
    station_sd: float = 0.0
    site_sd: float = 0.0
    observation_sd: float = 0.0
    residual_sd: float = 0.0
    year_sd: float = 0.0
    site_year_sd: float = 0.0
    theta: float | None = None
    trials: int = 1
    measure: str | None = None
    quadrat_area: float | None = None
    stations_per_site: float = 10.0
    cover_resolution: float | None = None
    year_rho: float = 0.0

    def __post_init__(self) -> None:
        try:
            fam = family_of(self.family)
        except InputError:
            raise DesignError(f"family {self.family!r}: expected one of {', '.join(FAMILIES)}") from None
        for name in ("station_sd", "site_sd", "observation_sd", "residual_sd", "year_sd", "site_year_sd"):
            value = getattr(self, name)
            if not (value >= 0 and math.isfinite(value)):
                raise DesignError(f"{name} must be a finite number >= 0, got {value!r}")
        if not (-1 < self.year_rho < 1):
            raise DesignError(f"year_rho (AR(1) correlation of consecutive years) must lie strictly between "
                              f"-1 and 1, got {self.year_rho!r}")
        field_ = fam.dispersion_field
        if field_ is not None and not (getattr(self, field_) is not None and getattr(self, field_) > 0):
            raise DesignError(f"{self.family} needs {field_} > 0 ({fam.dispersion_name})")
        if self.trials < 1:
            raise DesignError("trials must be at least 1")
        if self.cover_resolution is not None and not 0 < self.cover_resolution <= 50:
            raise DesignError("cover_resolution must lie in (0, 50] percent")
        if self.stations_per_site <= 0:
            raise DesignError("stations_per_site must be positive")
        if self.measure is None:
            object.__setattr__(self, "measure", _default_measure(self.family, self.trials))

    @classmethod
    def from_mean(cls, family: str, mean: float, **kwargs: float) -> VarianceComponents:
        """Build components from a mean level on the data scale.

        For families on the log scale ``mean`` is the expected count (or value) per quadrat over
        stations, sites and observations in the first year, so
        ``b0 = log(mean) - (s_station^2 + s_site^2 + s_obs^2 [+ s_res^2])/2`` (lognormal mean).
        For binomial and logit-normal ``mean`` is the proportion (0-1) of a typical station,
        ``b0 = logit(mean)``.
        """
        sd2 = sum(kwargs.get(k, 0.0) ** 2 for k in ("station_sd", "site_sd", "observation_sd", "year_sd", "site_year_sd"))
        fam = family_of(family)
        if fam.log_scale:
            if mean <= 0:
                raise DesignError("mean count must be positive")
            if fam.gaussian:   # the residual is on the log scale too
                sd2 += kwargs.get("residual_sd", 0.0) ** 2
            b0 = math.log(mean) - sd2 / 2
        else:
            if not 0 < mean < 1:
                raise DesignError("mean proportion must lie strictly between 0 and 1")
            b0 = math.log(mean / (1 - mean))
        return cls(family=family, intercept=b0, **kwargs)


def components_from_trend(result: object, *, trials: int | None = None, data: pd.DataFrame | None = None,
                          quadrat_area: float | None = None) -> VarianceComponents:
    """Variance components and mean level taken from a fitted ``monitor.trend.TrendResult``.

    Uses ``result.family``, ``result.measure``, ``result.random_sd`` (keys ``station``, ``site``,
    ``observation``, and ``year`` and ``site_year`` where the model carried a year effect), the AR(1)
    correlation ``result.rho["year"]`` where the year effect was fitted as ``ar1``,
    ``result.dispersion`` (the family's dispersion: NB2 size or residual SD), and the fitted level in the first
    year from ``result.fitted_trend`` when present, else from the intercept and slope in
    ``result.params``.

    For frequency and pin hits the number of cells or pins is ``trials`` when given, else the
    programme's own grid or frame as its records show it (:func:`trials_from_data` of ``data``);
    there is no default, since a 25-cell grid and a 100-cell grid give very different power.
    """
    family = result.family
    fam = family_of(family)
    measure = result.measure
    random_sd = dict(getattr(result, "random_sd", {}) or {})
    dispersion = getattr(result, "dispersion", None)
    intercept = _first_year_level(result)
    n_sites = getattr(result, "n_sites", 0) or 0
    n_stations = getattr(result, "n_stations", 0) or 0

    def sd(key: str) -> float:
        value = random_sd.get(key, 0.0)
        return float(value) if value is not None and math.isfinite(float(value)) else 0.0

    kwargs: dict = dict(
        family=family,
        intercept=intercept,
        station_sd=sd("station"),
        site_sd=sd("site"),
        observation_sd=sd("observation"),
        year_sd=sd("year"),
        site_year_sd=sd("site_year"),
        year_rho=_year_rho(result),
        measure=measure,
        quadrat_area=quadrat_area,
        stations_per_site=(n_stations / n_sites) if n_sites else max(1.0, float(n_stations)),
    )
    if fam.dispersion_field is not None:
        kwargs[fam.dispersion_field] = float(dispersion)
    if fam.has_trials:
        if measure in measures.of_kind(measures.KIND_BINARY):
            trials = 1
        elif trials is None and data is not None:
            trials = trials_from_data(data, measure)
        if trials is None:
            raise EstimationError(f"the number of cells or pins of the {measure} records is not known: "
                                  "give it (trials)")
        kwargs["trials"] = int(trials)
    return VarianceComponents(**kwargs)


def _year_rho(result: object) -> float:
    """The fitted AR(1) correlation of the year effect (0 when the year effect was independent or absent)."""
    if getattr(result, "year_random", "none") != "ar1":
        return 0.0
    value = (getattr(result, "rho", None) or {}).get("year", 0.0)
    return float(value) if value is not None and math.isfinite(float(value)) else 0.0


def year_correlation(n_years: int, rho: float) -> np.ndarray:
    """Correlation matrix of the year effects over ``n_years`` consecutive years: ``rho^|t - t'|``."""
    lag = np.abs(np.subtract.outer(np.arange(n_years), np.arange(n_years)))
    return np.power(float(rho), lag) if rho != 0 else np.eye(n_years)


def ar1_series(z: np.ndarray, rho: float) -> np.ndarray:
    """A stationary AR(1) series of unit variance from independent standard normal draws ``z``.

    ``w_0 = z_0``, ``w_t = rho w_(t-1) + sqrt(1 - rho^2) z_t``: var(w_t) = 1 and corr(w_t, w_t') =
    rho^|t - t'| (Box & Jenkins, from memory).  With rho = 0 it returns ``z`` itself, so independent
    years draw exactly what they drew before the option existed (common random numbers).
    """
    z = np.asarray(z, float)
    if rho == 0 or z.size == 0:
        return z
    w = np.empty_like(z)
    w[0] = z[0]
    innovation = math.sqrt(1.0 - rho * rho)
    for t in range(1, z.size):
        w[t] = rho * w[t - 1] + innovation * z[t]
    return w


def trials_from_data(data: pd.DataFrame, measure: str) -> int | None:
    """The grid's cells (or the frame's pins) a programme records now: the commonest n in its last year.

    None when the table carries no n column for the measure or no value in it.
    """
    entry = measures.get(measure)
    column = entry.trials_column
    if column is None:
        return 1 if entry.kind == measures.KIND_BINARY else None
    if column not in data.columns or col.YEAR not in data.columns:
        return None
    known = data.dropna(subset=[column])
    if known.empty:
        return None
    last = known[known[col.YEAR] == known[col.YEAR].max()]
    return int(last[column].mode().iloc[0])


def _first_year_level(result: object) -> float:
    """Link-scale level of a typical station in the first fitted year."""
    params = result.params
    names = [str(n) for n in params.index]
    lower = [n.lower() for n in names]
    for key in ("intercept", "(intercept)", "const"):
        if key in lower:
            b0 = float(params.iloc[lower.index(key)])
            break
    else:
        raise EstimationError("the trend result carries no intercept; give the mean level instead")
    if getattr(result, "year_effect", "linear") == "factor":
        return b0  # level of the base year (the first year unless the analyst chose another)
    centre = getattr(result, "year_centre", None)
    first = result.years[0]
    if centre is None:
        return b0
    return b0 + float(result.slope) * (first - centre)


@dataclass(frozen=True)
class Scenario:
    """The change to detect and the test that should detect it.

    Parameters
    ----------
    annual_change : float
        Steady annual rate of change r [fraction per year]; beta = log(1 + r).
    alpha : float
        Significance level of the test of no trend.
    side : str
        ``"two-sided"``, ``"decline"`` (one-sided, H1: beta < 0) or ``"rise"`` (H1: beta > 0).
    margin : float
        Margin of change that matters [fraction per year], passed to the trend engine's call.
    """

    annual_change: float
    alpha: float = 0.05
    side: str = "two-sided"
    margin: float = DEFAULT_CHANGE_MARGIN

    def __post_init__(self) -> None:
        if not self.annual_change > -1:
            raise DesignError("annual change must be greater than -100 % a year")
        if not 0 < self.alpha < 1:
            raise DesignError("alpha must lie strictly between 0 and 1")
        if self.side not in SIDES:
            raise DesignError(f"test side {self.side!r}: expected one of {', '.join(SIDES)}")
        if not self.margin > 0:
            raise DesignError("margin of change must be a positive fraction per year")

    @classmethod
    def from_change(cls, change: float, over_years: float, **kwargs: object) -> Scenario:
        """A total change (e.g. -0.5 for a 50 % fall) spread as a steady rate over ``over_years``.

        ``over_years`` counts annual steps: a 50 % fall over 10 years means N(t+10) = 0.5 N(t),
        so r = 0.5**(1/10) - 1 = -6.7 % a year.
        """
        if over_years <= 0:
            raise DesignError("the change must be spread over a positive number of years")
        if not change > -1:
            raise DesignError("the total change must be greater than -100 %")
        return cls(annual_change=(1 + change) ** (1 / over_years) - 1, **kwargs)  # type: ignore[arg-type]

    @property
    def slope(self) -> float:
        """beta = log(1 + r), the link-scale slope per year."""
        return math.log1p(self.annual_change)

    def period_change(self, over_years: float) -> float:
        """Total change over ``over_years`` annual steps at this rate."""
        return (1 + self.annual_change) ** over_years - 1

    @property
    def true_call(self) -> str:
        """The call a perfect analysis would make: outside the margin is a trend, inside stable."""
        if self.annual_change < -self.margin:
            return col.CALL_DECLINING
        if self.annual_change > self.margin:
            return col.CALL_RISING
        return col.CALL_STABLE


@dataclass(frozen=True)
class Design:
    """A monitoring design to evaluate.

    Parameters
    ----------
    n_stations : int
        Permanent stations in the programme (over all panels).
    n_years : int
        Survey years, consecutive.
    revisit : str
        McDonald (2003) revisit notation, ``"[1-0]"`` every year, ``"[1-3]"`` ...
    n_sites : int or None
        Sites the stations are spread over; by default ``round(n_stations / stations_per_site)``
        of the variance components (at least 1).
    quadrat_area : float or None
        Quadrat area [m^2]; with the components' reference area it sets the scale factor a.
    area_exponent : float
        ``b`` in ``SD proportional to area**-b`` for the station and observation (or residual) SDs.
    missed_share : float
        Expected share of due visits that are missed; missed visits are dropped at random
        (missing is never zero).
    first_year : int
        Calendar year of the first survey (only labels the simulated table).
    revisit_shares : tuple of float or None
        Share of stations per member of a split-panel design; equal when omitted.
    """

    n_stations: int
    n_years: int
    revisit: str = "[1-0]"
    n_sites: int | None = None
    quadrat_area: float | None = None
    area_exponent: float = 0.0
    missed_share: float = 0.0
    first_year: int = 2001
    revisit_shares: tuple[float, ...] | None = None
    _panels: RevisitDesign = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        if self.n_stations < 1:
            raise DesignError("a design needs at least one station")
        if self.n_years < 2:
            raise DesignError("a trend needs at least two survey years")
        if not 0 <= self.missed_share < 1:
            raise DesignError("missed_share must lie in [0, 1)")
        if self.n_sites is not None and not 1 <= self.n_sites <= self.n_stations:
            raise DesignError("n_sites must lie between 1 and the number of stations")
        if self.quadrat_area is not None and self.quadrat_area <= 0:
            raise DesignError("quadrat area must be positive")
        object.__setattr__(self, "_panels", parse_revisit(self.revisit, self.revisit_shares))

    @classmethod
    def from_data(cls, data: pd.DataFrame, revisit: str = "[1-0]", **fields: object) -> Design:
        """The design a programme's long table shows: stations, years, sites and missed share.

        ``n_years`` is the span from the first to the last year; the missed share is the share
        of visits due under ``revisit`` that carry no value (at least 0).
        """
        for name in (col.STATION, col.YEAR):
            if name not in data.columns:
                raise DesignError(f"the table needs a '{name}' column to describe its design")
        if data.empty:
            raise DesignError("the table holds no visits")
        n_stations = int(data[col.STATION].nunique())
        first, last = int(data[col.YEAR].min()), int(data[col.YEAR].max())
        n_years = last - first + 1
        n_sites = int(data[col.SITE].nunique()) if col.SITE in data.columns else None
        due = parse_revisit(revisit).visited_share(n_years) * n_stations * n_years
        visits = len(data.drop_duplicates([col.STATION, col.YEAR]))
        missed = min(0.95, max(0.0, 1.0 - visits / due))
        values: dict = dict(n_stations=n_stations, n_years=n_years, revisit=revisit, n_sites=n_sites,
                            missed_share=round(missed, 4), first_year=first)
        values.update(fields)
        return cls(**values)

    @property
    def panels(self) -> RevisitDesign:
        return self._panels

    def with_(self, **changes: object) -> Design:
        """A copy with some fields changed."""
        return replace(self, **changes)  # type: ignore[arg-type]

    def sites_for(self, components: VarianceComponents) -> int:
        if self.n_sites is not None:
            return self.n_sites
        return int(min(self.n_stations, max(1, round(self.n_stations / components.stations_per_site))))

    def area_ratio(self, components: VarianceComponents) -> float:
        if self.quadrat_area is None or components.quadrat_area is None:
            return 1.0
        return self.quadrat_area / components.quadrat_area

    def label(self) -> str:
        parts = [f"{self.n_stations} stations", f"{self.n_years} years", self.revisit]
        if self.quadrat_area is not None:
            parts.append(f"{self.quadrat_area:g} m2")
        if self.missed_share:
            parts.append(f"{self.missed_share:.0%} missed")
        return ", ".join(parts)


def scaled_components(components: VarianceComponents, design: Design) -> dict[str, float]:
    """Link-scale quantities after quadrat-area scaling (see the module docstring)."""
    a = design.area_ratio(components)
    sd_factor = a ** (-design.area_exponent)
    # a bigger quadrat holds more individuals (the level moves by log a); a length or a share does not
    counts = COUNT in family_of(components.family).kinds
    theta = components.theta
    return {
        "intercept": components.intercept + (math.log(a) if counts else 0.0),
        "station_sd": components.station_sd * sd_factor,
        "site_sd": components.site_sd,
        "observation_sd": components.observation_sd * sd_factor,
        "residual_sd": components.residual_sd * sd_factor,
        "year_sd": components.year_sd,
        "site_year_sd": components.site_year_sd,
        "theta": (theta * a ** (2 * design.area_exponent)) if theta is not None else float("nan"),
    }


def mean_share_visited(design: Design) -> float:
    """Expected share of station-years visited: due share times (1 - missed share)."""
    return design.panels.visited_share(design.n_years) * (1 - design.missed_share)


__all__ = [
    "FAMILIES",
    "SIDES",
    "VarianceComponents",
    "Scenario",
    "Design",
    "components_from_trend",
    "scaled_components",
    "year_correlation",
    "ar1_series",
    "trials_from_data",
    "mean_share_visited",
]
