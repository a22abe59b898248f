r"""The model families: one immutable object per family, the one place that says what a family is.

Every stage asks this registry instead of spelling a family's name: the trend engine (which
density to build for a fit, how the measure's values become the modelled response, which
scale the annual change is on), the power study (how to simulate a response, the per-visit
variance its approximation needs, which parameter is the dispersion), the report (the
one-line description of the model) and the command line (the choices of ``--family``).

A family object is stateless.  What belongs to one fit (the data, the trials, the fitted
dispersion) lives in a density object made for that fit (``monitor.trend.families``), so one
family object serves any number of fits at once.

Families (eta the linear predictor b0 + b1 t + u_station + v_site + w_year, on the link scale)::

    poisson            y ~ Poisson(exp(eta))                                   counts, log link
    poisson-lognormal  y ~ Poisson(exp(eta + e)),  e ~ N(0, sd_obs^2)          counts, log link
    negbin             y ~ NB2(mean exp(eta), size theta), Var = mu + mu^2/theta counts, log link
    binomial           k ~ Binomial(n, expit(eta + e)),  e optional            k of n, logit link
    logit-normal       logit(cover / 100) = eta + r,  r ~ N(0, sigma^2)        cover, a linear mixed model
    lognormal          log(y) = eta + r,  r ~ N(0, sigma^2)                    positive values, a linear
                                                                               mixed model on log y

For the lognormal family exp(b1) - 1 is the annual change of the geometric mean (the median of
a log-normal value), and the mean over stations and visits is exp(eta + s^2 / 2) with s^2 the
station, site and residual variances (Aitchison & Brown 1957, from memory).

Adding a family: one entry in ``FAMILIES`` below (a subclass where its behaviour differs), and
``tests/test_families.py`` walks every entry through a trend fit, a power simulation and the
report's wording (DEVELOPERS.md, "Adding a model family").

References
----------
McCullagh, P. & Nelder, J. A. (1989) Generalized Linear Models, 2nd ed. Chapman & Hall
  (links and variance functions, table 2.1).
Hilbe, J. M. (2011) Negative Binomial Regression, 2nd ed. Cambridge University Press (NB2).
Warton, D. I. & Hui, F. K. C. (2011) The arcsine is asinine. Ecology 92(1), 3-10 (cover logit).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from monitor import measures
from monitor.errors import EstimationError, InputError

# the kinds of value a family models are the measure registry's kinds (monitor/measures.py)
COUNT, PERCENT, K_OF_N, BINARY, POSITIVE = (measures.KIND_COUNT, measures.KIND_PERCENT, measures.KIND_K_OF_N,
                                            measures.KIND_BINARY, measures.KIND_POSITIVE)

_ETA_MAX = 700.0


def expit(x):
    """1 / (1 + exp(-x)) without overflow (numpy only, so the registry loads without scipy)."""
    x = np.asarray(x, float)
    e = np.exp(-np.abs(x))
    return np.where(x >= 0, 1.0 / (1.0 + e), e / (1.0 + e))


@dataclass(frozen=True)
class Link:
    """A link function g (mean -> eta) with its inverse."""

    name: str
    function: Callable[[np.ndarray], np.ndarray]
    inverse: Callable[[np.ndarray], np.ndarray]

    def __call__(self, mu):
        return self.function(np.asarray(mu, float))


LOG = Link("log", np.log, lambda eta: np.exp(np.minimum(np.asarray(eta, float), _ETA_MAX)))
LOGIT = Link("logit", lambda p: np.log(p / (1.0 - p)), expit)


@dataclass(frozen=True)
class ModelFamily:
    """A model family (immutable; never holds data or fitted values).

    Attributes
    ----------
    name : the name used in files, options and results ("negbin", ...)
    kinds : the kinds of value it models (the measure registry's ``Measure.kind``)
    link : the link of the linear predictor; for the Gaussian families (logit-normal,
        lognormal) the transform of the value that the linear mixed model is fitted to
    density : the engine's distribution of the response on the fitted scale
        ("poisson", "negbin", "binomial", "gaussian"; ``monitor.trend.families.DENSITIES``)
    change_scale : what exp(b1) - 1 is a change of, in words ("count", "odds", ...)
    description : the report's one-line description of the model
    dispersion_name : the dispersion parameter in words ("NB2 size", "residual SD") or None
    dispersion_field : the power study's field holding it ("theta", "residual_sd") or None
    observation_effect : "always" (the family is defined by one), "optional" (added where
        the data are overdispersed), or "never"
    overdispersed_alternative : for a family whose variance is fixed by its mean (Poisson, and
        binomial without its observation effect), the model to consider when the data vary more;
        the trend model then runs the Pearson overdispersion check.  None: no check.
    rate_note : the report's sentence on what the rates are changes of, where a reader needs one
    """

    name: str
    kinds: tuple[str, ...]
    link: Link
    density: str
    change_scale: str
    description: str
    dispersion_name: str | None = None
    dispersion_field: str | None = None
    observation_effect: str = "never"
    overdispersed_alternative: str | None = None
    rate_note: str | None = None

    # ---------------------------------------------------------------- what it is
    @property
    def gaussian(self) -> bool:
        """A linear mixed model on the transformed value (exact likelihood; REML possible)."""
        return self.density == "gaussian"

    @property
    def change_label(self) -> str:
        """What exp(b1) - 1 is, for a table heading or a sentence: "annual change in the odds"."""
        return "annual change" if self.change_scale == "count" else f"annual change in the {self.change_scale}"

    @property
    def has_trials(self) -> bool:
        """The response is k of n: the family needs the number of trials (cells, pins; 1 for presence)."""
        return self.density == "binomial"

    @property
    def has_dispersion(self) -> bool:
        return self.dispersion_name is not None

    @property
    def log_scale(self) -> bool:
        """exp(b1) - 1 is a ratio of levels (log link or log transform) rather than of odds."""
        return self.link is LOG

    def strongly_overdispersed(self, dispersion: float | None) -> bool:
        """Whether a fitted dispersion means values vary far more than the family's plain form allows."""
        return False

    def serves(self, measure: str) -> bool:
        """Whether the family can model the values of a measure (by the measure's kind)."""
        entry = measures.REGISTRY.get(measure)
        return entry is not None and entry.kind in self.kinds

    def variance(self, mu, dispersion: float | None = None, trials=1.0):
        """Var(y) as a function of the mean on the response scale (McCullagh & Nelder 1989, table 2.1)."""
        raise NotImplementedError  # pragma: no cover - every family below gives it

    # ---------------------------------------------------------------- trend engine
    def response(self, values: np.ndarray, adjust: float | None = None) -> tuple[np.ndarray, float | None]:
        """The measure's values as the engine models them, and the adjustment made (or None)."""
        return np.asarray(values, float), None

    def check_values(self, values: np.ndarray) -> str | None:
        """What the values must be for this family, when they are not (None: fine)."""
        return None

    def mean_value(self, eta, s2: float, adjust: float = 0.0):
        """The mean over stations and visits on the measure's scale (unit 1 for counts, a fraction for
        shares) at link-scale eta, averaging over normal effects of total variance s2, and its
        derivative d value / d eta."""
        v = np.exp(np.minimum(np.asarray(eta, float) + s2 / 2, _ETA_MAX))
        return v, v

    # ---------------------------------------------------------------- power study
    def simulate(self, eta: np.ndarray, rng: np.random.Generator, *, observation_sd: float = 0.0,
                 dispersion: float | None = None, trials: int = 1, resolution: float | None = None) -> np.ndarray:
        """Draw one response per element of eta (the measure's first value column)."""
        raise NotImplementedError  # pragma: no cover

    def visit_variance(self, eta: np.ndarray, *, observation_sd: float = 0.0, dispersion: float | None = None,
                       trials: int = 1) -> np.ndarray:
        """Link-scale variance of one visit around its station's level (delta method), for the
        power approximation: what a permanent station does not cancel out."""
        raise NotImplementedError  # pragma: no cover

    def __str__(self) -> str:
        return self.name


@dataclass(frozen=True)
class _Poisson(ModelFamily):
    def variance(self, mu, dispersion=None, trials=1.0):
        return np.asarray(mu, float)

    def check_values(self, values):
        a = np.asarray(values, float)
        return "non-negative whole counts" if np.any(a < 0) or np.any(a != np.round(a)) else None

    def simulate(self, eta, rng, *, observation_sd=0.0, dispersion=None, trials=1, resolution=None):
        if self.observation_effect == "always":
            eta = eta + rng.normal(0.0, 1.0, len(eta)) * observation_sd
        return rng.poisson(np.exp(eta))

    def visit_variance(self, eta, *, observation_sd=0.0, dispersion=None, trials=1):
        return observation_sd ** 2 + np.exp(-np.asarray(eta, float))   # Var log y ~ 1 / mu


@dataclass(frozen=True)
class _NegativeBinomial(_Poisson):
    def strongly_overdispersed(self, dispersion):
        # a size below 2: variance above mu + mu^2 / 2 (common practice for "strong")
        return dispersion is not None and dispersion < 2
    def variance(self, mu, dispersion=None, trials=1.0):
        mu = np.asarray(mu, float)
        return mu + mu * mu / dispersion

    def simulate(self, eta, rng, *, observation_sd=0.0, dispersion=None, trials=1, resolution=None):
        mu = np.exp(eta)
        # NB2 as a gamma-Poisson mixture: lambda ~ Gamma(shape theta, scale mu / theta)
        return rng.poisson(rng.gamma(dispersion, mu / dispersion))

    def visit_variance(self, eta, *, observation_sd=0.0, dispersion=None, trials=1):
        return np.exp(-np.asarray(eta, float)) + 1.0 / dispersion


_GH_X, _GH_W = np.polynomial.hermite_e.hermegauss(40)
_GH_W = _GH_W / math.sqrt(2 * math.pi)     # E[f(Z)], Z ~ N(0, 1) = sum w_k f(x_k)


def _expit_moments(eta, s2: float) -> tuple[np.ndarray, np.ndarray]:
    """E[expit(eta + s Z)] and E[p (1 - p)] by Gauss-Hermite quadrature (40 nodes)."""
    p = expit(np.asarray(eta, float)[..., None] + math.sqrt(s2) * _GH_X)
    return p @ _GH_W, (p * (1 - p)) @ _GH_W


@dataclass(frozen=True)
class _Binomial(ModelFamily):
    def variance(self, mu, dispersion=None, trials=1.0):
        p = np.asarray(mu, float)
        return trials * p * (1.0 - p)

    def mean_value(self, eta, s2, adjust=0.0):
        return _expit_moments(eta, s2)

    def simulate(self, eta, rng, *, observation_sd=0.0, dispersion=None, trials=1, resolution=None):
        eta = eta + rng.normal(0.0, 1.0, len(eta)) * observation_sd
        return rng.binomial(trials, 1.0 / (1.0 + np.exp(-eta)))

    def visit_variance(self, eta, *, observation_sd=0.0, dispersion=None, trials=1):
        p = 1.0 / (1.0 + np.exp(-np.asarray(eta, float)))
        return observation_sd ** 2 + 1.0 / (trials * p * (1 - p))


@dataclass(frozen=True)
class _Gaussian(ModelFamily):
    """A linear mixed model on a transform of the value (the link); the residual SD is the dispersion."""

    def variance(self, mu, dispersion=None, trials=1.0):
        return np.full_like(np.asarray(mu, float), dispersion ** 2)

    def visit_variance(self, eta, *, observation_sd=0.0, dispersion=None, trials=1):
        return np.full_like(np.asarray(eta, float), dispersion ** 2)


@dataclass(frozen=True)
class _LogitNormal(_Gaussian):
    def response(self, values, adjust=None):
        return logit_cover(values, adjust)

    def check_values(self, values):
        a = np.asarray(values, float)
        return "cover between 0 and 100 %" if np.any(a < 0) or np.any(a > 100) else None

    def mean_value(self, eta, s2, adjust=0.0):
        # cover: E[(1 + 2e) expit(z + s Z)] - e, as a fraction
        m1, m2 = _expit_moments(eta, s2)
        a = 1.0 + 2.0 * adjust
        return np.clip(a * m1 - adjust, 0.0, 1.0), a * m2

    def simulate(self, eta, rng, *, observation_sd=0.0, dispersion=None, trials=1, resolution=None):
        z = eta + rng.normal(0.0, 1.0, len(eta)) * dispersion
        cover = 100.0 / (1.0 + np.exp(-z))
        if resolution is not None:   # recorded to a step (e.g. 1 %): small covers round to 0 as in the field
            cover = np.clip(np.round(cover / resolution) * resolution, 0.0, 100.0)
        return cover


@dataclass(frozen=True)
class _Lognormal(_Gaussian):
    def response(self, values, adjust=None):
        return np.log(np.asarray(values, float)), None

    def check_values(self, values):
        return "positive numbers (the model takes their logarithm)" if np.any(np.asarray(values, float) <= 0) else None

    def simulate(self, eta, rng, *, observation_sd=0.0, dispersion=None, trials=1, resolution=None):
        return np.exp(eta + rng.normal(0.0, 1.0, len(eta)) * dispersion)


FAMILIES: dict[str, ModelFamily] = {f.name: f for f in (
    _Poisson("poisson", (COUNT,), LOG, "poisson", "count", "Poisson counts (log link)",
             overdispersed_alternative="poisson-lognormal or negbin"),
    _Poisson("poisson-lognormal", (COUNT,), LOG, "poisson", "count",
             "Poisson counts with an observation-level random effect for extra variation (log link)",
             observation_effect="always"),
    _NegativeBinomial("negbin", (COUNT,), LOG, "negbin", "count", "negative binomial counts (log link)",
                      dispersion_name="NB2 size", dispersion_field="theta"),
    _Binomial("binomial", (K_OF_N, BINARY), LOGIT, "binomial", "odds", "binomial k-of-n (logit link)",
              observation_effect="optional",
              overdispersed_alternative="the binomial model with an observation-level effect"),
    _LogitNormal("logit-normal", (PERCENT,), LOGIT, "gaussian", "odds of cover",
                 "a linear mixed model on the logit of percent cover",
                 dispersion_name="residual SD", dispersion_field="residual_sd",
                 rate_note="For cover the rates are changes in the odds of cover, cover / (100 − cover); when "
                           "cover is low they are close to changes in cover itself."),
    _Lognormal("lognormal", (POSITIVE,), LOG, "gaussian", "geometric mean",
               "a linear mixed model on the logarithm of the value (log-normal)",
               dispersion_name="residual SD", dispersion_field="residual_sd",
               rate_note="For this measure the rates are changes in the geometric mean, the typical value "
                         "of a quadrat; single large values weigh less in it than in the plain mean."),
)}
NAMES: tuple[str, ...] = tuple(FAMILIES)


def family(name: str | ModelFamily) -> ModelFamily:
    """The family object of a name (a family object is returned as it is)."""
    if isinstance(name, ModelFamily):
        return name
    try:
        return FAMILIES[name]
    except KeyError:
        raise InputError(f"unknown family {name!r}; expected one of {', '.join(NAMES)}") from None


def describe(name: str) -> str:
    """The report's one-line description of a family's model (the name itself if it is not registered)."""
    found = FAMILIES.get(name)
    return name if found is None else found.description


def families_for(measure: str) -> tuple[str, ...]:
    """The families a measure may be fitted with: its registry entry's (``monitor.measures``)."""
    entry = measures.REGISTRY.get(measure)
    return () if entry is None else tuple(entry.families)


def logit_cover(cover_pct: np.ndarray, cover_adjust: float | None = None) -> tuple[np.ndarray, float | None]:
    """Logit of cover, adjusted only where it must be: z = log((p + e) / (1 - p + e)), p = cover / 100.

    Parameters
    ----------
    cover_pct : array
        Cover [%], 0-100.
    cover_adjust : float, optional
        e in percent.  Default: none (e = 0, the plain logit, the log odds of cover) when
        every value lies strictly between 0 and 100 %; otherwise the smallest non-zero
        value of p and 1 - p in the data.

    Returns
    -------
    (z, e) : array, float or None (e as a fraction; None for the plain logit)

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
    elif np.all((p > 0) & (p < 1)):
        return np.log(p / (1 - p)), None
    else:
        cand = np.r_[p[p > 0], 1 - p[p < 1]]
        if cand.size == 0:
            raise EstimationError("cover is 0 % and 100 % only; the logit-normal model cannot be fitted")
        eps = float(cand.min())
    return np.log((p + eps) / (1 - p + eps)), eps
