"""Gerrodette's (1987) analytic approximation to the power of a linear-regression trend test.

APPROXIMATION.  These formulas treat each survey year as one independent estimate of abundance
with a known coefficient of variation and ask whether the regression slope of those estimates
on time clears a normal critical value.  They ignore estimated variances (z instead of t), the
mixed model's use of repeated visits, and the count family's discreteness.  The simulation in
``monitor.power.study`` is the reference; these give a quick figure to show beside it and a
starting guess for searches.

Gerrodette's inequality (1987, eq. 1 and the cases following it; written here from memory and
re-derived below) for n equally spaced surveys, a one-sided level alpha (two-sided: alpha/2)
and power 1 - beta:

Linear change ``A_i = A_1 (1 + r (i - 1))``, slope ``b = r A_1``, regression on A:

    r^2 n (n - 1) (n + 1)  >=  12 CV_1^2 f(r, n) (z_alpha + z_beta)^2

    f = 1 + r (n - 1) + r^2 (n - 1)(2n - 1) / 6     CV constant
    f = 1 + r (n - 1) / 2                            CV proportional to A^(-1/2) (Poisson-like)
    f = 1                                            SD constant (CV proportional to 1/A)

Exponential change ``A_i = A_1 (1 + r)^(i - 1)``, regression on ln A, CV constant:

    [ln(1 + r)]^2 n (n - 1)(n + 1)  >=  12 ln(1 + CV^2) (z_alpha + z_beta)^2

Derivation (which the tests check numerically): the slope's standard error is
``sigma_bar / sqrt(S_xx)`` with ``S_xx = sum (i - i_bar)^2 = n (n^2 - 1) / 12`` and
``sigma_bar^2`` the mean of the yearly variances ``(CV_i A_i)^2``; f is that mean over
``(CV_1 A_1)^2``.  On the log scale a lognormal estimate with coefficient of variation CV has
variance ``ln(1 + CV^2)``.  Solving for ``z_beta`` gives the power ``Phi(z_beta)``.

References
----------
Gerrodette, T. (1987). A power analysis for detecting trends. Ecology 68:1364-1372.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize, stats

from monitor.errors import DesignError
from monitor.families import family as family_of
from monitor.power.model import (
    Design,
    Scenario,
    VarianceComponents,
    mean_share_visited,
    scaled_components,
    year_correlation,
)

CV_MODELS = ("constant", "poisson", "sd")


def _z_alpha(alpha: float, side: str) -> float:
    if not 0 < alpha < 1:
        raise DesignError("alpha must lie strictly between 0 and 1")
    if side == "two-sided":
        return float(stats.norm.isf(alpha / 2))
    if side in ("decline", "rise", "one-sided"):
        return float(stats.norm.isf(alpha))
    raise DesignError(f"test side {side!r}: expected two-sided, decline or rise")


def _signed(delta: float, side: str) -> float:
    """Standardised effect in the tested direction (negative when the change runs the other way)."""
    if side == "decline":
        return -delta
    if side == "rise":
        return delta
    return abs(delta)


def variance_factor(rate: float, n_surveys: int, cv_model: str = "constant") -> float:
    """Gerrodette's f(r, n): mean yearly variance over the first year's, for linear change.

    See the module docstring for the three cases.
    """
    n, r = n_surveys, rate
    if cv_model == "constant":
        return 1 + r * (n - 1) + r**2 * (n - 1) * (2 * n - 1) / 6
    if cv_model == "poisson":
        return 1 + r * (n - 1) / 2
    if cv_model == "sd":
        return 1.0
    raise DesignError(f"cv_model {cv_model!r}: expected one of {', '.join(CV_MODELS)}")


def gerrodette_linear_power(rate: float, n_surveys: int, cv: float, alpha: float = 0.05,
                            side: str = "two-sided", cv_model: str = "constant") -> float:
    """Approximate power to detect a linear trend (Gerrodette 1987), an APPROXIMATION.

    Parameters
    ----------
    rate : float
        r, the change per survey interval as a fraction of the first survey's abundance
        (``A_i = A_1 (1 + r (i - 1))``); negative for a decline.
    n_surveys : int
        n, equally spaced surveys.
    cv : float
        CV_1, coefficient of variation of the first survey's abundance estimate.
    alpha : float
        Significance level; two-sided tests use ``z_{alpha/2}``.
    side : str
        ``"two-sided"``, ``"decline"`` or ``"rise"``.
    cv_model : str
        How CV changes with abundance: ``"constant"``, ``"poisson"`` (CV proportional to
        A^(-1/2)) or ``"sd"`` (constant SD).

    Returns
    -------
    float
        ``Phi(z_beta)`` with ``z_beta = r sqrt(n (n-1)(n+1)) / (CV_1 sqrt(12 f)) - z_alpha``.

    Notes
    -----
    Solves Gerrodette's inequality ``r^2 n (n-1)(n+1) >= 12 CV_1^2 f (z_alpha + z_beta)^2`` for
    the power; the far tail of a two-sided test is ignored, as in the paper.

    References
    ----------
    Gerrodette, T. (1987). A power analysis for detecting trends. Ecology 68:1364-1372.
    """
    _check(n_surveys, cv)
    if 1 + rate * (n_surveys - 1) <= 0:
        raise DesignError("a linear decline this steep reaches zero abundance within the surveys")
    f = variance_factor(rate, n_surveys, cv_model)
    delta = rate * math.sqrt(n_surveys * (n_surveys - 1) * (n_surveys + 1)) / (cv * math.sqrt(12 * f))
    return float(stats.norm.cdf(_signed(delta, side) - _z_alpha(alpha, side)))


def gerrodette_exponential_power(rate: float, n_surveys: int, cv: float, alpha: float = 0.05,
                                 side: str = "two-sided") -> float:
    """Approximate power to detect exponential change on the log scale (Gerrodette 1987), an APPROXIMATION.

    ``A_i = A_1 (1 + r)^(i - 1)``, constant CV; regression of ln A on time:
    ``[ln(1+r)]^2 n (n-1)(n+1) >= 12 ln(1 + CV^2) (z_alpha + z_beta)^2``.

    References
    ----------
    Gerrodette, T. (1987). A power analysis for detecting trends. Ecology 68:1364-1372.
    """
    _check(n_surveys, cv)
    if rate <= -1:
        raise DesignError("annual change must be greater than -100 %")
    n = n_surveys
    delta = math.log1p(rate) * math.sqrt(n * (n - 1) * (n + 1)) / math.sqrt(12 * math.log1p(cv**2))
    return float(stats.norm.cdf(_signed(delta, side) - _z_alpha(alpha, side)))


def _check(n_surveys: int, cv: float) -> None:
    if n_surveys < 3:
        raise DesignError("a regression trend test needs at least three surveys")
    if not cv > 0:
        raise DesignError("CV must be positive")


@dataclass(frozen=True)
class Approximation:
    """Approximate power for a monitoring design (APPROXIMATION; the simulation is the reference)."""

    power: float              # approximate power
    cv_year: float            # CV of a year's programme-wide index implied by the design
    visits_per_year: float    # expected visits made per year
    sd_per_visit: float       # effective link-scale noise SD of one visit
    sd_index: float = math.nan       # link-scale SD of a year's index, year effects included
    df: float = math.inf             # degrees of freedom of the test (inf: normal)
    ceiling: float = 1.0             # power with unlimited stations over the same years
    label: str = "approximation (Gerrodette 1987, exponential change, regression on the log scale)"

    def to_dict(self) -> dict:
        return {"power": self.power, "ceiling": self.ceiling, "sd_index": self.sd_index,
                "df": None if math.isinf(self.df) else self.df, "label": self.label}


def yearly_index_sd(components: VarianceComponents, design: Design, annual_change: float = 0.0) -> tuple[float, float, float]:
    """Link-scale SD of one year's programme index from the stations alone: (sd, sd_per_visit, visits_per_year).

    Notes
    -----
    Per visit, the link-scale noise that a permanent station does not cancel out is
    ``w(u) = s_obs^2 + 1/mu`` (Poisson families, delta method ``Var log y ~ 1/mu``),
    ``1/mu + 1/theta`` (negbin), ``s_obs^2 + 1/(n p (1-p))`` (binomial, logit scale) or
    ``s_res^2`` (logit-normal, lognormal), with ``mu`` (or ``p``) at mid-period for a station with
    combined random effect ``u ~ N(0, s_station^2 + s_site^2)``.  Stations carry information in
    proportion to ``1/w``, so the effective per-visit variance is ``1 / E_u[1/w(u)]``
    (Gauss-Hermite, 40 nodes).  With every station visited every year the station and site
    intercepts cancel out of the trend; under rotating panels the station variance is added
    (a conservative simplification).  A year's index variance is that over the expected
    visits per year.  The year and site-by-year effects are added by :func:`index_variance`.
    """
    s = scaled_components(components, design)
    family = components.family
    beta = math.log1p(annual_change)
    level = s["intercept"] + beta * (design.n_years - 1) / 2
    sd_u = math.hypot(s["station_sd"], s["site_sd"])
    nodes, weights = np.polynomial.hermite_e.hermegauss(40)
    weights = weights / weights.sum()
    eta = level + sd_u * nodes
    fam = family_of(family)
    w = fam.visit_variance(eta, observation_sd=s["observation_sd"], trials=components.trials,
                           dispersion=None if fam.dispersion_field is None else s[fam.dispersion_field])
    per_visit = 1.0 / float(np.sum(weights / w))
    if not design.panels.every_year:
        per_visit += s["station_sd"] ** 2
    visits = design.n_stations * mean_share_visited(design)
    return math.sqrt(per_visit / visits), math.sqrt(per_visit), visits


def has_year_variation(components: VarianceComponents) -> bool:
    """Whether the population model carries a year or site-by-year effect."""
    return components.year_sd > 0 or components.site_year_sd > 0


def index_variance(components: VarianceComponents, design: Design, annual_change: float = 0.0, *,
                   unlimited_stations: bool = False) -> float:
    """Link-scale variance of a year's programme index (Urquhart, Paulsen & Larsen 1998).

    Notes
    -----
    ``var(index_t) = s_year^2 + s_site_year^2 / J + w / m`` with ``J`` sites, ``m`` expected visits
    a year and ``w`` the effective per-visit variance of :func:`yearly_index_sd`, so that

        var(b1) = [s_year^2 + s_site_year^2 / J + w / m] / sum_t (t - tbar)^2,

    Urquhart et al.'s (1998) ``[sd_year^2 + (sd_site_year^2 + sd_e^2) / m] / sum (t - tbar)^2``
    with their sites as our stations (one station a site).  With ``unlimited_stations`` the limit as
    ``m -> inf``: the stations' part vanishes, and so does the site-by-year part when the design lets
    the number of sites grow with the stations (``design.n_sites`` not given); only more years can
    lower what is left.

    References
    ----------
    Urquhart, N. S., Paulsen, S. G. & Larsen, D. P. (1998) Monitoring for policy-relevant regional
    trends over time. Ecological Applications 8(2), 246-257.
    """
    s = scaled_components(components, design)
    if unlimited_stations:
        site_year = s["site_year_sd"] ** 2 / design.n_sites if design.n_sites is not None else 0.0
        return s["year_sd"] ** 2 + site_year
    sd_stations, _per_visit, _visits = yearly_index_sd(components, design, annual_change)
    return s["year_sd"] ** 2 + s["site_year_sd"] ** 2 / design.sites_for(components) + sd_stations**2


def slope_variance(components: VarianceComponents, design: Design, annual_change: float = 0.0, *,
                   unlimited_stations: bool = False) -> float:
    """Link-scale variance of the least-squares slope of the yearly indices on year.

    Notes
    -----
    The yearly indices ``ybar = X b + d`` (X: intercept and year, N consecutive years) have
    covariance ``Sigma = s_year^2 R + (s_site_year^2 / J + w / m) I`` with ``R_tt' = rho^|t - t'|``
    (``components.year_rho``; R = I for independent years) and the stations' part of
    :func:`index_variance` on the diagonal.  The ordinary least-squares slope then has

        var(b1) = [(X'X)^-1 X' Sigma X (X'X)^-1]_11 = c' Sigma c,   c_t = (t - tbar) / S_xx,

    the variance of the least-squares (not the generalised least-squares) slope of the yearly
    means.  With independent years it is Urquhart et al.'s ``[s_year^2 + (...)/m] / S_xx``.  For a
    straight-line trend under stationary autocorrelation least squares loses little against GLS
    (Grenander 1954, from memory: it is asymptotically efficient for polynomial trends), so the
    same figure stands for the engine's AR(1) fit.  Positive rho makes neighbouring years alike,
    which a trend cannot tell from a slope: var(b1) grows with rho.
    """
    n = design.n_years
    total = index_variance(components, design, annual_change, unlimited_stations=unlimited_stations)
    t = np.arange(n, dtype=float)
    c = (t - t.mean()) / float(np.sum((t - t.mean()) ** 2))
    year = scaled_components(components, design)["year_sd"] ** 2
    sigma = year * year_correlation(n, components.year_rho) + (total - year) * np.eye(n)
    return float(c @ sigma @ c)


def _t_power(ncp: float, df: float, alpha: float, side: str) -> float:
    """Power of a t test on ``df`` degrees of freedom with noncentrality ``ncp`` (scipy.stats.nct)."""
    if side == "two-sided":
        q = float(stats.t.isf(alpha / 2, df))
        return float(stats.nct.sf(q, df, ncp) + stats.nct.cdf(-q, df, ncp))
    q = float(stats.t.isf(alpha, df))
    if side == "decline":
        return float(stats.nct.cdf(-q, df, ncp))
    if side == "rise":
        return float(stats.nct.sf(q, df, ncp))
    raise DesignError(f"test side {side!r}: expected two-sided, decline or rise")


def _power_from_se(slope: float, se: float, df: float, alpha: float, side: str) -> float:
    """Power of the test of the slope with standard error ``se`` (t on ``df``; normal when inf)."""
    if se <= 0:
        return 1.0 if _signed(slope, side) > 0 else float(alpha)
    ncp = slope / se
    if math.isinf(df):
        # Gerrodette's exponential case with ln(1 + CV^2) = sd^2, written on the log scale directly
        return float(stats.norm.cdf(_signed(ncp, side) - _z_alpha(alpha, side)))
    return _t_power(ncp, df, alpha, side)


def approximate_power(components: VarianceComponents, design: Design, scenario: Scenario, *,
                      df: float | None = None) -> Approximation:
    """Approximate power of a design (APPROXIMATION).

    Parameters
    ----------
    components, design, scenario
        Population model, design and the change to detect.
    df : float or None
        Degrees of freedom of the test.  By default ``n_years - 2`` (the regression of yearly
        indices, a t test) when the model carries year-to-year variation, else infinite (normal,
        Gerrodette's form).

    Notes
    -----
    The programme's yearly index is treated as one survey a year with link-scale variance
    ``sd^2`` from :func:`index_variance` (year effect, site-by-year effect and the stations'
    noise); the slope's variance is :func:`slope_variance` (``sd^2 / S_xx`` for independent years,
    the least-squares slope's ``c' Sigma c`` for AR(1) year effects).  Without year variation ``power = Phi(|ln(1 + r)| sqrt(N (N^2 - 1) / 12) / sd - z_alpha)``
    for N survey years (Gerrodette 1987).  With it the test is the t test of the regression of the
    yearly indices on year: ``T ~ t'(N - 2, ncp = ln(1 + r) sqrt(S_xx) / sd)`` (noncentral t;
    scipy.stats.nct), exact for a balanced design when the station noise is normal on the link
    scale.  ``ceiling`` is the same power with unlimited stations (:func:`index_variance`).

    References
    ----------
    Gerrodette, T. (1987). A power analysis for detecting trends. Ecology 68:1364-1372.
    Urquhart, N. S., Paulsen, S. G. & Larsen, D. P. (1998). Ecological Applications 8:246-257.
    """
    n = design.n_years
    if n < 3:
        raise DesignError("a regression trend test needs at least three survey years")
    sd_stations, sd_visit, visits = yearly_index_sd(components, design, scenario.annual_change)
    yearly = has_year_variation(components)
    if df is None:
        df = float(n - 2) if yearly else math.inf
    sd = math.sqrt(index_variance(components, design, scenario.annual_change))
    se = math.sqrt(slope_variance(components, design, scenario.annual_change))
    power = _power_from_se(scenario.slope, se, df, scenario.alpha, scenario.side)
    se_limit = math.sqrt(slope_variance(components, design, scenario.annual_change, unlimited_stations=True))
    ceiling = _power_from_se(scenario.slope, se_limit, df, scenario.alpha, scenario.side)
    cv = math.sqrt(math.expm1(sd**2)) if sd < 25 else math.inf
    label = ("approximation (Urquhart et al. 1998 variance, noncentral t on n_years - 2 df)" if not math.isinf(df)
             else "approximation (Gerrodette 1987, exponential change, regression on the log scale)")
    if components.year_rho != 0 and components.year_sd > 0:
        label = label[:-1] + f"; AR(1) year effects, rho {components.year_rho:g}: variance of the least-squares slope)"
    return Approximation(power=power, cv_year=cv, visits_per_year=visits, sd_per_visit=sd_visit, sd_index=sd,
                         df=df, ceiling=ceiling, label=label)


def years_needed(components: VarianceComponents, design: Design, scenario: Scenario, *, target: float = 0.8,
                 max_years: int = 100) -> int | None:
    """Smallest number of consecutive survey years whose approximate power reaches ``target`` (APPROXIMATION).

    The design's stations are kept; None when even ``max_years`` do not reach it.
    """
    for n in range(3, max_years + 1):
        if approximate_power(components, design.with_(n_years=n), scenario).power >= target:
            return n
    return None


def approximate_detectable_change(components: VarianceComponents, design: Design, *, alpha: float = 0.05,
                                  side: str = "decline", power: float = 0.8) -> float:
    """Smallest steady annual change reaching ``power`` by the approximation [fraction per year].

    Negative (a decline) unless ``side == "rise"``; a two-sided test looks for a decline.
    The first crossing of the target along growing ``|log(1 + r)|`` is refined by Brent's method.
    """
    if not 0 < power < 1:
        raise DesignError("target power must lie strictly between 0 and 1")
    sign = 1.0 if side == "rise" else -1.0

    def gap(log_slope: float) -> float:
        r = math.expm1(sign * math.exp(log_slope))
        return approximate_power(components, design, Scenario(r, alpha=alpha, side=side)).power - power

    # scan |beta| = |log(1 + r)| upward on a log grid and take the first crossing: for very steep
    # declines counts vanish by mid-period and the approximation's power falls again
    grid = np.linspace(math.log(1e-5), math.log(math.log(10.0)), 60)  # up to -90 % or +900 % a year
    previous = grid[0]
    if gap(previous) >= 0:
        return math.expm1(sign * 1e-5)
    for point in grid[1:]:
        if gap(point) >= 0:
            root = optimize.brentq(gap, previous, point, xtol=1e-12)
            return math.expm1(sign * math.exp(root))
        previous = point
    raise DesignError("no steady change within 90 % a year reaches that power with this design")
