r"""Trend models for permanent-quadrat monitoring: TrendModel -> TrendResult.

Models (i = a visit of station j in site s in year y; t = y - c, c the mid-point of the
first and last year with data):

count, "poisson"            log E[y_i] = b0 + b1 t + u_j + v_s
count, "poisson-lognormal"  log E[y_i | e_i] = b0 + b1 t + u_j + v_s + e_i,  e_i ~ N(0, sd_obs^2)
count, "negbin"             y_i ~ NB2(mu_i, theta), log mu_i = b0 + b1 t + u_j + v_s
frequency / pin_hits / presence, "binomial"
                            k_i ~ Bin(n_i, p_i), logit p_i = b0 + b1 t + u_j + v_s
cover, "logit-normal"       z_i = log((p_i + eps) / (1 - p_i + eps)) = b0 + b1 t + u_j + v_s + e_i,
                            p_i = cover_i / 100, e_i ~ N(0, sigma^2)   (linear mixed model, ML or REML)

with u_j ~ N(0, sd_station^2), v_s ~ N(0, sd_site^2) (site optional); optionally an observer
intercept crossed with station, a random year slope by site (uncorrelated with the site
intercept: lme4's (t || site)), extra fixed covariates; year as a factor (yearly indices
relative to a base year) instead of b1 t.

The trend: annual change exp(b1) - 1 [fraction per year]; for cover that is the change
in the (adjusted) odds of cover per year, and it is stated as such.

Cover adjustment (0 and 100 %): eps defaults to the smallest non-zero value of p and
1 - p in the data (Warton & Hui 2011, their recommendation for the empirical logit);
give ``cover_adjust`` (in percent) to fix it instead.  The log-likelihood of the cover
model is that of the transformed response z.

Fitting: maximum likelihood by the Laplace approximation (or adaptive Gauss-Hermite
quadrature) with our own engine, monitor.trend.glmm.

References
----------
Bates, D., Maechler, M., Bolker, B. & Walker, S. (2015) J. Stat. Softw. 67(1), 1-48.
Bolker, B. M. et al. (2009) Generalized linear mixed models: a practical guide for
  ecology and evolution. Trends Ecol. Evol. 24(3), 127-135.
Dixon, P. M. & Pechmann, J. H. K. (2005) Ecology 86(7), 1751-1756.
Harrison, X. A. (2014) Using observation-level random effects to model overdispersion in
  count data in ecology and evolution. PeerJ 2:e616.
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
from scipy.stats import norm

from monitor import columns as C
from monitor.errors import Diagnostic, EstimationError, InputError, InputProblem

from .call import DEFAULT_MARGIN, MIN_STATIONS, MIN_YEARS, classify_call
from .families import Binomial, Gaussian, NegativeBinomial, Poisson
from .glmm import GlmmFit, GlmmSpec, Term, default_year_effect, fit_glmm, year_terms

FAMILIES = ("poisson", "poisson-lognormal", "negbin", "binomial", "logit-normal")
_FAMILIES_FOR = {
    C.MEASURE_COUNT: ("poisson", "poisson-lognormal", "negbin"),
    C.MEASURE_FREQUENCY: ("binomial",),
    C.MEASURE_PIN_HITS: ("binomial",),
    C.MEASURE_PRESENCE: ("binomial",),
    C.MEASURE_COVER: ("logit-normal",),
}
SLOPE = "year"          # name of the slope parameter (per year, link scale)
INTERCEPT = "(Intercept)"
OVERDISPERSION_RATIO = 1.5   # common practice threshold for Pearson chi2 / df
LOW_COVERAGE_FRACTION = 0.5  # common practice: a year with < half the median stations visited


def default_family(measure: str) -> str:
    """The default response family for a measure.

    count -> "poisson-lognormal"; frequency, pin_hits, presence -> "binomial";
    cover -> "logit-normal".
    """
    if measure == C.MEASURE_COUNT:
        return "poisson-lognormal"
    if measure in (C.MEASURE_FREQUENCY, C.MEASURE_PIN_HITS, C.MEASURE_PRESENCE):
        return "binomial"
    if measure == C.MEASURE_COVER:
        return "logit-normal"
    raise InputError(f"unknown measure {measure!r}; expected one of {', '.join(C.MEASURES)}")


@dataclass(frozen=True)
class Interval:
    """An estimate with its interval (fractions per year unless stated)."""

    estimate: float
    lower: float
    upper: float

    def to_dict(self) -> dict:
        return {"estimate": _num(self.estimate), "lower": _num(self.lower), "upper": _num(self.upper)}


def _num(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


@dataclass(frozen=True, eq=False)
class TrendResult:
    """The fitted trend of one species and measure (immutable)."""

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
    year_random: str = "none"      # the year random effect: "iid", "ar1" or "none"
    slope_df: float = math.inf     # reference df of the slope's interval (inf: normal)
    df_method: str = "z"           # how slope_df was chosen (monitor.trend.glmm.coefficient_df)
    estimator: str = "ml-laplace"  # of the slope: see monitor.trend.glmm.ESTIMATORS ("joint-mode" is not ML)

    def conf_int(self, alpha: float = 0.05) -> pd.DataFrame:
        """Wald intervals of the fixed effects (link scale): columns lower, upper."""
        z = norm.ppf(1 - alpha / 2)
        return pd.DataFrame({"lower": self.params - z * self.bse, "upper": self.params + z * self.bse})

    def to_frame(self) -> pd.DataFrame:
        """Fixed effects as a table: estimate, se, lower, upper (95 % Wald)."""
        ci = self.conf_int()
        return pd.DataFrame({"estimate": self.params, "se": self.bse, "lower": ci["lower"], "upper": ci["upper"]})

    def to_dict(self) -> dict:
        """A JSON-ready dict (see TREND_API.md)."""
        return {
            "measure": self.measure,
            "family": self.family,
            "n_obs": int(self.n_obs),
            "n_stations": int(self.n_stations),
            "n_sites": int(self.n_sites),
            "years": [int(self.years[0]), int(self.years[1])],
            "n_years": int(self.n_years),
            "slope": {"estimate": _num(self.slope), "se": _num(self.slope_se)},
            "annual_change": self.annual_change.to_dict(),
            "annual_change_profile": None if self.annual_change_profile is None else self.annual_change_profile.to_dict(),
            "period_change": self.period_change.to_dict(),
            "random_sd": {k: _num(v) for k, v in self.random_sd.items()},
            "dispersion": _num(self.dispersion),
            "loglik": _num(self.loglik),
            "aic": _num(self.aic),
            "df": int(self.df),
            "call": self.call,
            "call_reason": self.call_reason,
            "margin": _num(self.margin),
            "converged": bool(self.converged),
            "year_random": self.year_random,
            "slope_df": _num(self.slope_df),
            "df_method": self.df_method,
            "estimator": self.estimator,
            "indices": [{"year": int(r.year), "index": _num(r.index), "lower": _num(r.lower), "upper": _num(r.upper)}
                        for r in self.indices.itertuples(index=False)],
            "diagnostics": [{"code": d.code, "message": d.message, "severity": d.severity} for d in self.diagnostics],
        }

    def summary(self) -> str:
        """A plain-text summary for people."""
        what = "change in the odds of cover" if self.family == "logit-normal" else "annual change"
        ac = self.annual_change
        lines = [
            f"Trend of {self.measure} ({self.family}, {'REML' if self.reml else 'ML'}, {self.method}), "
            f"{self.years[0]}-{self.years[1]}",
            f"  {self.n_obs} visits, {self.n_stations} stations, {self.n_sites} sites, {self.n_years} years",
            f"  {what}: {100 * ac.estimate:+.1f} % a year (95 % CI {100 * ac.lower:+.1f} to {100 * ac.upper:+.1f}, Wald)",
        ]
        if self.annual_change_profile is not None:
            p = self.annual_change_profile
            lines.append(f"  profile-likelihood 95 % CI {100 * p.lower:+.1f} to {100 * p.upper:+.1f} % a year")
        pc = self.period_change
        lines.append(f"  over the whole period: {100 * pc.estimate:+.1f} % (95 % CI {100 * pc.lower:+.1f} to "
                     f"{100 * pc.upper:+.1f})")
        lines.append(f"  call: {self.call} (margin ±{100 * self.margin:.1f} % a year). {self.call_reason}")
        sds = ", ".join(f"{k} {v:.3g}" for k, v in self.random_sd.items())
        lines.append(f"  random-effect SDs (link scale): {sds or 'none'}")
        if self.dispersion is not None:
            lab = "NB2 size" if self.family == "negbin" else "residual SD"
            lines.append(f"  {lab}: {self.dispersion:.4g}")
        lines.append(f"  log-likelihood {self.loglik:.3f} ({'REML' if self.reml else 'ML'}), AIC {self.aic:.2f}, df {self.df}")
        lines.append(self.to_frame().to_string(float_format=lambda v: f"{v:.5g}"))
        for d in self.diagnostics:
            lines.append(f"  [{d.severity}] {d.code}: {d.message}")
        return "\n".join(lines)


class TrendModel:
    r"""A generalized linear mixed model for the trend of one species and measure.

    Parameters
    ----------
    data : DataFrame
        Long table, one row per (station, visit) with a value (missing visits absent):
        ``station``, ``year`` [int], optional ``site``, ``observer``, covariates, and the
        measure's value columns (monitor.columns.MEASURE_COLUMNS).  An optional ``lineage``
        column names the first station of a relocation chain: the stations of one chain
        share one station effect (a moved quadrat continues its series).
    measure : str
        count, cover, frequency, pin_hits or presence.
    family : str, optional
        One of FAMILIES; default ``default_family(measure)``.
    year_effect : {"linear", "factor"}
        Year as a continuous covariate (the trend) or as a factor (yearly indices).  The
        slope and the call always come from the linear model; with "factor" the fixed
        effects, log-likelihood and AIC reported are those of the factor model.
    site_effect : bool
        Random site intercept when a ``site`` column with 2 or more sites exists.
    observer_effect : bool
        Random observer intercept, crossed with station (needs an ``observer`` column;
        a ';'-joined crew is one level).
    site_slope : bool
        Random slope of year by site, uncorrelated with the site intercept.
    year_random : {None, "iid", "ar1", "none"}
        Random year intercept crossed with station and site (the year-to-year variation
        that all stations share): independent ("iid") or an order-1 autoregression over
        consecutive years ("ar1"), or none.  Default (None): "iid" when the series has at
        least ``YEAR_EFFECT_MIN_YEARS`` (5) years with data and the method is Laplace,
        else "none".  With a year effect the slope's interval uses a t reference with
        between-year df (monitor.trend.glmm.coefficient_df).  Not used in the year-factor
        model, where the year fixed effects take its place.
    site_by_year : bool
        Also a random site-by-year intercept (sites fluctuating apart from each other).
    covariates : sequence of str
        Extra fixed-effect columns; non-numeric columns enter as treatment contrasts.
    method : {"laplace", "agq"}
        Laplace approximation, or adaptive Gauss-Hermite quadrature with ``n_agq`` nodes
        (only with the station intercept as the single random effect).
    reml : bool
        Restricted maximum likelihood (logit-normal only).
    cover_adjust : float, optional
        The cover adjustment eps [percent]; default the smallest non-zero cover and
        100 - cover in the data (Warton & Hui 2011).
    margin : float
        Change that matters for the call [fraction per year].
    base_year : int, optional
        Base of the yearly indices (index 1); default the first year with data.

    Notes
    -----
    log E[y] = b0 + b1 (year - c) + u_station + v_site (+ e_obs | + w_observer | + a_site (year - c));
    see the module docstring for every family.

    References
    ----------
    Bates, D. et al. (2015) J. Stat. Softw. 67(1), 1-48.
    Bolker, B. M. et al. (2009) Trends Ecol. Evol. 24(3), 127-135.
    """

    def __init__(self, data: pd.DataFrame, measure: str = "count", family: str | None = None,
                 year_effect: str = "linear", site_effect: bool = True, observer_effect: bool = False,
                 site_slope: bool = False, covariates=(), method: str = "laplace", n_agq: int = 7,
                 reml: bool = False, cover_adjust: float | None = None, margin: float = DEFAULT_MARGIN,
                 base_year: int | None = None, year_random: str | None = None, site_by_year: bool = False):
        if measure not in C.MEASURES:
            raise InputError(f"unknown measure {measure!r}; expected one of {', '.join(C.MEASURES)}")
        family = default_family(measure) if family is None else family
        if family not in FAMILIES:
            raise InputError(f"unknown family {family!r}; expected one of {', '.join(FAMILIES)}")
        if family not in _FAMILIES_FOR[measure]:
            raise InputError(f"family {family!r} does not fit measure {measure!r}; "
                             f"expected one of {', '.join(_FAMILIES_FOR[measure])}")
        if year_effect not in ("linear", "factor"):
            raise InputError(f"year_effect must be 'linear' or 'factor' (got {year_effect!r})")
        if method not in ("laplace", "agq"):
            raise InputError(f"method must be 'laplace' or 'agq' (got {method!r})")
        if reml and family != "logit-normal":
            raise InputError("REML applies to the logit-normal (cover) model only")
        if not (isinstance(margin, (int, float)) and margin > 0):
            raise InputError(f"margin of change must be a positive fraction per year (got {margin!r})")
        if method == "agq" and not (isinstance(n_agq, (int, np.integer)) and 1 <= n_agq <= 50):
            raise InputError(f"n_agq must be an integer from 1 to 50 (got {n_agq!r})")
        self.measure, self.family, self.year_effect = measure, family, year_effect
        self.observer_effect, self.site_slope = bool(observer_effect), bool(site_slope)
        self.covariates = tuple(covariates)
        self.method, self.n_agq, self.reml = method, int(n_agq), bool(reml)
        self.margin = float(margin)
        self.cover_adjust = cover_adjust
        self._notes: list[Diagnostic] = []
        self.data = self._check(data)
        d = self.data
        self.has_site = bool(site_effect) and C.SITE in d.columns and d[C.SITE].nunique() >= 2
        if site_effect and C.SITE in d.columns and d[C.SITE].nunique() < 2:
            self._notes.append(Diagnostic("one_site", "All stations lie in one site, so there is no site effect.", "info"))
        if self.site_slope and not (C.SITE in d.columns and d[C.SITE].nunique() >= 2):
            raise InputError("a random slope of year by site needs a 'site' column with at least 2 sites")
        if self.site_slope:
            self.has_site = True
        if self.observer_effect and C.OBSERVER not in d.columns:
            raise InputError("an observer effect needs an 'observer' column")
        if method == "agq" and (self.has_site or self.observer_effect or family == "poisson-lognormal"):
            raise InputError("adaptive Gauss-Hermite quadrature needs a single grouping factor: "
                             "use site_effect=False, no observer effect and a family without an observation-level effect")
        if year_random not in (None, "iid", "ar1", "none"):
            raise InputError(f"year_random must be 'iid', 'ar1' or 'none' (got {year_random!r})")
        self.years = np.sort(d[C.YEAR].unique())
        if year_random is None:
            year_random = "iid" if default_year_effect(len(self.years)) and method != "agq" else "none"
        if method == "agq" and (year_random != "none" or site_by_year):
            raise InputError("adaptive Gauss-Hermite quadrature needs a single grouping factor: "
                             "use year_random='none' and no site-by-year effect")
        if site_by_year and not self.has_site:
            raise InputError("a site-by-year effect needs a 'site' column with at least 2 sites")
        self.year_random, self.site_by_year = year_random, bool(site_by_year)
        self.first, self.last = int(self.years[0]), int(self.years[-1])
        self.centre = (self.first + self.last) / 2.0
        if base_year is None:
            base_year = self.first
        if base_year not in set(self.years.tolist()):
            raise InputError(f"base year {base_year} has no data")
        self.base_year = int(base_year)

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
            if self.measure == C.MEASURE_COUNT:
                a = v[C.COUNT]
                if np.any(a < 0) or np.any(a != np.round(a)):
                    problems.append(InputProblem("<trend data>", None, C.COUNT, None, "non-negative whole counts"))
            elif self.measure == C.MEASURE_COVER:
                a = v[C.COVER]
                if np.any(a < 0) or np.any(a > 100):
                    problems.append(InputProblem("<trend data>", None, C.COVER, None, "cover between 0 and 100 %"))
            elif self.measure == C.MEASURE_PRESENCE:
                if not np.all(np.isin(v[C.PRESENT], (0, 1))):
                    problems.append(InputProblem("<trend data>", None, C.PRESENT, None, "0 or 1"))
            else:
                k, n = value_cols
                if np.any(v[n] <= 0) or np.any(v[k] < 0) or np.any(v[k] > v[n]) or np.any(v[k] != np.round(v[k])):
                    problems.append(InputProblem("<trend data>", None, k, None, f"whole numbers from 0 to '{n}' (> 0)"))
        if problems:
            raise InputError(problems)
        d[C.YEAR] = d[C.YEAR].astype(int)
        for c in value_cols:
            d[c] = v[c]
        # a station is identified within its site (codes are unique in a programme, but a
        # table brought from elsewhere may reuse a code in two sites); a relocated quadrat
        # carries the first station of its chain in ``lineage`` and shares that station's effect
        station = d[C.LINEAGE].fillna(d[C.STATION]) if C.LINEAGE in d.columns else d[C.STATION]
        if C.SITE in d.columns:
            d["_station_key"] = d[C.SITE].astype(str) + "\x1f" + station.astype(str)
        else:
            d["_station_key"] = station.astype(str)
        return d.reset_index(drop=True)

    # ------------------------------------------------------------------ design
    def _response(self):
        d = self.data
        if self.measure == C.MEASURE_COUNT:
            y = d[C.COUNT].to_numpy(float)
            if self.family == "negbin":
                return NegativeBinomial(y), None
            return Poisson(y), None
        if self.measure == C.MEASURE_COVER:
            z, eps = logit_cover(d[C.COVER].to_numpy(float), self.cover_adjust)
            return Gaussian(z), eps
        if self.measure == C.MEASURE_PRESENCE:
            k = d[C.PRESENT].to_numpy(float)
            return Binomial(k, np.ones_like(k)), None
        kc, nc = C.MEASURE_COLUMNS[self.measure]
        return Binomial(d[kc].to_numpy(float), d[nc].to_numpy(float)), None

    def _design(self, year_effect: str):
        d = self.data
        t = d[C.YEAR].to_numpy(float) - self.centre
        cols = {INTERCEPT: np.ones(len(d))}
        if year_effect == "linear":
            cols[SLOPE] = t
        else:
            for y in self.years:
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

    def _spec(self, year_effect: str) -> tuple[GlmmSpec, np.ndarray, float | None]:
        d = self.data
        fam, eps = self._response()
        X, names, t = self._design(year_effect)
        st = pd.factorize(d["_station_key"])[0]
        terms = []
        if self.has_site:
            si = pd.factorize(d[C.SITE])[0]
            terms.append(Term("site", si, int(si.max()) + 1))
            if self.site_slope:
                terms.append(Term("site_slope", si, int(si.max()) + 1, t))
        if self.observer_effect:
            ob = pd.factorize(d[C.OBSERVER].astype(str))[0]
            terms.append(Term("observer", ob, int(ob.max()) + 1))
        yi = d[C.YEAR].to_numpy() - self.first
        si = pd.factorize(d[C.SITE])[0] if self.site_by_year else None
        if year_effect == "linear" and self.year_random != "none":
            terms += year_terms(yi, self.last - self.first + 1, self.year_random, site=si)
        elif si is not None:  # year factor: the site-by-year effect only
            terms += year_terms(yi, self.last - self.first + 1, site=si)[1:]
        spec = GlmmSpec(family=fam, X=X, x_names=names, station=st, n_station=int(st.max()) + 1, terms=terms,
                        olre=(self.family == "poisson-lognormal"))
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
            Also fit the year-as-factor model and report yearly indices.
        fast : bool, optional
            The fast path (for power analysis), by default taken when ``profile`` and
            ``indices`` are both False: the fixed effects are the joint penalised mode at
            the Laplace ML variance estimates (lme4's nAGQ = 0 estimator) with conditional
            standard errors (X' V^-1 X)^-1.  ``fast=False`` gives the full Laplace / AGQ
            maximum likelihood estimate with Hessian standard errors (the default whenever
            a profile or indices are asked for).  The Gaussian (cover) model is exact either way.

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
        if np.all(fam_check.y == fam_check.y[0]) and self.family != "logit-normal":
            raise EstimationError(f"every value of {self.measure} is the same ({fam_check.y[0]:g}); there is no trend to fit")
        full = (profile or indices) if fast is None else not fast
        spec_lin, t, eps = self._spec("linear")
        fit_lin = self._fit_spec(spec_lin, full)
        j = spec_lin.x_names.index(SLOPE)
        slope = float(fit_lin.beta[j])
        slope_se = float(math.sqrt(fit_lin.vcov[j, j]))
        z = fit_lin.quantile(j)  # t with between-year df when there is a year effect, else normal
        lo, hi = slope - z * slope_se, slope + z * slope_se
        annual = Interval(math.expm1(slope), math.expm1(lo), math.expm1(hi))
        span = self.last - self.first
        period = Interval(math.expm1(slope * span), math.expm1(lo * span), math.expm1(hi * span))
        diags = list(self._notes) + list(fit_lin.diagnostics)
        prof = None
        if profile:
            try:
                plo, phi_ = self._profile_slope(spec_lin, fit_lin, j, slope_se)
                prof = Interval(math.expm1(slope), math.expm1(plo), math.expm1(phi_))
            except (EstimationError, FloatingPointError, np.linalg.LinAlgError, ValueError) as exc:
                diags.append(Diagnostic("profile_failed", f"The profile-likelihood interval could not be computed ({exc})."))
        # factor model: indices
        fit_fac = None
        spec_fac = None
        if indices or self.year_effect == "factor":
            spec_fac, _, _ = self._spec("factor")
            fit_fac = self._fit_spec(spec_fac, True)
            diags += [Diagnostic(x.code, "Year-factor model: " + x.message, x.severity) for x in fit_fac.diagnostics
                      if x.code != "variance_at_bound"]
        idx_df = self._indices(spec_fac, fit_fac)
        primary, pspec = (fit_fac, spec_fac) if self.year_effect == "factor" else (fit_lin, spec_lin)
        params = pd.Series(primary.beta, index=pspec.x_names, name="estimate")
        bse = pd.Series(np.sqrt(np.diag(primary.vcov)), index=pspec.x_names, name="se")
        vcov = pd.DataFrame(primary.vcov, index=pspec.x_names, columns=pspec.x_names)
        diags += self._data_diagnostics(spec_lin, fit_lin, eps)
        lo_c, hi_c = (prof.lower, prof.upper) if prof is not None else (annual.lower, annual.upper)
        call, reason = classify_call(lo_c, hi_c, self.margin, n_st, n_years)
        if n_st < MIN_STATIONS:
            diags.append(Diagnostic("few_stations", f"Only {n_st} stations: the call is 'unclear' by rule."))
        if n_years < MIN_YEARS:
            diags.append(Diagnostic("few_years", f"Only {n_years} years with data: the call is 'unclear' by rule."))
        b = self.base_year
        yrs = np.arange(self.first, self.last + 1)
        e = slope * (yrs - b)
        band = np.sort(np.c_[lo * (yrs - b), hi * (yrs - b)], axis=1)
        fitted = pd.DataFrame({"year": yrs, "fit": np.exp(e), "lower": np.exp(band[:, 0]), "upper": np.exp(band[:, 1])})
        n_sites = int(d[C.SITE].nunique()) if C.SITE in d.columns else 0
        return TrendResult(
            measure=self.measure, family=self.family, n_obs=len(d), n_stations=n_st, n_sites=n_sites,
            years=(self.first, self.last), n_years=n_years, params=params, bse=bse, slope=slope, slope_se=slope_se,
            annual_change=annual, annual_change_profile=prof, period_change=period, random_sd=dict(primary.sd),
            dispersion=primary.dispersion, loglik=primary.loglik, aic=-2 * primary.loglik + 2 * primary.df,
            df=primary.df, indices=idx_df, fitted_trend=fitted, diagnostics=tuple(_dedupe(diags)), call=call,
            call_reason=reason, margin=self.margin, converged=bool(fit_lin.converged and (fit_fac is None or fit_fac.converged)),
            year_effect=self.year_effect, method=self.method, reml=self.reml, year_centre=self.centre,
            cover_eps=eps, vcov=vcov, year_random=self.year_random, slope_df=float(fit_lin.coef_df[j]),
            df_method=fit_lin.df_method, estimator=fit_lin.estimator)

    def _indices(self, spec, fit) -> pd.DataFrame:
        if fit is None:
            return pd.DataFrame({"year": pd.Series([], dtype=int), "index": pd.Series([], dtype=float),
                                 "lower": pd.Series([], dtype=float), "upper": pd.Series([], dtype=float)})
        z = norm.ppf(0.975)
        rows = []
        for y in self.years:
            if y == self.base_year:
                rows.append((int(y), 1.0, 1.0, 1.0))
                continue
            k = spec.x_names.index(f"year[{int(y)}]")
            b, s = fit.beta[k], math.sqrt(fit.vcov[k, k])
            rows.append((int(y), math.exp(b), math.exp(b - z * s), math.exp(b + z * s)))
        return pd.DataFrame(rows, columns=["year", "index", "lower", "upper"])

    def _profile_slope(self, spec: GlmmSpec, fit: GlmmFit, j: int, se: float) -> tuple[float, float]:
        """Profile-likelihood 95 % interval of the slope (Venzon & Moolgavkar 1988, by secant steps).

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
        # the signed root of the deviance is compared with the slope's reference quantile:
        # normal (sqrt of chi2(1)) without a year effect, t with between-year df with one
        target = fit.quantile(j)
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

    def _data_diagnostics(self, spec: GlmmSpec, fit: GlmmFit, eps) -> list[Diagnostic]:
        d = self.data
        out = []
        visits = d.groupby("_station_key").size()
        one = int((visits == 1).sum())
        if one:
            out.append(Diagnostic("one_visit_stations",
                                  f"{one} station(s) have a single visit; they tell about level but not about change.",
                                  "info"))
        per_year = d.groupby(C.YEAR)["_station_key"].nunique()
        low = per_year[per_year < LOW_COVERAGE_FRACTION * per_year.median()]
        if len(low):
            yrs = ", ".join(str(int(y)) for y in low.index)
            out.append(Diagnostic("low_coverage_years",
                                  f"Few stations were visited in {yrs} (under half the median of {per_year.median():g} a year)."))
        fam = spec.family
        if self.family in ("poisson", "binomial") and not (self.measure == C.MEASURE_PRESENCE):
            if isinstance(fam, Poisson):
                mu = np.exp(fit.eta)
                var = mu
            else:
                p = 1 / (1 + np.exp(-fit.eta))
                mu = fam.trials * p
                var = fam.trials * p * (1 - p)
            pearson = float(np.sum((fam.y - mu) ** 2 / np.maximum(var, 1e-12)))
            dof = max(1, len(fam.y) - fit.df)
            ratio = pearson / dof
            if ratio > OVERDISPERSION_RATIO:
                alt = "poisson-lognormal or negbin" if isinstance(fam, Poisson) else "a model with more variation"
                out.append(Diagnostic("overdispersion",
                                      f"The data vary more than the {self.family} model allows (Pearson chi2/df = "
                                      f"{ratio:.2f}); intervals are too narrow: consider {alt}."))
        if eps is not None:
            zeros = int(np.sum(d[C.COVER].to_numpy() == 0))
            full_ = int(np.sum(d[C.COVER].to_numpy() == 100))
            out.append(Diagnostic("cover_adjusted",
                                  f"Cover analysed as log((p + e)/(1 - p + e)) with e = {eps:.4g} (p = cover/100); "
                                  f"{zeros} value(s) of 0 % and {full_} of 100 %. The annual change is the change in the "
                                  "odds of cover.", "info"))
        return out


