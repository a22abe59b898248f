"""A positive continuous measure (shoot height [cm]) in one round: the geometric mean with a t interval.

Lengths of plants are right-skewed and multiplicative (a shoot grows by a share of its height), so the
quadrat values are summarised on the log scale, as the trend model does (``log y = b0 + b1 t + ...``):

    m = mean(log y_i),  s = sd(log y_i),  se = s / sqrt(n)
    geometric mean  G = exp(m),  interval  exp(m -/+ t_{1-alpha/2, n-1} se)

Under a lognormal distribution ``G`` estimates the median height of the quadrats and the interval is
exact (the back-transformed t interval for the mean of a normal sample); the arithmetic mean would be
``G exp(s^2/2)``.  Quadrats are treated as a simple random sample of the site (no finite-population
correction: the quadrats are a tiny share of the site).

References
----------
Limpert, E., Stahel, W. A. & Abbt, M. (2001). Log-normal distributions across the sciences: keys and
clues. BioScience 51(5), 341-352.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from monitor.errors import Diagnostic, EstimationError

from ._common import Result, few_quadrats, require_n, t_quantile


@dataclass(frozen=True)
class GeometricMeanEstimate(Result):
    """Geometric mean of a positive measure over quadrats, with its back-transformed t interval."""

    n: int
    geometric_mean: float      # exp(mean of log values) [unit of the values]
    log_mean: float            # mean of log values
    log_sd: float              # SD of log values
    se: float                  # delta-method SE of the geometric mean: G * s / sqrt(n) [unit]
    lower: float
    upper: float
    df: int
    t_quantile: float
    confidence: float
    note: str
    diagnostics: tuple[Diagnostic, ...] = ()


def estimate_geometric_mean(values, *, confidence: float = 0.95, what: str = "shoot height estimate",
                            unit: str = "cm") -> GeometricMeanEstimate:
    """Geometric mean of positive quadrat values with a t interval on the log scale, back-transformed.

    Parameters
    ----------
    values : array-like
        One value per quadrat [unit, > 0].
    confidence : float
        Two-sided confidence level.
    what, unit : str
        Words for messages and the note.

    Returns
    -------
    GeometricMeanEstimate

    Notes
    -----
    ``m = mean(log y)``, ``se_m = sd(log y) / sqrt(n)``; ``G = exp(m)``, interval ``exp(m -/+ t se_m)`` on
    ``n - 1`` df.  The reported ``se`` is the delta-method ``G se_m``.
    """
    y = np.asarray(values, dtype=float)
    if y.size and (not np.all(np.isfinite(y)) or np.any(y <= 0)):
        raise EstimationError(f"{what}: every value must be a number above 0 (the log of 0 does not exist)")
    n = int(y.size)
    require_n(n, 2, what)
    logs = np.log(y)
    m = float(logs.mean())
    s = float(logs.std(ddof=1))
    se_m = s / math.sqrt(n)
    q = t_quantile(confidence, n - 1)
    g = math.exp(m)
    note = (f"Geometric mean over quadrats (the median {unit} under a lognormal distribution); t interval on "
            f"the log scale, back-transformed.")
    return GeometricMeanEstimate(n=n, geometric_mean=g, log_mean=m, log_sd=s, se=g * se_m,
                                 lower=math.exp(m - q * se_m), upper=math.exp(m + q * se_m), df=n - 1,
                                 t_quantile=q, confidence=confidence, note=note,
                                 diagnostics=few_quadrats(n, what))
