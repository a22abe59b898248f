"""Fit one simulated data set and keep what a power study needs from the fit.

The fitters::

    "trend"    the trend engine's fast path, monitor.trend.TrendModel(...).fit(profile=False,
               indices=False): the same model family and random effects a programme's own
               analysis would use, the year effect included where the engine puts it by default
               (and a site-by-year effect where the population model has one; the year effect
               as an AR(1) over years where the population model's is, year_rho).  Wald test
               of the slope against t on the engine's between-year df (slope_df; normal
               without a year effect) with the standard error the engine's interval and call use
               (slope_se * se_scale).
    "trend-no-year" the same without a year effect (a reference where the truth has none).
    "ols-log"  ordinary least squares of the log (counts) or logit (cover) value on year, no random
               effects, t test with n - 2 degrees of freedom.  A reference for the exact
               noncentral-t check, and only valid for data with no station, site or
               overdispersion effects.
    "yearly-means" least squares of the yearly means of the log (counts) or logit (cover) values on
               year, t test with n_years - 2 degrees of freedom: the analysis whose power is exactly
               noncentral t when stations are balanced and the noise is normal on that scale
               (Urquhart, Paulsen & Larsen 1998), whatever the year-to-year variation.  A reference.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

from monitor import columns as col
from monitor import measures
from monitor.errors import MonitorError
from monitor.families import family as family_of
from monitor.power.model import Scenario, VarianceComponents
from monitor.settings import MIN_YEAR_EFFECT_YEARS


@dataclass(frozen=True)
class FitOutcome:
    """The parts of one fit a power study keeps."""

    slope: float          # link-scale slope per year
    slope_se: float       # its standard error
    df: float             # degrees of freedom of the test statistic (inf: normal)
    lower: float          # 95 % interval for the annual change, lower [fraction per year]
    upper: float          # upper
    call: str | None      # rising / declining / stable / unclear, None when the fitter makes none
    converged: bool = True
    failed: bool = False
    warned: bool = False


FAILED = FitOutcome(math.nan, math.nan, math.inf, math.nan, math.nan, None, False, True, False)


def fit_trend_engine(data: pd.DataFrame, components: VarianceComponents, scenario: Scenario, *,
                     year_random: str | None = None) -> FitOutcome:
    """Fit with the trend engine's fast path (no profile intervals, no yearly indices)."""
    from monitor.trend import TrendModel  # imported here: monitor.power works without a fitted engine

    sites = col.SITE in data.columns and data[col.SITE].nunique() >= 2
    if year_random is None and components.year_rho != 0 and data[col.YEAR].nunique() >= MIN_YEAR_EFFECT_YEARS:
        year_random = "ar1"   # the programme's analysis of an AR(1) population: --year-effect ar1
    model = TrendModel(
        data,
        measure=components.measure,
        family=components.family,
        year_effect="linear",
        site_effect=col.SITE in data.columns,
        margin=scenario.margin,
        # the year effect as the programme's own analysis fits it (the engine's default: on wherever
        # the series is long enough), and a site-by-year effect where the population model has one
        year_random=year_random,
        site_by_year=bool(components.site_year_sd > 0 and sites and year_random != "none"),
    )
    result = model.fit(profile=False, indices=False)
    change = result.annual_change
    return FitOutcome(
        slope=float(result.slope),
        # the standard error of the engine's own interval and call: with a year effect the ML one is
        # scaled to its REML equivalent (TrendResult.se_scale), and the test must use the same
        slope_se=float(result.slope_se) * float(getattr(result, "se_scale", 1.0)),
        df=float(getattr(result, "slope_df", math.inf)),
        lower=float(change.lower),
        upper=float(change.upper),
        call=str(result.call),
        converged=bool(result.converged),
    )


