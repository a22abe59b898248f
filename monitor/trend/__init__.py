"""monitor.trend: mixed models across years for the trend of each population.

    from monitor.trend import TrendModel, TrendResult, classify_call, default_family

Our own maximum-likelihood GLMM engine (Laplace approximation and adaptive
Gauss-Hermite quadrature, PIRLS with nested block elimination) in numpy/scipy;
see monitor.trend.model for the models and monitor.trend.glmm for the algorithm.
This package never imports a database layer or click.
"""

from .call import DEFAULT_MARGIN, MIN_STATIONS, MIN_YEARS, classify_call
from .model import FAMILIES, Interval, TrendModel, TrendResult, default_family, logit_cover
from .stations import station_changes

__all__ = [
    "DEFAULT_MARGIN",
    "FAMILIES",
    "MIN_STATIONS",
    "MIN_YEARS",
    "Interval",
    "TrendModel",
    "TrendResult",
    "classify_call",
    "default_family",
    "logit_cover",
    "station_changes",
]
