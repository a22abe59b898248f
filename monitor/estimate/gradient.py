"""Abundance along a gradient: distance along a transect or any covariate.

For each season, with counts ``y_i`` at covariate values ``x_i`` (and quadrat areas ``a_i`` when
given)::

    Spearman's rho = Pearson correlation of the ranks of x and y (midranks for ties),
                     p-value from scipy.stats.spearmanr (t approximation, n - 2 df)
    Poisson GLM:     log E[y_i] = b0 + b1 x_i (+ log a_i),      Wald interval for b1
    negative binomial (NB2): as above with var = mu + alpha mu^2, alpha by maximum likelihood

``exp(b1)`` is the multiplicative change in expected abundance per unit of the covariate
(per metre along a transect).  Counts are usually overdispersed; the Pearson dispersion
``X^2 / (n - 2)`` of the Poisson fit is reported, and above 1.5 the Poisson interval is too narrow
(a Diagnostic says so); ``family="auto"`` then switches to the negative binomial.

References
----------
Spearman, C. (1904). The proof and measurement of association between two things. American
Journal of Psychology 15:72-101.
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall. Ch. 6.
Hilbe, J. M. (2011). Negative Binomial Regression, 2nd ed. Cambridge University Press.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

from monitor import columns as C
from monitor.errors import Diagnostic, EstimationError

from ._common import FEW_QUADRATS, Result, check_confidence, numeric_column, require_columns, z_quantile

FAMILIES = ("poisson", "negative_binomial", "auto")
OVERDISPERSED = 1.5


@dataclass(frozen=True)
class GradientFit(Result):
    """Correlation and GLM slope of abundance on a covariate for one season."""

    season: object                  # season (year) or None when the data have one season
    n: int
    spearman_rho: float
    spearman_p: float
    family: str                     # family actually fitted
    intercept: float                # log expected count (or density with area offset) at x = 0
    slope: float                    # b1, per unit covariate on the log scale
    slope_se: float
    slope_lower: float
    slope_upper: float
    slope_p: float
    rate_ratio: float               # exp(b1): multiplicative change per unit covariate
    rate_ratio_lower: float
    rate_ratio_upper: float
    dispersion: float               # Pearson X^2 / (n - 2) of the Poisson fit
    nb_alpha: float | None          # NB2 alpha when the negative binomial was fitted
    diagnostics: tuple[Diagnostic, ...] = ()


@dataclass(frozen=True)
class GradientResult(Result):
    """Abundance against a covariate, one fit per season, with the points for the figure."""

    covariate: str
    value: str
    n: int                          # quadrat-season rows over all seasons
    confidence: float
    fits: tuple[GradientFit, ...]
    seasons: tuple[object, ...]     # season of each point
    x: tuple[float, ...]
    y: tuple[float, ...]
    offset_area: bool               # True when a quadrat-area offset was used
    note: str
    diagnostics: tuple[Diagnostic, ...] = ()

    def to_frame(self) -> pd.DataFrame:
        """One row per season."""
        return pd.DataFrame([f.to_dict() for f in self.fits])


def _fit_one(
    x: np.ndarray,
    y: np.ndarray,
    offset: np.ndarray | None,
    family: str,
    confidence: float,
    season,
    covariate: str,
) -> GradientFit:
    label = f"gradient{'' if season is None else f' (season {season})'}"
    n = int(x.size)
    if n < 3:
        raise EstimationError(f"{label}: need at least 3 quadrats, got {n}")
    if np.all(x == x[0]):
        raise EstimationError(f"{label}: the covariate '{covariate}' does not vary ({x[0]:g} everywhere)")
    if np.all(y == y[0]):
        raise EstimationError(
            f"{label}: abundance is {y[0]:g} in every quadrat; rank correlation and slope are undefined"
        )
    # statsmodels is imported here so that importing monitor.estimate stays quick
    from statsmodels.discrete.discrete_model import NegativeBinomial
    from statsmodels.genmod.families import Poisson
    from statsmodels.genmod.generalized_linear_model import GLM

    rho, p_rho = stats.spearmanr(x, y)
    design = np.column_stack([np.ones_like(x), x])
    diagnostics: list[Diagnostic] = []
    if n < FEW_QUADRATS:
        diagnostics.append(
            Diagnostic("few_quadrats", f"The {label} rests on {n} quadrats (fewer than {FEW_QUADRATS}).")
        )
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        poisson = GLM(y, design, family=Poisson(), offset=offset).fit()
    dispersion = float(poisson.pearson_chi2 / poisson.df_resid)
    use = family
    if family == "auto":
        use = "negative_binomial" if dispersion > OVERDISPERSED else "poisson"
    z = z_quantile(confidence)
    nb_alpha = None
    if use == "poisson":
        b0, b1 = (float(v) for v in poisson.params)
        se = float(poisson.bse[1])
        p_slope = float(poisson.pvalues[1])
        if dispersion > OVERDISPERSED:
            diagnostics.append(
                Diagnostic(
                    "overdispersed",
                    f"Counts vary {dispersion:.1f} times more than a Poisson model allows; the Poisson "
                    "interval for the slope is too narrow (use the negative binomial).",
                )
            )
    else:
        with warnings.catch_warnings(record=True) as nb_caught:
            warnings.simplefilter("always")
            nb = NegativeBinomial(y, design, loglike_method="nb2", offset=offset).fit(
                start_params=np.append(poisson.params, 0.5), disp=0, maxiter=200
            )
        caught.extend(nb_caught)
        b0, b1 = float(nb.params[0]), float(nb.params[1])
        se = float(nb.bse[1])
        p_slope = float(nb.pvalues[1])
        nb_alpha = float(nb.params[2])
        if not nb.mle_retvals.get("converged", True):
            diagnostics.append(Diagnostic("not_converged", f"The negative binomial fit for {label} did not converge."))
        if not (np.isfinite(se) and np.isfinite(b1)) and family == "auto":
            # few quadrats: the NB2 dispersion is not identified; scale the Poisson standard error by the
            # Pearson dispersion instead (quasi-Poisson; McCullagh & Nelder 1989, sect. 6.2)
            use = "quasi_poisson"
            b0, b1 = (float(v) for v in poisson.params)
            se = float(poisson.bse[1]) * float(np.sqrt(dispersion))
            p_slope = float(2 * stats.norm.sf(abs(b1 / se)))
            nb_alpha = None
            diagnostics.append(Diagnostic("quasi_poisson", f"The negative binomial could not be fitted for {label}; "
                                          "the Poisson slope with its standard error scaled by the dispersion is used."))
    for w in caught:
        diagnostics.append(Diagnostic("fit_warning", f"{label}: {str(w.message).splitlines()[0]}"))
    if not (np.isfinite(se) and np.isfinite(b1)):
        raise EstimationError(f"{label}: the slope could not be estimated (separation or too few non-zero counts)")
    lower, upper = b1 - z * se, b1 + z * se
    return GradientFit(
        season=season,
        n=n,
        spearman_rho=float(rho),
        spearman_p=float(p_rho),
        family=use,
        intercept=b0,
        slope=b1,
        slope_se=se,
        slope_lower=lower,
        slope_upper=upper,
        slope_p=p_slope,
        rate_ratio=float(np.exp(b1)),
        rate_ratio_lower=float(np.exp(lower)),
        rate_ratio_upper=float(np.exp(upper)),
        dispersion=dispersion,
        nb_alpha=nb_alpha,
        diagnostics=tuple(diagnostics),
    )


def estimate_gradient(
    data: pd.DataFrame,
    *,
    covariate: str = C.DISTANCE,
    value: str = C.COUNT,
    season: str | None = C.YEAR,
    family: str = "poisson",
    confidence: float = 0.95,
    on_error: str = "raise",
) -> GradientResult:
    """Abundance against a covariate: Spearman's rho and a log-linear GLM slope per season.

    Parameters
    ----------
    data : DataFrame
        One row per quadrat (and season): the covariate column (default ``distance_m`` [m]),
        the count column, optionally ``year`` and ``quadrat_area_m2`` (used as an offset, so the
        intercept is a log density [m^-2]).
    covariate : str
        Covariate column (distance along a transect, soil moisture, light, ...).
    value : str
        Count column (non-negative integers).
    season : str or None
        Season column; one fit per season.  ``None`` (or a missing column) fits all rows together.
    family : {"poisson", "negative_binomial", "auto"}
        GLM family; "auto" uses the negative binomial when the Poisson Pearson dispersion > 1.5.
    confidence : float
        Level of the Wald interval for the slope.
    on_error : {"raise", "skip"}
        A season that cannot be fitted (separation, too few non-zero counts): raise, or leave it out
        with a ``season_not_estimated`` diagnostic (an error still if no season can be fitted).

    Returns
    -------
    GradientResult

    Notes
    -----
    ``log E[y] = b0 + b1 x (+ log a)``; ``exp(b1)`` is the rate ratio per unit ``x``.  Spearman's
    rho is the Pearson correlation of midranks.

    References
    ----------
    Spearman (1904) Am. J. Psychol. 15:72-101; McCullagh & Nelder (1989) Generalized Linear Models,
    2nd ed., ch. 6; Hilbe (2011) Negative Binomial Regression, 2nd ed.
    """
    what = "gradient"
    check_confidence(confidence)
    if family not in FAMILIES:
        raise EstimationError(f"{what}: family must be one of {', '.join(FAMILIES)}, got {family!r}")
    require_columns(data, [covariate, value], what)
    x_all = numeric_column(data, covariate, what)
    y_all = numeric_column(data, value, what)
    if (y_all < 0).any() or np.any(y_all != np.round(y_all)):
        raise EstimationError(f"{what}: '{value}' must hold whole counts >= 0 for a Poisson/NB model")
    offset_area = C.QUADRAT_AREA in data.columns
    if offset_area:
        areas = numeric_column(data, C.QUADRAT_AREA, what)
        if (areas <= 0).any():
            raise EstimationError(f"{what}: a quadrat has no area ('{C.QUADRAT_AREA}' <= 0)")
        log_area = np.log(areas)
    if season is not None and season in data.columns:
        season_values = data[season].to_numpy()
        keys = sorted(pd.unique(season_values).tolist())
    else:
        season_values = np.full(len(data), None, dtype=object)
        keys = [None]
    if on_error not in ("raise", "skip"):
        raise EstimationError(f"{what}: on_error must be 'raise' or 'skip', got {on_error!r}")
    fits = []
    skipped: list[Diagnostic] = []
    for key in keys:
        mask = season_values == key if key is not None else np.ones(len(data), dtype=bool)
        try:
            fits.append(
                _fit_one(
                    x_all[mask],
                    y_all[mask],
                    log_area[mask] if offset_area else None,
                    family,
                    confidence,
                    key,
                    covariate,
                )
            )
        except EstimationError as exc:
            if on_error == "raise" or len(keys) == 1:
                raise
            skipped.append(Diagnostic("season_not_estimated", str(exc)))
    if not fits:
        raise EstimationError(f"{what}: no season could be estimated ({skipped[0].message})")
    note = (
        f"Spearman's rank correlation and a log-linear {family.replace('_', ' ')} GLM of {value} on "
        f"{covariate}, one per season; exp(slope) is the multiplicative change per unit of {covariate}"
        + (" (quadrat area as offset)." if offset_area else ".")
    )
    return GradientResult(
        covariate=covariate,
        value=value,
        n=int(len(data)),
        confidence=float(confidence),
        fits=tuple(fits),
        seasons=tuple(None if k is None else (k.item() if hasattr(k, "item") else k) for k in season_values),
        x=tuple(float(v) for v in x_all),
        y=tuple(float(v) for v in y_all),
        offset_area=offset_area,
        note=note,
        diagnostics=tuple(d for f in fits for d in f.diagnostics) + tuple(skipped),
    )