def fit_ols_log(data: pd.DataFrame, components: VarianceComponents, scenario: Scenario) -> FitOutcome:
    """Least-squares slope of log(count) (or logit cover) on year, t-based 95 % interval.

    Notes
    -----
    ``log y_k = a + b * year_k + e_k``, ``e_k ~ N(0, s^2)`` independent; ``se(b) = s / sqrt(S_xx)``
    with ``s^2`` the residual mean square on ``n - 2`` degrees of freedom.
    """
    y = _link_values(data, components)
    if y is None:
        return FAILED
    x = data[col.YEAR].to_numpy(float)
    n = y.size
    if n < 3 or not np.all(np.isfinite(y)):
        return FAILED
    xc = x - x.mean()
    sxx = float(xc @ xc)
    if sxx == 0:
        return FAILED
    b = float(xc @ (y - y.mean())) / sxx
    resid = y - y.mean() - b * xc
    df = n - 2
    se = math.sqrt(float(resid @ resid) / df / sxx)
    q = float(stats.t.isf(0.025, df))
    lower, upper = math.expm1(b - q * se), math.expm1(b + q * se)
    n_stations = data[col.STATION].nunique()
    n_years = int(data[col.YEAR].nunique())
    return FitOutcome(b, se, float(df), lower, upper, _call(lower, upper, scenario.margin, n_stations, n_years))


def fit_yearly_means(data: pd.DataFrame, components: VarianceComponents, scenario: Scenario) -> FitOutcome:
    """Least-squares slope of the yearly mean log (or logit) value on year, t on n_years - 2 df.

    Notes
    -----
    ``ybar_t = a + b t + d_t``, ``d_t ~ N(0, s_year^2 + s_e^2 / m)`` independent across years for a
    balanced design; ``se(b) = s / sqrt(sum (t - tbar)^2)`` with ``s^2`` the residual mean square
    of the yearly means on ``n_years - 2`` degrees of freedom.
    """
    y = _link_values(data, components)
    if y is None:
        return FAILED
    means = pd.Series(y).groupby(data[col.YEAR].to_numpy()).mean()
    x = means.index.to_numpy(float)
    ybar = means.to_numpy(float)
    n = ybar.size
    if n < 3:
        return FAILED
    xc = x - x.mean()
    sxx = float(xc @ xc)
    b = float(xc @ (ybar - ybar.mean())) / sxx
    resid = ybar - ybar.mean() - b * xc
    df = n - 2
    se = math.sqrt(float(resid @ resid) / df / sxx)
    q = float(stats.t.isf(0.025, df))
    lower, upper = math.expm1(b - q * se), math.expm1(b + q * se)
    return FitOutcome(b, se, float(df), lower, upper,
                      _call(lower, upper, scenario.margin, data[col.STATION].nunique(), n))


def _link_values(data: pd.DataFrame, components: VarianceComponents) -> np.ndarray | None:
    """The family's link of the values (log of a count or length, logit of cover as a fraction);
    None when some value has no finite link (a 0, or a cover of 0 or 100 %)."""
    entry = measures.get(components.measure)
    values = data[entry.value_column].to_numpy(float)
    if entry.kind == measures.KIND_PERCENT:
        values = values / 100.0
    with np.errstate(divide="ignore", invalid="ignore"):
        y = family_of(components.family).link(values)
    return y if y.size and np.all(np.isfinite(y)) else None


def _call(lower: float, upper: float, margin: float, n_stations: int, n_years: int) -> str | None:
    try:
        from monitor.trend import classify_call
    except ImportError:
        return None
    return str(classify_call(lower, upper, margin, n_stations, n_years)[0])


def fit_trend_engine_without_year(data: pd.DataFrame, components: VarianceComponents,
                                  scenario: Scenario) -> FitOutcome:
    """The engine's fast path with no year effect (a reference for models without year variation)."""
    return fit_trend_engine(data, components, scenario, year_random="none")


FITTERS = {"trend": fit_trend_engine, "trend-no-year": fit_trend_engine_without_year, "ols-log": fit_ols_log, "yearly-means": fit_yearly_means}


def fit_one(fitter: str, data: pd.DataFrame, components: VarianceComponents, scenario: Scenario) -> FitOutcome:
    """Run a fitter, recording (not printing) warnings and turning the project's errors into a failed fit."""
    function = FITTERS[fitter]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            outcome = function(data, components, scenario)
        except (MonitorError, np.linalg.LinAlgError, FloatingPointError):
            return FAILED
    if not (math.isfinite(outcome.slope) and math.isfinite(outcome.slope_se) and outcome.slope_se > 0):
        return FAILED
    if caught:
        outcome = FitOutcome(**{**outcome.__dict__, "warned": True})
    return outcome