def _dedupe(diags):
    seen, out = set(), []
    for x in diags:
        key = (x.code, x.message)
        if key not in seen:
            seen.add(key)
            out.append(x)
    return out


def logit_cover(cover_pct: np.ndarray, cover_adjust: float | None = None) -> tuple[np.ndarray, float]:
    """Adjusted logit of cover: z = log((p + e) / (1 - p + e)), p = cover / 100.

    Parameters
    ----------
    cover_pct : array
        Cover [%], 0-100.
    cover_adjust : float, optional
        e in percent; default the smallest non-zero value of p and 1 - p in the data.

    Returns
    -------
    (z, e) : array, float (e as a fraction)

    References
    ----------
    Warton, D. I. & Hui, F. K. C. (2011) The arcsine is asinine: the analysis of
      proportions in ecology. Ecology 92(1), 3-10.
    """
    p = np.asarray(cover_pct, float) / 100.0
    if cover_adjust is not None:
        if not cover_adjust > 0:
            raise InputError(f"cover_adjust must be a positive percentage (got {cover_adjust!r})")
        eps = float(cover_adjust) / 100.0
    else:
        cand = np.r_[p[p > 0], 1 - p[p < 1]]
        if cand.size == 0:
            raise EstimationError("cover is 0 % and 100 % only; the logit-normal model cannot be fitted")
        eps = float(cand.min())
    return np.log((p + eps) / (1 - p + eps)), eps
