r"""Trend models for permanent-quadrat monitoring: TrendModel -> TrendResult.

Models (i = a visit of station j in site s in year y; t = y - c, c the mid-point of the
first and last year with data)::

    count, "poisson"            log E[y_i] = b0 + b1 t + u_j + v_s + w_y
    count, "poisson-lognormal"  log E[y_i | e_i] = b0 + b1 t + u_j + v_s + w_y + e_i,  e_i ~ N(0, sd_obs^2)
    count, "negbin"             y_i ~ NB2(mu_i, theta), log mu_i = b0 + b1 t + u_j + v_s + w_y
    frequency / pin_hits / presence, "binomial"
                                k_i ~ Bin(n_i, p_i), logit p_i = b0 + b1 t + u_j + v_s + w_y (+ e_i)
    cover, "logit-normal"       z_i = logit(p_i) = b0 + b1 t + u_j + v_s + w_y + e_i,
                                p_i = cover_i / 100, e_i ~ N(0, sigma^2)   (linear mixed model, ML or REML)
    positive values, "lognormal"
                                log(y_i) = b0 + b1 t + u_j + v_s + w_y + e_i, e_i ~ N(0, sigma^2)
                                (linear mixed model on log y, ML or REML; exp(b1) - 1 is the annual
                                change of the geometric mean)

with u_j ~ N(0, sd_station^2), v_s ~ N(0, sd_site^2) (site optional) and w_y the year
effect: the fluctuation of a year shared by every station (weather), N(0, sd_year^2)
independently ("iid") or a stationary order-1 autoregression over calendar years ("ar1").
Optionally a site-by-year effect (sites fluctuate apart), an observer intercept crossed
with station, a random year slope by site (lme4's (t || site)), extra fixed covariates;
year as a factor (yearly estimates) instead of b1 t.

Each family is an object of the registry monitor.families (link, response, dispersion,
wording); a fit builds its own density object from it (monitor.trend.families), so the
registry's objects never hold a fit's data or fitted dispersion.

The year effect (Piepho & Ogutu 2002; Urquhart, Paulsen & Larsen 1998).  Station-years of
one year are not independent: the information about a trend comes from the number of
years.  Rule: the year effect is in the model by default when the series has at least
YEAR_EFFECT_MIN_YEARS (monitor/settings.py) years with data, the fewest with which a call is made at all
(a year SD from fewer years is barely estimable; shorter series are called "unclear"
anyway).  With a year effect the slope's interval, its profile interval and the call use
a t reference with the between-year (containment) df of the engine
(monitor.trend.glmm.coefficient_df: n_years - 2 for a straight-line trend) and the ML standard
error scaled to its REML equivalent, sqrt((n_years - 1 + k) / df) (see _ml_year_scale);
without it a normal reference.  The result says which (``df_method``, ``interval_label``).

Observation-level effect for k-of-n data (frequency, pin hits): binomial with a normal
observation effect, as glmer with (1 | obs) (Harrison 2015).  By default it is added when
the plain binomial fit shows overdispersion (Pearson chi2 / df above
OVERDISPERSION_RATIO with a chi-squared test p < OVERDISPERSION_P); presence (n = 1)
cannot carry one.

Cover transform: the plain logit z = log(p / (1 - p)) (the log odds of cover) when every
value lies strictly between 0 and 100 %; only when some are 0 or 100 % the adjusted logit
z = log((p + e) / (1 - p + e)) with e the smallest non-zero value of p and 1 - p
(Warton & Hui 2011); ``cover_adjust`` (percent) fixes e.  The result states the transform.

The trend: annual change exp(b1) - 1 [fraction per year]; for k-of-n data and cover that
is the change in the odds, and it is labelled so (``change_scale``).  The same trend on
the measure's own scale: ``trend_line`` (mean count per m^2 or per quadrat, % cover,
% of cells, pins or stations) and ``level_change`` (first year against last year of the
fitted line, difference and ratio with delta-method intervals).  Yearly estimates come
from the year-as-factor model on the same scale (``yearly``), so points and line share
one baseline; ``indices`` are the same yearly estimates relative to the base year, and
``fitted_trend`` the line relative to that same base.

Natural scale: the mean over stations and visits (population-averaged), i.e. the inverse
link averaged over the normal station, site and observation (and cover residual) effects:
count exp(eta + s^2/2); k of n E[expit(eta + s Z)] (Gauss-Hermite, 40 nodes); cover
100 (E[(1 + 2e) expit(z + s Z)] - e); a positive value (lognormal) exp(eta + s^2/2) with the
residual variance in s^2.  The year, site-by-year, observer and site-slope
effects are left out: the line is the trend in a typical year, and a point is one year.

Fitting: maximum likelihood by the Laplace approximation (or adaptive Gauss-Hermite
quadrature) with our own engine, monitor.trend.glmm.

References
----------
Bates, D., Maechler, M., Bolker, B. & Walker, S. (2015) J. Stat. Softw. 67(1), 1-48.
Bolker, B. M. et al. (2009) Generalized linear mixed models: a practical guide for
  ecology and evolution. Trends Ecol. Evol. 24(3), 127-135.
Dixon, P. M. & Pechmann, J. H. K. (2005) Ecology 86(7), 1751-1756.
Harrison, X. A. (2015) A comparison of observation-level random effect and beta-binomial
  models for modelling overdispersion in binomial data in ecology and evolution.
  PeerJ 3:e1114.
Piepho, H.-P. & Ogutu, J. O. (2002) A simple mixed model for trend analysis in wildlife
  populations. JABES 7(3), 350-360.
Urquhart, N. S., Paulsen, S. G. & Larsen, D. P. (1998) Monitoring for policy-relevant
  regional trends over time. Ecol. Appl. 8(2), 246-257.
Venzon, D. J. & Moolgavkar, S. H. (1988) A method for computing profile-likelihood-based
  confidence intervals. Applied Statistics 37(1), 87-94.
Warton, D. I. & Hui, F. K. C. (2011) The arcsine is asinine: the analysis of proportions
  in ecology. Ecology 92(1), 3-10.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd
from scipy.special import expit
from scipy.stats import chi2, norm
from scipy.stats import t as t_dist

from monitor import columns as C
from monitor import measures
from monitor.errors import Diagnostic, EstimationError, InputError, InputProblem
from monitor.families import NAMES, ModelFamily, families_for
from monitor.families import family as family_of
from monitor.families import logit_cover as logit_cover

from .call import DEFAULT_MARGIN, MIN_STATIONS, MIN_YEARS, classify_call
from .families import Poisson, density
from .glmm import YEAR_EFFECT_MIN_YEARS, GlmmFit, GlmmSpec, Term, default_year_effect, fit_glmm, year_terms
from .year_level import year_level_ar1

FAMILIES = NAMES   # the registry's family names (monitor.families)
YEAR_RANDOM = ("iid", "ar1", "none")   # the year effect: independent, AR(1) over calendar years, none
SLOPE = "year"          # name of the slope parameter (per year, link scale)
INTERCEPT = "(Intercept)"
# Overdispersion of k-of-n data, Pearson chi2 / df of the binomial fit: a ratio above 1.2
# widens a binomial interval by more than 10 % (sqrt(1.2) = 1.095); common practice
# thresholds lie between 1.2 and 2 (Bolker et al. 2009, box 3: "greater than 1").  The
# chi-squared test keeps small data sets from firing by chance.
OVERDISPERSION_RATIO = 1.2
OVERDISPERSION_P = 0.01
LOW_COVERAGE_FRACTION = 0.5  # common practice: a year with < half the median stations visited
NO_OBSERVER = "(not recorded)"   # the observer level of visits whose observer cell is blank
NATURAL_UNIT = {code: m.level_unit for code, m in measures.REGISTRY.items() if m.level_unit is not None}


def default_family(measure: str) -> str:
    """The default response family for a measure: its registry entry's (``monitor.measures``).

    count -> "poisson-lognormal"; frequency, pin_hits, presence -> "binomial" (with an
    observation-level effect where the data are overdispersed, see TrendModel);
    cover -> "logit-normal".
    """
    if measure not in measures.REGISTRY:
        raise InputError(f"unknown measure {measure!r}; expected one of {', '.join(C.MEASURES)}")
    return measures.REGISTRY[measure].family


@dataclass(frozen=True)
class Interval:
    """An estimate with its interval (fractions per year unless stated)."""

    estimate: float
    lower: float
    upper: float

    def to_dict(self) -> dict:
        return {"estimate": _num(self.estimate), "lower": _num(self.lower), "upper": _num(self.upper)}


@dataclass(frozen=True)
class LevelChange:
    """The fitted trend on the measure's own scale, first year against last year.

    ``first`` and ``last`` are the trend line's values (natural scale, ``unit``) with 95 %
    intervals; ``difference`` is last - first in the same unit (percentage points for a
    share) and ``ratio`` is last / first - 1 [fraction], both with delta-method intervals
    on the inference reference of the slope.
    """

    first_year: int
    last_year: int
    unit: str
    first: Interval
    last: Interval
    difference: Interval
    ratio: Interval

    def to_dict(self) -> dict:
        return {"first_year": self.first_year, "last_year": self.last_year, "unit": self.unit,
                "first": self.first.to_dict(), "last": self.last.to_dict(),
                "difference": self.difference.to_dict(), "ratio": self.ratio.to_dict()}


def _num(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def _rows(frame: pd.DataFrame) -> list[dict]:
    return [{k: (int(v) if k in ("year", "n_stations") else _num(v)) for k, v in r.items()}
            for r in frame.to_dict("records")]


@dataclass(frozen=True, eq=False)
class TrendResult:
    """The fitted trend of one species and measure (immutable).

    Beside the statsmodels-like ``params``, ``bse``, ``conf_int()``: ``annual_change``
    (exp(slope) - 1 with its 95 % interval on the reference named by ``df_method``),
    ``change_scale`` (what that change is a change of: "count", "odds", "odds of cover",
    "geometric mean"),
    ``yearly`` and ``trend_line`` (natural scale, ``natural_unit``), ``level_change``,
    ``indices`` (yearly estimates relative to ``base_year``), ``fitted_trend`` (the line
    relative to the same base), ``estimator`` (the engine's label: "joint-mode" is the fast
    path, not a maximum likelihood estimate) and ``cover_transform``.
    """

    measure: str
    family: str
    n_obs: int
    n_stations: int
    n_sites: int
    years: tuple[int, int]
    n_years: int
    params: pd.Series
    bse: pd.Series
    slope: float
    slope_se: float
    annual_change: Interval
    annual_change_profile: Interval | None
    period_change: Interval
    random_sd: dict[str, float]
    dispersion: float | None
    loglik: float
    aic: float
    df: int
    indices: pd.DataFrame
    fitted_trend: pd.DataFrame
    diagnostics: tuple[Diagnostic, ...]
    call: str
    call_reason: str
    margin: float
    converged: bool
    year_effect: str = "linear"
    method: str = "laplace"
    reml: bool = False
    year_centre: float = 0.0
    cover_eps: float | None = None
    vcov: pd.DataFrame | None = field(default=None, repr=False)
    year_random: str = "none"
    site_by_year: bool = False
    observation_effect: bool = False
    rho: dict[str, float] = field(default_factory=dict)
    slope_df: float = math.inf
    df_method: str = "z"
    se_scale: float = 1.0
    estimator: str = "ml-laplace"
    cover_transform: str | None = None
    change_scale: str = "count"
    natural_unit: str = ""
    yearly: pd.DataFrame | None = field(default=None, repr=False)
    trend_line: pd.DataFrame | None = field(default=None, repr=False)
    level_change: LevelChange | None = None
    base_year: int | None = None
    no_index_years: tuple[int, ...] = ()
    params_df: pd.Series | None = field(default=None, repr=False)

    @property
    def model_label(self) -> str:
        """The family in words, with the observation-level effect where there is one."""
        if family_of(self.family).observation_effect == "optional" and self.observation_effect:
            return "binomial with an observation-level effect"
        return self.family

    @property
    def change_label(self) -> str:
        """What the annual change is a change of, for a table heading or a sentence."""
        return family_of(self.family).change_label

    @property
    def interval_label(self) -> str:
        """The reference of the intervals in words: "t, 10 df" or "normal (z)"."""
        if math.isfinite(self.slope_df):
            return f"t, {self.slope_df:g} df"
        return "normal (z)"

    def _coef_reference(self) -> tuple[np.ndarray, np.ndarray]:
        """Per fixed effect: the reference df (inf: normal) and the factor on its standard error.

        The same rule as the slope's Wald interval and call (``_reference``): a fixed effect that
        is constant within years (intercept, slope, year-level covariates) has the t reference
        with the between-year df and, for an ML fit, the standard error times ``se_scale`` (the
        year stratum's REML-equivalent factor); the others the normal reference, unscaled.
        """
        df = (np.full(len(self.params), math.inf) if self.params_df is None
              else np.asarray(self.params_df.reindex(self.params.index), float))
        if self.params_df is None and math.isfinite(self.slope_df):
            # a result built without per-coefficient df: the slope's reference for the slope and intercept
            for name in (SLOPE, INTERCEPT):
                if name in self.params.index:
                    df[list(self.params.index).index(name)] = self.slope_df
        scale = np.where(np.isfinite(df), self.se_scale, 1.0)
        return df, scale

    def conf_int(self, alpha: float = 0.05) -> pd.DataFrame:
        """Wald intervals of the fixed effects (link scale): columns lower, upper.

        The reference is the one of the slope's Wald interval and call: with a year effect the
        fixed effects constant within years (intercept, slope) use the t reference with the
        between-year (containment) df, n_years - 2 for a straight-line trend, and the standard
        error times ``se_scale`` (ML fits; see ``df_method`` and ``_ml_year_scale``);
        the other fixed effects, and every fixed effect without a year effect, the normal (z).
        """
        df, scale = self._coef_reference()
        q = np.array([norm.ppf(1 - alpha / 2) if not math.isfinite(k) else t_dist.ppf(1 - alpha / 2, k)
                      for k in df]) * scale
        return pd.DataFrame({"lower": self.params - q * self.bse, "upper": self.params + q * self.bse})

    def to_frame(self) -> pd.DataFrame:
        """Fixed effects as a table: estimate, se, lower, upper (95 %, Wald), df, se_scale, reference.

        ``se`` is the maximum likelihood standard error; the interval is estimate -/+ quantile x
        se x ``se_scale``; ``df`` is the t reference's degrees of freedom (inf for the normal)
        and ``reference`` says it in words ("t, 10 df, SE x 1.095" or "normal (z)").
        """
        ci = self.conf_int()
        df, scale = self._coef_reference()
        words = [("normal (z)" if not math.isfinite(k) else
                  f"t, {k:g} df" + ("" if s == 1.0 else f", SE x {s:.4g}")) for k, s in zip(df, scale)]
        return pd.DataFrame({"estimate": self.params, "se": self.bse, "lower": ci["lower"], "upper": ci["upper"],
                             "df": df, "se_scale": scale, "reference": words}, index=self.params.index)

    def to_dict(self) -> dict:
        """A JSON-ready dict of the attributes above."""
        return {
            "measure": self.measure,
            "family": self.family,
            "model": self.model_label,
            "n_obs": int(self.n_obs),
            "n_stations": int(self.n_stations),
            "n_sites": int(self.n_sites),
            "years": [int(self.years[0]), int(self.years[1])],
            "n_years": int(self.n_years),
            "year_random": self.year_random,
            "site_by_year": bool(self.site_by_year),
            "observation_effect": bool(self.observation_effect),
            "estimator": self.estimator,
            "df_method": self.df_method,
            "slope": {"estimate": _num(self.slope), "se": _num(self.slope_se)},
            "slope_df": _num(self.slope_df),
            "change_scale": self.change_scale,
            "annual_change": self.annual_change.to_dict(),
            "annual_change_profile": None if self.annual_change_profile is None else self.annual_change_profile.to_dict(),
            "period_change": self.period_change.to_dict(),
            "natural_unit": self.natural_unit,
            "level_change": None if self.level_change is None else self.level_change.to_dict(),
            "cover_transform": self.cover_transform,
            "random_sd": {k: _num(v) for k, v in self.random_sd.items()},
            "ar1_correlation": {k: _num(v) for k, v in self.rho.items()},
            "dispersion": _num(self.dispersion),
            "loglik": _num(self.loglik),
            "aic": _num(self.aic),
            "df": int(self.df),
            "call": self.call,
            "call_reason": self.call_reason,
            "margin": _num(self.margin),
            "converged": bool(self.converged),
            "base_year": None if self.base_year is None else int(self.base_year),
            "indices": _rows(self.indices),
            "fitted_trend": _rows(self.fitted_trend),
            "yearly": [] if self.yearly is None else _rows(self.yearly),
            "trend_line": [] if self.trend_line is None else _rows(self.trend_line),
            "no_index_years": [int(y) for y in self.no_index_years],
            "diagnostics": [{"code": d.code, "message": d.message, "severity": d.severity} for d in self.diagnostics],
        }

    def summary(self) -> str:
        """A plain-text summary for people."""
        ac = self.annual_change
        lines = [
            f"Trend of {self.measure} ({self.model_label}, {'REML' if self.reml else 'ML'}, {self.method}), "
            f"{self.years[0]}-{self.years[1]}",
            f"  {self.n_obs} visits, {self.n_stations} stations, {self.n_sites} sites, {self.n_years} years",
            f"  year effect: {self.year_random}{'; site-by-year effect' if self.site_by_year else ''}; "
            f"estimator: {self.estimator}; intervals: {self.interval_label}"
            + ("" if self.df_method == "z" else f" ({self.df_method})"),
            f"  {self.change_label}: {100 * ac.estimate:+.1f} % a year (95 % CI {100 * ac.lower:+.1f} to "
            f"{100 * ac.upper:+.1f}, Wald, {self.interval_label})",
        ]
        if self.annual_change_profile is not None:
            p = self.annual_change_profile
            lines.append(f"  profile-likelihood 95 % CI {100 * p.lower:+.1f} to {100 * p.upper:+.1f} % a year")
        pc = self.period_change
        lines.append(f"  over the whole period: {100 * pc.estimate:+.1f} % (95 % CI {100 * pc.lower:+.1f} to "
                     f"{100 * pc.upper:+.1f})" + ("" if self.change_scale == "count" else f" in the {self.change_scale}"))
        lc = self.level_change
        if lc is not None:
            lines.append(f"  on the measure's scale ({lc.unit}): {lc.first.estimate:.4g} in {lc.first_year}, "
                         f"{lc.last.estimate:.4g} in {lc.last_year}; difference {lc.difference.estimate:+.4g} "
                         f"(95 % CI {lc.difference.lower:+.4g} to {lc.difference.upper:+.4g})")
        if self.cover_transform:
            lines.append(f"  cover analysed as {self.cover_transform}")
        lines.append(f"  call: {self.call} (margin ±{100 * self.margin:.1f} % a year). {self.call_reason}")
        sds = ", ".join(f"{k} {v:.3g}" for k, v in self.random_sd.items())
        lines.append(f"  random-effect SDs (link scale): {sds or 'none'}")
        for k, v in self.rho.items():
            lines.append(f"  AR(1) correlation of the {k} effect: {v:.3g}")
        if self.dispersion is not None:
            lines.append(f"  {family_of(self.family).dispersion_name}: {self.dispersion:.4g}")
        lines.append(f"  log-likelihood {self.loglik:.3f} ({'REML' if self.reml else 'ML'}), AIC {self.aic:.2f}, df {self.df}")
        lines.append(self.to_frame().drop(columns=["df", "se_scale"]).to_string(float_format=lambda v: f"{v:.5g}"))
        for d in self.diagnostics:
            lines.append(f"  [{d.severity}] {d.code}: {d.message}")
        return "\n".join(lines)


class TrendModel:
    r"""A generalized linear mixed model for the trend of one species and measure.

    Parameters
    ----------
    data : DataFrame
        Long table, one row per (station, visit) with a value (missing visits absent):
        ``station``, ``year`` [int], optional ``site``, ``observer``, ``quadrat_area_m2``,
        covariates, and the measure's value columns (monitor.columns.MEASURE_COLUMNS).  An optional
        ``lineage`` column names the first station of a relocation chain: the stations of one
        chain share one station effect (a moved quadrat continues its series).
    measure : str
        A measure code of the registry (monitor/measures.py): count, cover, frequency, pin_hits, presence, ...
    family : str, optional
        One of FAMILIES; default ``default_family(measure)``.
    year_effect : {"linear", "factor"}
        Year as a continuous covariate (the trend) or as a factor (yearly estimates).  The
        slope and the call always come from the linear model; with "factor" the fixed
        effects, log-likelihood and AIC reported are those of the factor model.
    year_random : {None, "iid", "ar1", "none"}
        The random year effect of the linear model, crossed with station and site: None
        (default) is "iid" from YEAR_EFFECT_MIN_YEARS years with data with the Laplace
        method, else "none"; "ar1" makes consecutive calendar years alike.  Not used in the
        year-factor model, where the year fixed effects take its place.
    site_by_year : bool
        Add a random site-by-year effect (needs 2 or more sites).
    site_effect : bool
        Random site intercept when a ``site`` column with 2 or more sites exists.
    observer_effect : bool
        Random observer intercept, crossed with station (needs an ``observer`` column;
        a ';'-joined crew is one level; a blank cell is its own level, NO_OBSERVER, and
        the result says how many visits have one).
    observation_effect : bool, optional
        Binomial only: a normal observation-level effect (glmer's (1 | obs)).  None
        (default): added for frequency and pin hits when the plain binomial fit is
        overdispersed (see the module notes), never for presence.
    site_slope : bool
        Random slope of year by site, uncorrelated with the site intercept.
    covariates : sequence of str
        Extra fixed-effect columns; non-numeric columns enter as treatment contrasts.
    method : {"laplace", "agq"}
        Laplace approximation, or adaptive Gauss-Hermite quadrature with ``n_agq`` nodes
        (only with the station intercept as the single random effect).
    reml : bool
        Restricted maximum likelihood (logit-normal only).
    cover_adjust : float, optional
        The cover adjustment e [percent]; default none when every value lies strictly
        between 0 and 100 %, else the smallest non-zero cover and 100 - cover in the data
        (Warton & Hui 2011).
    margin : float
        Change that matters for the call [fraction per year].
    base_year : int, optional
        Base of the yearly indices (index 1); default the first year with data.  A year in
        which every value is 0 (or every k = n) cannot be a base: the next year that can
        is taken and the result says so.

    Notes
    -----
    log E[y] = b0 + b1 (year - c) + u_station + v_site + w_year (+ e_obs | + w_observer | + a_site (year - c)
    | + x_site,year); see the module docstring for every family.

    References
    ----------
    Bates, D. et al. (2015) J. Stat. Softw. 67(1), 1-48.
    Bolker, B. M. et al. (2009) Trends Ecol. Evol. 24(3), 127-135.
    Piepho, H.-P. & Ogutu, J. O. (2002) JABES 7(3), 350-360.
    """

    def __init__(self, data: pd.DataFrame, measure: str = "count", family: str | None = None,
                 year_effect: str = "linear", site_effect: bool = True, observer_effect: bool = False,
                 site_slope: bool = False, covariates=(), method: str = "laplace", n_agq: int = 7,
                 reml: bool = False, cover_adjust: float | None = None, margin: float = DEFAULT_MARGIN,
                 base_year: int | None = None, year_random: str | None = None, site_by_year: bool = False,
                 observation_effect: bool | None = None):
        if measure not in C.MEASURES:
            raise InputError(f"unknown measure {measure!r}; expected one of {', '.join(C.MEASURES)}")
        family = default_family(measure) if family is None else family
        fam = family_of(family)
        if fam.name not in families_for(measure):
            raise InputError(f"family {family!r} does not fit measure {measure!r}; "
                             f"expected one of {', '.join(families_for(measure))}")
        if year_effect not in ("linear", "factor"):
            raise InputError(f"year_effect must be 'linear' or 'factor' (got {year_effect!r})")
        if year_random is not None and year_random not in YEAR_RANDOM:
            raise InputError(f"year_random must be one of {', '.join(YEAR_RANDOM)} (got {year_random!r})")
        if method not in ("laplace", "agq"):
            raise InputError(f"method must be 'laplace' or 'agq' (got {method!r})")
        if reml and not fam.gaussian:
            raise InputError("REML applies to the linear mixed models only (logit-normal, lognormal)")
        if not (isinstance(margin, (int, float)) and margin > 0):
            raise InputError(f"margin of change must be a positive fraction per year (got {margin!r})")
        if method == "agq" and not (isinstance(n_agq, (int, np.integer)) and 1 <= n_agq <= 50):
            raise InputError(f"n_agq must be an integer from 1 to 50 (got {n_agq!r})")
        if observation_effect and fam.observation_effect != "optional":
            raise InputError("an observation-level effect is set by the family for counts (poisson-lognormal) "
                             "and by the residual for cover; observation_effect applies to binomial data only")
        if observation_effect and measures.REGISTRY[measure].kind == measures.KIND_BINARY:
            raise InputError("presence (0 or 1 a visit) cannot carry an observation-level effect")
        self.measure, self.family, self.year_effect = measure, fam.name, year_effect
        self.entry = measures.REGISTRY[measure]   # the measure's registry entry (monitor/measures.py)
        self.fam: ModelFamily = fam
        self.observer_effect, self.site_slope = bool(observer_effect), bool(site_slope)
        self.covariates = tuple(covariates)
        self.method, self.n_agq, self.reml = method, int(n_agq), bool(reml)
        self.margin = float(margin)
        self.cover_adjust = cover_adjust
        self.observation_effect = observation_effect
        self._notes: list[Diagnostic] = []
        self.data = self._check(data)
        d = self.data
        n_site_levels = d[C.SITE].nunique() if C.SITE in d.columns else 0
        self.has_site = bool(site_effect) and n_site_levels >= 2
        if site_effect and C.SITE in d.columns and n_site_levels < 2:
            self._notes.append(Diagnostic("one_site", "All stations lie in one site, so there is no site effect.", "info"))
        if self.site_slope and n_site_levels < 2:
            raise InputError("a random slope of year by site needs a 'site' column with at least 2 sites")
        if site_by_year and n_site_levels < 2:
            raise InputError("a site-by-year effect needs a 'site' column with at least 2 sites")
        self.site_by_year = bool(site_by_year)
        if self.site_slope:
            self.has_site = True
        if method == "agq" and (self.has_site or self.observer_effect or fam.observation_effect == "always"
                                or observation_effect or year_random in ("iid", "ar1") or site_by_year):
            raise InputError("adaptive Gauss-Hermite quadrature needs a single grouping factor: "
                             "use site_effect=False, year_random='none', no observer effect and a family "
                             "without an observation-level effect")
        self.years = np.sort(d[C.YEAR].unique())
        self.first, self.last = int(self.years[0]), int(self.years[-1])
        self.centre = (self.first + self.last) / 2.0
        if year_random is None:
            year_random = "iid" if default_year_effect(len(self.years)) and method != "agq" else "none"
            if year_random == "none" and method != "agq" and len(self.years) >= 3:
                self._notes.append(Diagnostic(
                    "no_year_effect",
                    f"With {len(self.years)} years of data (fewer than {YEAR_EFFECT_MIN_YEARS}) the model has no "
                    "year-to-year effect: the interval assumes years do not fluctuate together and may be too "
                    "narrow.", "info"))
        elif year_random == "none" and default_year_effect(len(self.years)):
            self._notes.append(Diagnostic(
                "no_year_effect",
                "The model was asked to leave out the year-to-year effect: if good and bad years are shared "
                "by the stations, the interval is too narrow and the call too confident."))
        self.year_random = year_random
        self.no_index_years = self._degenerate_years()
        if base_year is None:
            base_year = self.first
        if base_year not in set(self.years.tolist()):
            raise InputError(f"base year {base_year} has no data")
        self.base_year = self._carried_base(int(base_year))

    # ------------------------------------------------------------------ input
    def _check(self, data: pd.DataFrame) -> pd.DataFrame:
        if not isinstance(data, pd.DataFrame):
            raise InputError("trend data must be a pandas DataFrame")
        value_cols = C.MEASURE_COLUMNS[self.measure]
        need = [C.STATION, C.YEAR, *value_cols, *self.covariates]
        missing = [c for c in need if c not in data.columns]
        if missing:
            raise InputError([InputProblem("<trend data>", None, c, None, f"a column '{c}' for measure {self.measure}")
                              for c in missing])
        d = data.copy()
        n0 = len(d)
        d = d.dropna(subset=[C.STATION, C.YEAR, *value_cols, *self.covariates])
        if len(d) < n0:
            self._notes.append(Diagnostic("missing_values_dropped",
                                          f"{n0 - len(d)} row(s) with a missing value were left out (missing is not zero).",
                                          "info"))
        if d.empty:
            raise EstimationError("no rows with values to fit a trend to")
        problems = []
        yr = d[C.YEAR].to_numpy()
        if not np.all(np.equal(np.mod(yr, 1), 0)):
            problems.append(InputProblem("<trend data>", None, C.YEAR, None, "whole years"))
        v = {c: pd.to_numeric(d[c], errors="coerce").to_numpy(float) for c in value_cols}
        for c, arr in v.items():
            if np.any(~np.isfinite(arr)):
                problems.append(InputProblem("<trend data>", None, c, None, "numbers"))
        if not problems:
            # each value column's rule from the registry (monitor/measures.py); k at most n
            entry = measures.REGISTRY[self.measure]
            for r in entry.column_rules:
                a = v[r.column]
                bad = (a <= r.minimum) if r.above_minimum else (a < r.minimum)
                if r.maximum is not None:
                    bad |= a > r.maximum
                if r.whole:
                    bad |= a != np.round(a)
                if np.any(bad):
                    problems.append(InputProblem("<trend data>", None, r.column, None, r.expected))
            if entry.trials_column is not None and not problems:
                k, n = entry.columns
                if np.any(v[k] > v[n]):
                    problems.append(InputProblem("<trend data>", None, k, None, f"whole numbers from 0 to '{n}' (> 0)"))
            # and what the family's model needs of them (the lognormal family takes logarithms)
            need = None if problems else self.fam.check_values(v[entry.value_column])
            if need:
                problems.append(InputProblem("<trend data>", None, entry.value_column, None, need))
        if problems:
            raise InputError(problems)
        d[C.YEAR] = d[C.YEAR].astype(int)
        for c in value_cols:
            d[c] = v[c]
        if self.observer_effect:
            if C.OBSERVER not in d.columns:
                raise InputError("an observer effect needs an 'observer' column")
            obs = d[C.OBSERVER].astype("string").str.strip()
            blank = obs.isna() | (obs == "")
            if blank.any():
                self._notes.append(Diagnostic(
                    "observer_blank",
                    f"{int(blank.sum())} of {len(d)} visit(s) have no observer recorded; in the observer effect "
                    f"they are one level of their own, '{NO_OBSERVER}'."))
            d[C.OBSERVER] = obs.mask(blank, NO_OBSERVER).astype(str)
        # a station is identified within its site (codes are unique in a programme, but a
        # table brought from elsewhere may reuse a code in two sites); a relocated quadrat
        # carries the first station of its chain in ``lineage`` and shares that station's effect
        station = d[C.LINEAGE].fillna(d[C.STATION]) if C.LINEAGE in d.columns else d[C.STATION]
        if C.SITE in d.columns:
            d["_station_key"] = d[C.SITE].astype(str) + "\x1f" + station.astype(str)
        else:
            d["_station_key"] = station.astype(str)
        return d.reset_index(drop=True)

    def _degenerate_years(self) -> dict[int, str]:
        """Years whose every value is 0 ("zero") or every k = n ("full"): no yearly estimate exists there."""
        d = self.data
        entry = measures.REGISTRY[self.measure]
        if entry.kind not in (measures.KIND_COUNT, measures.KIND_K_OF_N, measures.KIND_BINARY):
            return {}   # continuous values (cover, lengths) have no all-zero or all-full year
        kc = entry.value_column
        k = d.groupby(C.YEAR)[kc].sum()
        out = {int(y): "zero" for y in k.index[k.to_numpy() == 0]}
        if entry.trials_column is not None:
            n = d.groupby(C.YEAR)[entry.trials_column].sum()
            out.update({int(y): "full" for y in k.index[k.to_numpy() == n.to_numpy()]})
        elif entry.kind == measures.KIND_BINARY:
            n = d.groupby(C.YEAR)[kc].size()
            out.update({int(y): "full" for y in k.index[k.to_numpy() == n.to_numpy()]})
        return out

    def _carried_base(self, wanted: int) -> int:
        """The base year: the one asked for, or the nearest later (then earlier) year the data can carry."""
        if wanted not in self.no_index_years:
            return wanted
        ok = [int(y) for y in self.years if int(y) not in self.no_index_years]
        if not ok:
            self._notes.append(Diagnostic(
                "no_index", "No yearly index exists: in every year all values are 0 or all are full."))
            return wanted
        later = [y for y in ok if y > wanted]
        base = later[0] if later else ok[-1]
        what = "zero" if self.no_index_years[wanted] == "zero" else "at its maximum"
        self._notes.append(Diagnostic(
            "base_year_moved",
            f"Every value in {wanted} is {what}, so {wanted} cannot be the base of the yearly indices; "
            f"they are relative to {base} instead.", "info"))
        return base

    # ------------------------------------------------------------------ design
    def _response(self, d: pd.DataFrame | None = None):
        """A density for one fit (the family's response of these rows) and the cover adjustment, if any.

        The family turns the measure's first value column into the modelled response (counts as
        they are, the logit of cover, the log of a positive value); the second column, where the
        measure has one, is the number of trials (cells, pins); presence has one trial.
        """
        d = self.data if d is None else d
        columns = C.MEASURE_COLUMNS[self.measure]
        # the whole series' values: a transform such as the cover adjustment depends on all of them
        y, eps = self.fam.response(self.data[columns[0]].to_numpy(float), self.cover_adjust)
        if len(d) != len(self.data):
            y = y[d.index.to_numpy()]
        trials = None
        if self.fam.has_trials:
            trials = d[columns[1]].to_numpy(float) if len(columns) > 1 else np.ones(len(d))
        return density(self.fam, y, trials), eps

    def _design(self, d: pd.DataFrame, year_effect: str):
        t = d[C.YEAR].to_numpy(float) - self.centre
        cols = {INTERCEPT: np.ones(len(d))}
        if year_effect == "linear":
            cols[SLOPE] = t
        else:
            for y in np.sort(d[C.YEAR].unique()):
                if y != self.base_year:
                    cols[f"year[{int(y)}]"] = (d[C.YEAR].to_numpy() == y).astype(float)
        for c in self.covariates:
            col = d[c]
            if pd.api.types.is_numeric_dtype(col) and not pd.api.types.is_bool_dtype(col):
                cols[c] = col.to_numpy(float)
            else:
                levels = sorted(col.astype(str).unique())
                for lev in levels[1:]:
                    cols[f"{c}[{lev}]"] = (col.astype(str).to_numpy() == lev).astype(float)
        X = np.column_stack(list(cols.values()))
        if np.linalg.matrix_rank(X) < X.shape[1]:
            raise EstimationError("the fixed effects are not identifiable from these data "
                                  "(a covariate is constant or duplicates another)")
        return X, list(cols.keys()), t

    def _spec(self, year_effect: str, olre: bool | None = None, d: pd.DataFrame | None = None
              ) -> tuple[GlmmSpec, np.ndarray, float | None]:
        d = self.data if d is None else d
        if olre is None:   # the family's own observation-level effect, or the one asked for
            olre = self.fam.observation_effect == "always" or bool(self.observation_effect)
        fam, eps = self._response(d)
        X, names, t = self._design(d, year_effect)
        st = pd.factorize(d["_station_key"])[0]
        terms = []
        if self.has_site:
            si = pd.factorize(d[C.SITE])[0]
            terms.append(Term("site", si, int(si.max()) + 1))
            if self.site_slope:
                terms.append(Term("site_slope", si, int(si.max()) + 1, t))
        # the year effect over calendar years (a year without data is a level without observations)
        yi = d[C.YEAR].to_numpy(np.int64) - self.first
        si = pd.factorize(d[C.SITE])[0] if self.site_by_year else None
        if year_effect == "linear" and self.year_random != "none":
            terms += year_terms(yi, self.last - self.first + 1, self.year_random, site=si)
        elif si is not None:  # year factor: the site-by-year effect only
            terms += year_terms(yi, self.last - self.first + 1, site=si)[1:]
        if self.observer_effect:
            ob = pd.factorize(d[C.OBSERVER].astype(str))[0]
            terms.append(Term("observer", ob, int(ob.max()) + 1))
        spec = GlmmSpec(family=fam, X=X, x_names=names, station=st, n_station=int(st.max()) + 1, terms=terms,
                        olre=olre)
        return spec, t, eps

    def _fit_spec(self, spec: GlmmSpec, full: bool, **kw) -> GlmmFit:
        n_agq = self.n_agq if self.method == "agq" else 1
        return fit_glmm(spec, reml=self.reml, n_agq=n_agq, hessian=full, stage2=full or n_agq > 1, **kw)

    # ------------------------------------------------------------------ fit
    def fit(self, profile: bool = True, indices: bool = True, fast: bool | None = None) -> TrendResult:
        """Fit the model.

        Parameters
        ----------
        profile : bool
            Also compute the profile-likelihood interval of the slope.
        indices : bool
            Also fit the year-as-factor model and report yearly estimates and indices.
        fast : bool, optional
            The fast path (for power analysis), by default taken when ``profile`` and
            ``indices`` are both False: the fixed effects are the joint penalised mode at
            the Laplace ML variance estimates (lme4's nAGQ = 0 estimator) with conditional
            standard errors (X' V^-1 X)^-1.  It is NOT a maximum likelihood estimate: the
            result says so (``estimator`` "joint-mode" and a diagnostic), and nothing a user
            reads as a trend uses it.  ``fast=False`` gives the full Laplace / AGQ maximum
            likelihood estimate with Hessian standard errors (the default whenever a
            profile or indices are asked for).  The Gaussian (cover) model is exact either way.

        Returns
        -------
        TrendResult
        """
        d = self.data
        n_st = int(d["_station_key"].nunique())
        n_years = len(self.years)
        if n_years < 2:
            raise EstimationError("a trend needs data from at least 2 years")
        if n_st < 2:
            raise EstimationError("a mixed model needs at least 2 stations")
        fam_check, _ = self._response()
        if np.all(fam_check.y == fam_check.y[0]) and not self.fam.gaussian:
            raise EstimationError(f"every value of {self.measure} is the same ({fam_check.y[0]:g}); there is no trend to fit")
        full = (profile or indices) if fast is None else not fast
        diags = list(self._notes)
        olre, od = self._choose_observation_effect(diags)
        spec_lin, t, eps = self._spec("linear", olre)
        fit_lin = self._fit_spec(spec_lin, full)
        j = spec_lin.x_names.index(SLOPE)
        slope = float(fit_lin.beta[j])
        slope_se = float(math.sqrt(fit_lin.vcov[j, j]))
        q, slope_df, df_method, se_scale = _reference(fit_lin, j, self.years - self.centre, self.reml)
        # the year-as-factor model: yearly estimates, and the yearly levels an AR(1) correction rests on
        fit_fac = spec_fac = None
        if indices or self.year_effect == "factor" or self.year_random == "ar1":
            fit_fac, spec_fac = self._fit_factor(olre, diags)
        if self.year_random == "ar1" and math.isfinite(slope_df):
            q, df_method, se_scale = self._ar1_reference(fit_lin, spec_fac, fit_fac, slope_df, q, df_method,
                                                         se_scale, diags)
        lo, hi = slope - q * slope_se, slope + q * slope_se
        annual = Interval(math.expm1(slope), math.expm1(lo), math.expm1(hi))
        span = self.last - self.first
        period = Interval(math.expm1(slope * span), math.expm1(lo * span), math.expm1(hi * span))
        estimator = _estimator(fit_lin, self, full)
        diags += list(fit_lin.diagnostics)
        if estimator == "joint-mode":
            diags.append(Diagnostic("fast_path", "Fast path: the fixed effects are the joint mode at the variance "
                                    "estimates, not maximum likelihood estimates; for power studies, not for "
                                    "reading a trend.", "info"))
        prof = None
        if profile:
            try:
                plo, phi_ = self._profile_slope(spec_lin, fit_lin, j, slope_se, q)
                prof = Interval(math.expm1(slope), math.expm1(plo), math.expm1(phi_))
            except (EstimationError, FloatingPointError, np.linalg.LinAlgError, ValueError) as exc:
                diags.append(Diagnostic("profile_failed", f"The profile-likelihood interval could not be computed ({exc})."))
        natural = _NaturalScale(self, eps)
        # one averaging variance (the trend model's) for points and line: one baseline on both scales
        s2 = natural.marginal_variance(fit_lin)
        yearly, idx_df = self._yearly(spec_fac, fit_fac, natural, s2)
        line, fitted, level = self._line(spec_lin, fit_lin, spec_fac, fit_fac, q, natural, s2)
        primary, pspec = (fit_fac, spec_fac) if (self.year_effect == "factor" and fit_fac is not None) \
            else (fit_lin, spec_lin)
        params = pd.Series(primary.beta, index=pspec.x_names, name="estimate")
        bse = pd.Series(np.sqrt(np.diag(primary.vcov)), index=pspec.x_names, name="se")
        vcov = pd.DataFrame(primary.vcov, index=pspec.x_names, columns=pspec.x_names)
        params_df = pd.Series(np.full(len(pspec.x_names), math.inf) if primary.coef_df is None
                              else np.asarray(primary.coef_df, float), index=pspec.x_names, name="df")
        diags += self._data_diagnostics(spec_lin, fit_lin, eps, od)
        lo_c, hi_c = (prof.lower, prof.upper) if prof is not None else (annual.lower, annual.upper)
        call, reason = classify_call(lo_c, hi_c, self.margin, n_st, n_years)
        if n_st < MIN_STATIONS:
            diags.append(Diagnostic("few_stations", f"Only {n_st} stations: the call is 'unclear' by rule."))
        if n_years < MIN_YEARS:
            diags.append(Diagnostic("few_years", f"Only {n_years} years with data: the call is 'unclear' by rule."))
        n_sites = int(d[C.SITE].nunique()) if C.SITE in d.columns else 0
        return TrendResult(
            measure=self.measure, family=self.family, n_obs=len(d), n_stations=n_st, n_sites=n_sites,
            years=(self.first, self.last), n_years=n_years, params=params, bse=bse, slope=slope, slope_se=slope_se,
            annual_change=annual, annual_change_profile=prof, period_change=period, random_sd=dict(primary.sd),
            dispersion=primary.dispersion, loglik=primary.loglik, aic=-2 * primary.loglik + 2 * primary.df,
            df=primary.df, indices=idx_df, fitted_trend=fitted, diagnostics=tuple(_dedupe(diags)), call=call,
            call_reason=reason, margin=self.margin,
            converged=bool(fit_lin.converged and (fit_fac is None or fit_fac.converged)),
            year_effect=self.year_effect, method=self.method, reml=self.reml, year_centre=self.centre,
            cover_eps=eps, vcov=vcov, year_random=self.year_random, site_by_year=self.site_by_year,
            observation_effect=bool(olre and self.fam.observation_effect == "optional"), rho=dict(getattr(fit_lin, "rho", {}) or {}),
            slope_df=slope_df, df_method=df_method, estimator=estimator, se_scale=se_scale,
            cover_transform=cover_transform_text(eps) if self.entry.kind == measures.KIND_PERCENT else None,
            change_scale=self.fam.change_scale, natural_unit=natural.unit, yearly=yearly, trend_line=line,
            level_change=level, base_year=self.base_year if fit_fac is not None else None,
            no_index_years=tuple(sorted(self.no_index_years)), params_df=params_df)

    # ------------------------------------------------------------------ observation-level effect
    def _choose_observation_effect(self, diags: list[Diagnostic]) -> tuple[bool, tuple | None]:
        """Whether the model carries an observation-level effect, and the overdispersion test behind it.

        Returns (olre, (ratio, p) or None).  For k-of-n data with ``observation_effect``
        None, the plain binomial model is fitted (fast path) and its Pearson statistic
        decides (OVERDISPERSION_RATIO and OVERDISPERSION_P).
        """
        if self.fam.observation_effect == "always":
            return True, None
        if self.fam.observation_effect != "optional" or self.entry.kind == measures.KIND_BINARY:
            return False, None
        if self.observation_effect is not None:
            return bool(self.observation_effect), None
        spec, _, _ = self._spec("linear", False)
        quick = self._fit_spec(spec, False)
        ratio, p = _pearson_test(spec, quick)
        if _overdispersed(ratio, p):
            diags.append(Diagnostic(
                "observation_effect_added",
                f"The values vary more between visits than a binomial allows (Pearson chi2/df = {ratio:.2f}, "
                f"p = {p:.2g}), so the model has an observation-level effect.", "info"))
            return True, (ratio, p)
        return False, (ratio, p)

    def _ar1_reference(self, fit_lin, spec_fac, fit_fac, df: float, q: float, words: str, scale: float,
                       diags: list[Diagnostic]) -> tuple[float, str, float]:
        """The slope's reference with an AR(1) year effect: (95 % multiplier, words, SE scale).

        The ML (or REML) slope SE is scaled by the year-level correction of monitor/trend/year_level.py,
        computed from the year-as-factor model's yearly levels and their covariance; t with the
        between-year df stays the reference.  Without yearly levels (fewer than 4, or no factor fit)
        the iid rule's reference is kept and a note says the interval may be too narrow.
        """
        levels = self._yearly_levels(spec_fac, fit_fac)
        if levels is None or len(levels[0]) < 4:
            diags.append(Diagnostic(
                "ar1_interval_optimistic",
                "The AR(1) year effect's interval could not be widened for the uncertainty of its correlation "
                "(no yearly levels to work from), so it may be too narrow. Read the interval and the call "
                "with caution."))
            return q, words, scale
        t, a, V = levels
        corr = year_level_ar1(t, a, V)
        factor = corr.factor_reml if self.reml else corr.factor
        base = str(getattr(fit_lin, "df_method", f"t, {df:g} df"))
        words = (f"{base}; standard error scaled by {factor:.4g} for the AR(1) year effect (year-level REML "
                 f"likelihood integrated over the correlation: mean {corr.rho_mean:.2f}, ML {corr.rho_ml:.2f})")
        diags.append(Diagnostic(
            "ar1_interval_widened",
            f"The years' correlation is estimated from only {len(t)} yearly levels, so the interval is widened "
            f"(standard error x {factor:.2f}) to carry its uncertainty. When consecutive years are strongly "
            "alike (correlation 0.7 or more) in a short series the interval may still be too narrow "
            "(DEVELOPERS.md).", "info"))
        return float(t_dist.ppf(0.975, df)) * factor, words, factor

    def _yearly_levels(self, spec, fit) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
        """(centred years, link-scale levels, their covariance) from the year-as-factor model."""
        if fit is None:
            return None
        years = [int(y) for y in self.years if int(y) not in self.no_index_years]
        C_ = np.array([_level_contrast(spec, y) for y in years])
        V = C_ @ np.asarray(fit.vcov, float) @ C_.T
        return np.array(years, float) - self.centre, C_ @ np.asarray(fit.beta, float), (V + V.T) / 2

    def _fit_factor(self, olre: bool, diags: list[Diagnostic]):
        """The year-as-factor model on the years that have an estimate; (None, None) if it cannot be fitted."""
        keep = ~self.data[C.YEAR].isin(list(self.no_index_years))
        d = self.data[keep]
        if d.empty or d["_station_key"].nunique() < 2 or self.base_year in self.no_index_years:
            return None, None
        try:
            spec_fac, _, _ = self._spec("factor", olre, d)
            fit_fac = self._fit_spec(spec_fac, True)
        except (EstimationError, FloatingPointError, np.linalg.LinAlgError, ValueError) as exc:
            diags.append(Diagnostic("indices_failed", f"The yearly estimates could not be computed ({exc})."))
            return None, None
        diags += [Diagnostic(x.code, "Year-factor model: " + x.message, x.severity) for x in fit_fac.diagnostics
                  if x.code != "variance_at_bound"]
        for y, kind in sorted(self.no_index_years.items()):
            what = "zero" if kind == "zero" else "at its maximum"
            diags.append(Diagnostic("no_index_year", f"Every value in {y} is {what}: that year has no index or "
                                    "interval of its own (it still counts in the trend).", "info"))
        return fit_fac, spec_fac

    # ------------------------------------------------------------------ yearly estimates and the line
    def _yearly(self, spec, fit, natural: _NaturalScale, s2: float) -> tuple[pd.DataFrame | None, pd.DataFrame]:
        """Yearly estimates on the natural scale (averaged over the trend model's variance s2) and as
        indices relative to the base year."""
        empty = pd.DataFrame({"year": pd.Series([], dtype=int), "index": pd.Series([], dtype=float),
                              "lower": pd.Series([], dtype=float), "upper": pd.Series([], dtype=float)})
        if fit is None:
            return None, empty
        z = norm.ppf(0.975)
        per_year = self.data.groupby(C.YEAR)["_station_key"].nunique()
        nat, rel = [], []
        for y in self.years:
            y = int(y)
            if y in self.no_index_years:
                zero = self.no_index_years[y] == "zero"
                top = natural.top
                nat.append((y, 0.0 if zero else top, 0.0 if zero else math.nan, math.nan if zero else top))
                rel.append((y, 0.0 if zero else math.nan, 0.0 if zero else math.nan, math.nan))
                continue
            c = _level_contrast(spec, y)
            name = f"year[{y}]"
            if name in spec.x_names:
                kk = spec.x_names.index(name)
                b, s = fit.beta[kk], math.sqrt(fit.vcov[kk, kk])
                rel.append((y, math.exp(b), math.exp(b - z * s), math.exp(b + z * s)))
            else:
                rel.append((y, 1.0, 1.0, 1.0))
            eta = float(c @ fit.beta)
            se = math.sqrt(float(c @ fit.vcov @ c))
            v = natural.value(np.array([eta, eta - z * se, eta + z * se]), s2)
            nat.append((y, v[0], v[1], v[2]))
        yearly = pd.DataFrame(nat, columns=["year", "estimate", "lower", "upper"])
        yearly["n_stations"] = yearly["year"].map(per_year).astype(int)
        return yearly, pd.DataFrame(rel, columns=["year", "index", "lower", "upper"])

    def _line(self, spec, fit, spec_fac, fit_fac, q: float, natural: _NaturalScale, s2: float):
        """The fitted trend: natural scale, relative to the base of the indices, and first against last year."""
        k0, k1 = spec.x_names.index(INTERCEPT), spec.x_names.index(SLOPE)
        V = fit.vcov[np.ix_([k0, k1], [k0, k1])]
        b = fit.beta[[k0, k1]]
        yrs = np.arange(self.first, self.last + 1)
        tt = yrs - self.centre
        eta = b[0] + b[1] * tt
        se = np.sqrt(V[0, 0] + 2 * tt * V[0, 1] + tt * tt * V[1, 1])
        line = pd.DataFrame({"year": yrs, "fit": natural.value(eta, s2), "lower": natural.value(eta - q * se, s2),
                             "upper": natural.value(eta + q * se, s2)})
        if fit_fac is not None:
            base = float(fit_fac.beta[spec_fac.x_names.index(INTERCEPT)])   # the base year's level
            fitted = pd.DataFrame({"year": yrs, "fit": np.exp(eta - base), "lower": np.exp(eta - q * se - base),
                                   "upper": np.exp(eta + q * se - base)})
        else:   # no yearly estimates: the line relative to its own value in the base year
            e = b[1] * (yrs - self.base_year)
            sb = math.sqrt(V[1, 1])
            band = np.sort(np.c_[(b[1] - q * sb) * (yrs - self.base_year), (b[1] + q * sb) * (yrs - self.base_year)],
                           axis=1)
            fitted = pd.DataFrame({"year": yrs, "fit": np.exp(e), "lower": np.exp(band[:, 0]),
                                   "upper": np.exp(band[:, 1])})
        level = natural.change(b, V, self.first - self.centre, self.last - self.centre, s2, q,
                               self.first, self.last)
        return line, fitted, level

    def _profile_slope(self, spec: GlmmSpec, fit: GlmmFit, j: int, se: float, q: float) -> tuple[float, float]:
        """Profile-likelihood 95 % interval of the slope (Venzon & Moolgavkar 1988, by secant steps).

        The signed root of the likelihood-ratio statistic is set to the same reference
        multiplier as the Wald interval: sqrt(chi2_1(0.95)) = 1.96 without a year effect, and
        the t quantile with the between-year df times the ML-variance scale with one (the
        likelihood ratio is then calibrated like the Wald statistic, so the two intervals
        differ only in shape).
        For a REML fit the profile uses the ML likelihood (REML likelihoods of models with
        different fixed effects are not comparable).
        """
        keep = [i for i in range(len(spec.x_names)) if i != j]
        xj = spec.X[:, j]
        reml = self.reml
        n_agq = self.n_agq if self.method == "agq" else 1
        if reml:
            ml = fit_glmm(replace(spec, family=self._response()[0]), reml=False, hessian=False)
            ll_hat, beta_hat, phi_hat = ml.loglik, ml.beta, ml.phi
        else:
            ll_hat, beta_hat, phi_hat = fit.loglik, fit.beta, fit.phi
        target = max(q, math.sqrt(chi2.ppf(0.95, 1)))   # q: the Wald interval's multiplier
        start = {"phi": phi_hat, "beta": beta_hat[keep]}

        def signed_root(b):
            fam = self._response()[0]
            sp = replace(spec, family=fam, X=spec.X[:, keep], x_names=[spec.x_names[i] for i in keep],
                         offset=b * xj)
            f = fit_glmm(sp, reml=False, n_agq=n_agq, hessian=False, stage2=True,
                         start=start["phi"], start_beta=start["beta"])
            dev = max(0.0, 2.0 * (ll_hat - f.loglik))
            return math.copysign(math.sqrt(dev), b - beta_hat[j])

        out = []
        for sgn in (-1.0, 1.0):
            b0, r0 = beta_hat[j], 0.0
            b1 = beta_hat[j] + sgn * target * se
            r1 = signed_root(b1)
            for _ in range(12):
                if abs(r1 - sgn * target) < 2e-4:
                    break
                if r1 == r0:
                    raise EstimationError("flat profile likelihood")
                b2 = b1 + (sgn * target - r1) * (b1 - b0) / (r1 - r0)
                # keep the secant sensible: never jump more than 4 Wald SEs at a time
                b2 = float(np.clip(b2, b1 - 4 * se, b1 + 4 * se))
                b0, r0 = b1, r1
                b1, r1 = b2, signed_root(b2)
            else:
                raise EstimationError("the profile search did not settle")
            out.append(b1)
        return out[0], out[1]

    def _data_diagnostics(self, spec: GlmmSpec, fit: GlmmFit, eps, od) -> list[Diagnostic]:
        d = self.data
        out = []
        years_of = d.groupby("_station_key")[C.YEAR].nunique()
        one = int((years_of == 1).sum())
        if one:
            out.append(Diagnostic("one_visit_stations",
                                  f"{one} station(s) have values from a single year; they tell about level but "
                                  "not about change.", "info"))
        per_year = d.groupby(C.YEAR)["_station_key"].nunique()
        low = per_year[per_year < LOW_COVERAGE_FRACTION * per_year.median()]
        if len(low):
            yrs = ", ".join(str(int(y)) for y in low.index)
            out.append(Diagnostic("low_coverage_years",
                                  f"Few stations were visited in {yrs} (under half the median of {per_year.median():g} a year)."))
        alt = self.fam.overdispersed_alternative
        if alt is not None and not spec.olre and self.entry.kind != measures.KIND_BINARY:
            ratio, p = od if od is not None else _pearson_test(spec, fit)
            if _overdispersed(ratio, p):
                out.append(Diagnostic("overdispersion",
                                      f"The data vary more than the {self.family} model allows (Pearson chi2/df = "
                                      f"{ratio:.2f}, p = {p:.2g}); intervals are too narrow: consider {alt}."))
        if eps is not None:
            zeros = int(np.sum(d[C.COVER].to_numpy() == 0))
            full_ = int(np.sum(d[C.COVER].to_numpy() == 100))
            out.append(Diagnostic("cover_adjusted",
                                  f"Cover analysed as {cover_transform_text(eps)}, because {zeros} value(s) are 0 % "
                                  f"and {full_} are 100 %. The annual change is the change in the adjusted "
                                  "odds of cover.", "info"))
        return out


def _level_contrast(spec: GlmmSpec, year: int) -> np.ndarray:
    """The year-as-factor model's contrast for a year's level: the intercept (the base year) plus the
    year's own effect where it has one."""
    c = np.zeros(len(spec.x_names))
    c[spec.x_names.index(INTERCEPT)] = 1.0
    name = f"year[{year}]"
    if name in spec.x_names:
        c[spec.x_names.index(name)] = 1.0
    return c


def _reference(fit: GlmmFit, j: int, years_t: np.ndarray, reml: bool) -> tuple[float, float, str, float]:
    """The slope's reference: (95 % multiplier of the ML standard error, df, words, SE scale).

    Without a year effect: the normal quantile, df inf, scale 1.  With one: the t quantile with
    the engine's between-year df (G - r: G years with data, r year-level fixed effects) times
    the scale of _ml_year_scale, which brings the ML year variance to its REML equivalent (the
    t(G - r) pivot of the regression of yearly means is exact with the REML variance, not the ML
    one).  A REML fit needs no scale.
    """
    coef_df = getattr(fit, "coef_df", None)
    df = math.inf if coef_df is None else float(coef_df[j])
    if not math.isfinite(df):
        return float(norm.ppf(0.975)), math.inf, str(getattr(fit, "df_method", "z")), 1.0
    words = str(getattr(fit, "df_method", f"t, {df:g} df"))
    if reml:
        return float(t_dist.ppf(0.975, df)), df, words, 1.0
    scale, kappa = _ml_year_scale(fit, j, np.asarray(years_t, float), df)
    words += (f"; standard error scaled by sqrt((G - 1 + k) / {df:g}) = {scale:.4g} (k = {kappa:.3g}) for the ML "
              "year variance (REML-equivalent)")
    return float(t_dist.ppf(0.975, df)) * scale, df, words, scale


def _ml_year_scale(fit: GlmmFit, j: int, years_t: np.ndarray, df: float) -> tuple[float, float]:
    """(sqrt((G - 1 + k) / df), k): the factor taking the ML slope SE to its REML equivalent.

    In the year stratum (G years with data) the REML variance divides the residual sum of squares
    of the yearly values about the line by G - r (= df).  The ML variance divides it by about
    G - 1 + k: with station (or site) effects crossed with years the intercept lies in the
    grand-mean stratum, whose log-determinant pulls the year variance down by k = lambda_year /
    lambda_grand mean (0 to 1), and k = 1 without such effects (then the factor is sqrt(G / df)).
    k is read from the fit's own covariance: var(slope) = lambda_year / (S S_xx) and
    var(level at the mean year) = lambda_grand mean / (S G), so k = S_xx var(b1) / (G var(level)).
    Checked against lme4's REML SE (tests/trend/test_trend_year_model.py: 1.3e-4 relative on
    unbalanced data) and against the exact t of yearly means (DEVELOPERS.md).
    """
    G = len(years_t)
    kappa = 1.0
    names = list(getattr(fit, "x_names", []))
    V = np.asarray(fit.vcov, float)
    if INTERCEPT in names and G > 1:
        i0 = names.index(INTERCEPT)
        tbar = float(np.mean(years_t))
        sxx = float(np.sum((years_t - tbar) ** 2))
        level = V[i0, i0] + 2 * tbar * V[i0, j] + tbar * tbar * V[j, j]
        if level > 0 and sxx > 0:
            kappa = float(np.clip(sxx * V[j, j] / (G * level), 0.0, 1.0))
    return math.sqrt((G - 1 + kappa) / df), kappa


def _estimator(fit: GlmmFit, model: TrendModel, full: bool) -> str:
    """The engine's label of the estimator ("ml-laplace", "ml-agq", "ml-exact", "reml-exact", "joint-mode")."""
    label = getattr(fit, "estimator", None)
    if label:
        return str(label)
    if model.fam.gaussian:
        return "reml-exact" if model.reml else "ml-exact"
    return ("ml-agq" if model.method == "agq" else "ml-laplace") if full else "joint-mode"


def _pearson_test(spec: GlmmSpec, fit: GlmmFit) -> tuple[float, float]:
    """Pearson chi2 / residual df of a Poisson or binomial fit (conditional on the modes), and its p-value.

    The residual df are n minus the fixed effects, the variance parameters and the
    effective number of station effects (the trace of the station shrinkage,
    sum_j (A_j - 1) / A_j): the station modes fit the data as well, so leaving them out
    of the df would hide overdispersion (McCullagh & Nelder 1989, sec. 4.5).
    """
    fam = spec.family
    if isinstance(fam, Poisson):
        mu = np.exp(np.minimum(fit.eta, 700.0))
        var = mu
    else:
        p = expit(fit.eta)
        mu = fam.trials * p
        var = fam.trials * p * (1 - p)
    pearson = float(np.sum((fam.y - mu) ** 2 / np.maximum(var, 1e-12)))
    s_st = float(fit.sd.get("station", 0.0))
    wsum = np.bincount(spec.station, weights=var, minlength=spec.n_station)
    edf_station = float(np.sum(s_st ** 2 * wsum / (1.0 + s_st ** 2 * wsum)))
    dof = max(1.0, len(fam.y) - fit.df - edf_station)
    return pearson / dof, float(chi2.sf(pearson, dof))


def _overdispersed(ratio: float, p: float) -> bool:
    return bool(ratio > OVERDISPERSION_RATIO and p < OVERDISPERSION_P)


class _NaturalScale:
    """The measure's own scale: mean count per m^2 (or per quadrat), % cover, % of cells, pins or stations,
    or the mean of a positive value in its unit.  The family gives the mean over the normal effects
    (``ModelFamily.mean_value``); the measure gives the unit and the multiplier."""

    def __init__(self, model: TrendModel, eps: float | None):
        self.measure, self.fam = model.measure, model.fam
        self.eps = 0.0 if eps is None else float(eps)
        self.divisor, self.scale, self.top = 1.0, 1.0, math.inf
        if measures.REGISTRY[self.measure].kind == measures.KIND_COUNT:
            areas = (model.data[C.QUADRAT_AREA].dropna().unique() if C.QUADRAT_AREA in model.data.columns
                     else np.array([]))
            if len(areas) == 1 and float(areas[0]) > 0:
                self.divisor = float(areas[0])
                self.unit = "mean count per m²"
            else:
                self.unit = "mean count per quadrat"
        elif self.fam.log_scale:   # a positive value: its mean in the measure's own unit
            self.unit = NATURAL_UNIT.get(self.measure, f"mean {self.measure}")
        else:                      # a share: percent
            self.unit = NATURAL_UNIT[self.measure]
            self.scale = self.top = 100.0

    def marginal_variance(self, fit: GlmmFit) -> float:
        """Variance on the link scale that the mean over stations and visits averages over."""
        s2 = sum(float(fit.sd.get(k, 0.0)) ** 2 for k in ("station", "site", "observation"))
        if self.fam.gaussian and fit.dispersion is not None:   # the residual of a linear mixed model
            s2 += float(fit.dispersion) ** 2
        return s2

    def value(self, eta: np.ndarray, s2: float) -> np.ndarray:
        return self.value_and_slope(eta, s2)[0]

    def value_and_slope(self, eta: np.ndarray, s2: float) -> tuple[np.ndarray, np.ndarray]:
        """The natural-scale value at link-scale eta and its derivative d value / d eta."""
        v, dv = self.fam.mean_value(np.asarray(eta, float), s2, self.eps)
        return self.scale * v / self.divisor, self.scale * dv / self.divisor

    def change(self, b, V, t_first, t_last, s2, q, first_year, last_year) -> LevelChange:
        """First against last year of the line b0 + b1 t on this scale, with delta-method intervals."""
        x = np.array([[1.0, t_first], [1.0, t_last]])
        eta = x @ b
        se = np.sqrt(np.einsum("ij,jk,ik->i", x, V, x))
        v, dv = self.value_and_slope(eta, s2)
        lo = self.value(eta - q * se, s2)
        hi = self.value(eta + q * se, s2)
        g = dv[1] * x[1] - dv[0] * x[0]                 # gradient of v_last - v_first over (b0, b1)
        diff = float(v[1] - v[0])
        sd = math.sqrt(max(float(g @ V @ g), 0.0))
        with np.errstate(divide="ignore", invalid="ignore"):
            gl = dv[1] / v[1] * x[1] - dv[0] / v[0] * x[0]   # of log(v_last / v_first)
            lr = float(np.log(v[1] / v[0]))
        sr = math.sqrt(max(float(gl @ V @ gl), 0.0)) if np.all(np.isfinite(gl)) else math.nan
        return LevelChange(
            int(first_year), int(last_year), self.unit,
            Interval(float(v[0]), float(lo[0]), float(hi[0])), Interval(float(v[1]), float(lo[1]), float(hi[1])),
            Interval(diff, diff - q * sd, diff + q * sd),
            Interval(math.expm1(lr), math.expm1(lr - q * sr), math.expm1(lr + q * sr)))


def _dedupe(diags):
    seen, out = set(), []
    for x in diags:
        key = (x.code, x.message)
        if key not in seen:
            seen.add(key)
            out.append(x)
    return out


def cover_transform_text(eps: float | None) -> str:
    """The cover transform in words: the plain logit, or the adjusted logit with its constant."""
    if eps is None:
        return "the logit of cover, log(p / (1 - p)) with p = cover / 100 (no value is 0 or 100 %)"
    return f"the adjusted logit log((p + e) / (1 - p + e)) with e = {eps:.4g} (p = cover / 100)"
