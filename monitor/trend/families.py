"""Response densities for the GLMM engine: full log densities and their eta-derivatives.

A density object belongs to ONE fit: it holds that fit's data (y, trials) and, while the
engine searches, that fit's dispersion.  It is made from a family of the registry
(``monitor.families``, immutable and shared) by :func:`density`, so two fits of one family,
at the same time or interleaved, never see each other's data or dispersion.

Each family gives, for a linear predictor ``eta`` on the link scale,

* ``loglik(eta)``  the log density of every observation, constants included
  (so the total is comparable with R's ``logLik`` for glmer / glmmTMB / lmer);
* ``derivs(eta)``  ``(d, w)`` with ``d = dl/deta`` and ``w = -d2l/deta2`` (the
  observed information, positive for all four families here);
* ``pearson_sq(eta)``  squared Pearson residuals (y - E y)^2 / Var y, whose sum over the
  observations divided by the residual df is the usual overdispersion ratio
  (McCullagh & Nelder 1989, sec. 4.5).

Families
--------
::

    poisson    l = y*eta - exp(eta) - log(y!)                                  (log link)
    binomial   l = k*eta - n*log(1 + exp(eta)) + log C(n, k)                   (logit link)
    negbin     NB2 with size theta, mean mu = exp(eta), Var = mu + mu^2/theta
               l = lgamma(y+theta) - lgamma(theta) - log(y!) + theta*log(theta/(theta+mu)) + y*log(mu/(theta+mu))
    gaussian   l = -log(sigma) - log(2*pi)/2 - (y - eta)^2 / (2 sigma^2)        (identity link)

References
----------
McCullagh, P. & Nelder, J. A. (1989) Generalized Linear Models, 2nd ed. Chapman & Hall.
Hilbe, J. M. (2011) Negative Binomial Regression, 2nd ed. Cambridge University Press (NB2).
"""

from __future__ import annotations

import numpy as np
from scipy.special import expit, gammaln

from monitor.families import family as family_of

_ETA_MAX = 700.0


class Family:
    """A response family with fixed data; ``dispersion`` is set by the engine when it has one."""

    name = "base"
    has_dispersion = False

    def __init__(self, y: np.ndarray, trials: np.ndarray | None = None):
        self.y = np.asarray(y, dtype=float)
        self.trials = None if trials is None else np.asarray(trials, dtype=float)
        self.dispersion: float | None = None
        self._const = self._constant()

    def _constant(self) -> np.ndarray:
        return np.zeros_like(self.y)

    def loglik(self, eta: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def derivs(self, eta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:  # pragma: no cover
        raise NotImplementedError

    def pearson_sq(self, eta: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def glm_start(self) -> np.ndarray:
        """A starting linear predictor for the GLM fit."""
        raise NotImplementedError  # pragma: no cover


class Poisson(Family):
    name = "poisson"

    def _constant(self):
        return -gammaln(self.y + 1.0)

    def loglik(self, eta):
        eta = np.minimum(eta, _ETA_MAX)
        return self.y * eta - np.exp(eta) + self._const

    def derivs(self, eta):
        mu = np.exp(np.minimum(eta, _ETA_MAX))
        return self.y - mu, mu

    def pearson_sq(self, eta):
        mu = np.exp(np.minimum(eta, _ETA_MAX))
        return (self.y - mu) ** 2 / np.maximum(mu, 1e-300)

    def glm_start(self):
        return np.log(self.y + 0.5)


class Binomial(Family):
    name = "binomial"

    def _constant(self):
        n, k = self.trials, self.y
        return gammaln(n + 1.0) - gammaln(k + 1.0) - gammaln(n - k + 1.0)

    def loglik(self, eta):
        # log(1 + e^eta) as max(eta, 0) + log1p(e^-|eta|): exact, and 2x faster than np.logaddexp
        softplus = np.maximum(eta, 0.0) + np.log1p(np.exp(-np.abs(eta)))
        return self.y * eta - self.trials * softplus + self._const

    def derivs(self, eta):
        p = expit(eta)
        return self.y - self.trials * p, self.trials * p * (1.0 - p)

    def pearson_sq(self, eta):
        p = expit(eta)
        return (self.y - self.trials * p) ** 2 / np.maximum(self.trials * p * (1.0 - p), 1e-300)

    def glm_start(self):
        p = (self.y + 0.5) / (self.trials + 1.0)
        return np.log(p / (1.0 - p))


class NegativeBinomial(Family):
    name = "negbin"
    has_dispersion = True

    def _constant(self):
        return -gammaln(self.y + 1.0)

    _size_terms = (None, None)

    def _theta_part(self, th):
        """lgamma(y + theta) - lgamma(theta) - log(y!) + theta log(theta): kept while theta is unchanged
        (the inner Newton iterations evaluate the density many times at one theta)."""
        if self._size_terms[0] != th:
            self._size_terms = (th, gammaln(self.y + th) - gammaln(th) + self._const + th * np.log(th))
        return self._size_terms[1]

    def loglik(self, eta):
        th = self.dispersion
        eta = np.minimum(eta, _ETA_MAX)
        log_tm = np.logaddexp(np.log(th), eta)  # log(theta + mu)
        return self._theta_part(th) - (th + self.y) * log_tm + self.y * eta

    def derivs(self, eta):
        th = self.dispersion
        mu = np.exp(np.minimum(eta, _ETA_MAX))
        tm = th + mu
        d = th * (self.y - mu) / tm
        w = (self.y + th) * mu * th / (tm * tm)
        return d, w

    def pearson_sq(self, eta):
        mu = np.exp(np.minimum(eta, _ETA_MAX))
        return (self.y - mu) ** 2 / np.maximum(mu + mu * mu / self.dispersion, 1e-300)

    def glm_start(self):
        return np.log(self.y + 0.5)


class Gaussian(Family):
    name = "gaussian"
    has_dispersion = True

    def loglik(self, eta):
        s = self.dispersion
        r = self.y - eta
        return -np.log(s) - 0.5 * np.log(2 * np.pi) - 0.5 * r * r / (s * s)

    def derivs(self, eta):
        s2 = self.dispersion ** 2
        return (self.y - eta) / s2, np.full_like(self.y, 1.0 / s2)

    def pearson_sq(self, eta):
        return (self.y - eta) ** 2 / self.dispersion ** 2

    def glm_start(self):
        return self.y.copy()


DENSITIES: dict[str, type[Family]] = {"poisson": Poisson, "binomial": Binomial, "negbin": NegativeBinomial,
                                      "gaussian": Gaussian}


def density(family, y: np.ndarray, trials: np.ndarray | None = None) -> Family:
    """A new density for one fit of ``family`` (a ``monitor.families.ModelFamily`` or its name).

    ``y`` is the response on the engine's scale (``ModelFamily.response``: the logit of cover,
    the log of a positive value, counts as they are); ``trials`` the n of k-of-n data.
    """
    return DENSITIES[family_of(family).density](y, trials)
