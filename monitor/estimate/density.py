"""Density per m^2 and population totals from quadrat counts.

Simple random sampling of quadrats (Cochran 1977, ch. 2)
--------------------------------------------------------
A site of area ``A`` holds ``N = A / a`` non-overlapping positions for a quadrat of area ``a``.
From ``n`` quadrats with counts ``y_i`` and areas ``a_i`` the per-quadrat densities are
``d_i = y_i / a_i`` [m^-2] and::

    D_hat   = mean(d_i)                         density [m^-2]
    Y_hat   = A * D_hat                         total; = ybar * (A / a) for equal quadrats
    v(D)    = (1 - f) * s_d^2 / n               f = sum(a_i) / A  (= n / N for equal quadrats)
    CI      = Y_hat +/- t_{n-1, 1-alpha/2} * A * sqrt(v(D))

``1 - f`` is the finite population correction (fpc).  The lower limit of a total is never
below the number of individuals actually counted (they are certainly there).

Stratified random sampling (Cochran 1977, ch. 5)
------------------------------------------------
With strata of area ``A_h`` (weights by area) and stratum densities ``D_h``::

    Y_hat_st = sum_h A_h * D_h,      v(Y_hat_st) = sum_h A_h^2 (1 - f_h) s_h^2 / n_h

with Satterthwaite's effective degrees of freedom (Cochran 1977, eq. 5.16)::

    df = (sum_h g_h s_h^2)^2 / sum_h (g_h s_h^2)^2 / (n_h - 1),   g_h = A_h^2 (1 - f_h) / n_h

Systematic and spatially balanced placements
--------------------------------------------
No unbiased design-based variance exists for one systematic sample.  The simple-random-sampling
estimator is used; for populations with spatial trend or positive autocorrelation it overstates the
variance, so the interval is conservative (Cochran 1977, sec. 8.6-8.8; Wolter 2007, ch. 8;
Stevens & Olsen 2003).  The result's ``note`` says so.

References
----------
Cochran, W. G. (1977). Sampling Techniques, 3rd ed. Wiley, New York.
Wolter, K. M. (2007). Introduction to Variance Estimation, 2nd ed. Springer, New York.
Stevens, D. L. & Olsen, A. R. (2003). Variance estimation for spatially balanced samples of
environmental resources. Environmetrics 14:593-610.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor.errors import Diagnostic, EstimationError

from ._common import (
    Result,
    check_nonnegative,
    check_positive_area,
    few_quadrats,
    numeric_column,
    require_columns,
    require_n,
    t_quantile,
)

VARIANCE_SRS = "simple random sampling estimator s^2/n with finite population correction"

_DESIGN_NOTES = {
    C.PLACEMENT_RANDOM: "Quadrats placed at random: the simple-random-sampling variance is unbiased.",
    C.PLACEMENT_STRATIFIED: "Stratified random placement: strata weighted by area, "
    "variance summed over strata, Satterthwaite degrees of freedom.",
    C.PLACEMENT_SYSTEMATIC: "Systematic placement: variance by the simple-random-sampling estimator, "
    "which is conservative (overstates the variance) when abundance trends or is spatially "
    "autocorrelated across the site (Cochran 1977 sec. 8.6-8.8; Wolter 2007 ch. 8).",
    C.PLACEMENT_BALANCED: "Spatially balanced placement: variance by the simple-random-sampling estimator, "
    "which is conservative (overstates the variance) for spatially structured abundance "
    "(Stevens & Olsen 2003).",
    C.PLACEMENT_TRANSECT: "Quadrats along transects (systematic in one dimension): variance by the "
    "simple-random-sampling estimator, conservative when abundance trends along the line "
    "(Cochran 1977 sec. 8.6-8.8).",
    C.PLACEMENT_TARGETED: "Targeted placement is not a probability sample: the total and its interval "
    "describe the chosen spots, not the site.",
}


def design_note(design: str) -> str:
    """The sentence stating which variance estimator is used for a placement, and its caveat."""
    if design not in _DESIGN_NOTES:
        raise EstimationError(f"unknown placement {design!r}; expected one of {', '.join(C.PLACEMENTS)}")
    return _DESIGN_NOTES[design]


@dataclass(frozen=True)
class DensityEstimate(Result):
    """Density and total for one site (or one stratum) from quadrat counts."""

    n: int                       # quadrats
    site_area_m2: float
    quadrat_area_m2: float       # mean quadrat area
    sampling_fraction: float     # f = sampled area / site area
    fpc: float                   # factor applied to the variance: 1 - f, or 1 when not applied
    mean_count: float            # mean count per quadrat
    sd_count: float
    density: float               # [m^-2]
    density_se: float
    density_lower: float
    density_upper: float
    total: float                 # individuals in the site
    total_se: float
    total_lower: float
    total_upper: float
    df: float
    t_quantile: float
    confidence: float
    design: str
    variance_estimator: str
    note: str
    diagnostics: tuple[Diagnostic, ...] = ()


def _quadrat_data(
    quadrats: pd.DataFrame, quadrat_area_m2: float | None, what: str
) -> tuple[np.ndarray, np.ndarray]:
    require_columns(quadrats, [C.COUNT], what)
    counts = numeric_column(quadrats, C.COUNT, what)
    check_nonnegative(counts, C.COUNT, what)
    if quadrat_area_m2 is not None:
        area = check_positive_area(quadrat_area_m2, f"{what}: the quadrat")
        areas = np.full(counts.shape, area)
    elif C.QUADRAT_AREA in quadrats.columns:
        areas = numeric_column(quadrats, C.QUADRAT_AREA, what)
        if (areas <= 0).any():
            raise EstimationError(f"{what}: a quadrat has no area (column '{C.QUADRAT_AREA}' <= 0)")
    else:
        raise EstimationError(
            f"{what}: give quadrat_area_m2 or a '{C.QUADRAT_AREA}' column (quadrat area in m^2)"
        )
    return counts, areas


def _srs_moments(
    counts: np.ndarray, areas: np.ndarray, site_area: float, fpc: bool, what: str
) -> tuple[float, float, float, float]:
    """Mean density, its variance, the sampling fraction and the fpc factor for one site/stratum."""
    if (areas > site_area).any():
        raise EstimationError(
            f"{what}: a quadrat ({areas.max():g} m^2) is larger than its site ({site_area:g} m^2)"
        )
    fraction = float(areas.sum() / site_area)
    if fraction > 1.0 + 1e-9:
        raise EstimationError(
            f"{what}: the quadrats cover {areas.sum():g} m^2, more than the site's {site_area:g} m^2"
        )
    fraction = min(fraction, 1.0)
    densities = counts / areas
    factor = (1.0 - fraction) if fpc else 1.0
    mean = float(densities.mean())
    variance = factor * float(densities.var(ddof=1)) / densities.size
    return mean, variance, fraction, factor


def estimate_density(
    quadrats: pd.DataFrame,
    site_area_m2: float,
    *,
    quadrat_area_m2: float | None = None,
    confidence: float = 0.95,
    design: str = C.PLACEMENT_RANDOM,
    fpc: bool = True,
) -> DensityEstimate:
    """Density per m^2 and population total for a site from quadrat counts.

    Parameters
    ----------
    quadrats : DataFrame
        One row per quadrat with ``count`` [individuals] and, unless ``quadrat_area_m2`` is
        given, ``quadrat_area_m2`` [m^2].
    site_area_m2 : float
        Area of the site [m^2].
    quadrat_area_m2 : float, optional
        Area of every quadrat [m^2] (e.g. 0.1 for a 0.33 m x 0.33 m frame).
    confidence : float
        Confidence level of the two-sided t interval.
    design : str
        How the quadrats were placed (one of ``monitor.columns.PLACEMENTS``); sets the note on
        which variance estimator is used and whether it is conservative.
    fpc : bool
        Apply the finite population correction ``1 - f``.  With ``f`` below a few percent it
        changes nothing; where quadrats cover a real share of the site it narrows the interval.

    Returns
    -------
    DensityEstimate

    Notes
    -----
    ``N = A / a``; ``Y_hat = N * ybar = A * mean(y_i / a_i)``;
    ``se(Y_hat) = A * sqrt((1 - f) * s_d^2 / n)``; interval ``Y_hat +/- t_{n-1} * se``, its lower
    limit raised to the number counted if it falls below it.

    References
    ----------
    Cochran, W. G. (1977). Sampling Techniques, 3rd ed., Wiley. Ch. 2, eqs. 2.9-2.20.
    """
    what = "density estimate"
    site_area = check_positive_area(site_area_m2, "the site")
    counts, areas = _quadrat_data(quadrats, quadrat_area_m2, what)
    n = int(counts.size)
    require_n(n, 2, what)
    note = design_note(design)
    mean_d, var_d, fraction, factor = _srs_moments(counts, areas, site_area, fpc, what)
    df = float(n - 1)
    tq = t_quantile(confidence, df)
    se_d = float(np.sqrt(var_d))
    counted = float(counts.sum())
    diagnostics: list[Diagnostic] = list(few_quadrats(n, "density estimate"))
    if design == C.PLACEMENT_TARGETED:
        diagnostics.append(Diagnostic("targeted_placement", note))
    if se_d == 0.0:
        diagnostics.append(
            Diagnostic(
                "no_variation",
                "Every quadrat gave the same density, so the interval has zero width; "
                "it understates the uncertainty.",
            )
        )
    lower_d, upper_d = mean_d - tq * se_d, mean_d + tq * se_d
    floor_d = counted / site_area
    if lower_d < floor_d:
        lower_d = floor_d
        diagnostics.append(
            Diagnostic(
                "lower_limit_raised",
                "The lower limit was raised to the number of individuals actually counted.",
                severity="info",
            )
        )
    if not np.allclose(areas, areas[0]):
        note += " Quadrat areas differ: the total is site area x mean density (count / quadrat area)."
    return DensityEstimate(
        n=n,
        site_area_m2=site_area,
        quadrat_area_m2=float(areas.mean()),
        sampling_fraction=fraction,
        fpc=factor,
        mean_count=float(counts.mean()),
        sd_count=float(counts.std(ddof=1)),
        density=mean_d,
        density_se=se_d,
        density_lower=lower_d,
        density_upper=upper_d,
        total=mean_d * site_area,
        total_se=se_d * site_area,
        total_lower=lower_d * site_area,
        total_upper=upper_d * site_area,
        df=df,
        t_quantile=tq,
        confidence=float(confidence),
        design=design,
        variance_estimator=VARIANCE_SRS,
        note=note,
        diagnostics=tuple(diagnostics),
    )


# --- stratified -------------------------------------------------------------------


@dataclass(frozen=True)
class StratifiedTotal(Result):
    """Stratified estimate of a population total and mean from per-stratum summaries."""

    n: int                        # units sampled over all strata
    strata: int
    population_size: float        # sum of stratum sizes (units, or m^2 when weights are areas)
    total: float
    total_se: float
    total_lower: float
    total_upper: float
    mean: float                   # total / population_size
    mean_se: float
    mean_lower: float
    mean_upper: float
    df: float                     # Satterthwaite
    t_quantile: float
    confidence: float
    variance_estimator: str


def _satterthwaite(components: np.ndarray, n_h: np.ndarray) -> float:
    """Effective df of a sum of independent variance components with n_h - 1 df each."""
    total = components.sum()
    if total == 0.0:
        return float((n_h - 1).sum())
    return float(total**2 / np.sum(components**2 / (n_h - 1)))


def _stratified(
    sizes: np.ndarray,
    n_h: np.ndarray,
    means: np.ndarray,
    variances: np.ndarray,
    factors: np.ndarray,
    confidence: float,
) -> StratifiedTotal:
    components = sizes**2 * factors * variances / n_h
    total = float(np.sum(sizes * means))
    se = float(np.sqrt(components.sum()))
    df = _satterthwaite(components, n_h)
    tq = t_quantile(confidence, df)
    population = float(sizes.sum())
    return StratifiedTotal(
        n=int(n_h.sum()),
        strata=int(sizes.size),
        population_size=population,
        total=total,
        total_se=se,
        total_lower=total - tq * se,
        total_upper=total + tq * se,
        mean=total / population,
        mean_se=se / population,
        mean_lower=(total - tq * se) / population,
        mean_upper=(total + tq * se) / population,
        df=df,
        t_quantile=tq,
        confidence=float(confidence),
        variance_estimator="stratified: sum_h N_h^2 (1 - f_h) s_h^2 / n_h, Satterthwaite df",
    )


def combine_strata(
    population_sizes,
    sample_sizes,
    means,
    variances,
    *,
    confidence: float = 0.95,
    fpc: bool = True,
) -> StratifiedTotal:
    """Stratified random sampling estimate of a total from per-stratum summaries.

    Parameters
    ----------
    population_sizes : array-like
        ``N_h``, units in each stratum (for quadrats: stratum area / quadrat area).
    sample_sizes : array-like
        ``n_h``, units sampled in each stratum (each >= 2).
    means, variances : array-like
        Stratum sample means ``ybar_h`` and variances ``s_h^2`` (divisor ``n_h - 1``).
    confidence : float
        Level of the two-sided t interval, with Satterthwaite degrees of freedom.
    fpc : bool
        Apply ``1 - n_h / N_h`` in each stratum.

    Returns
    -------
    StratifiedTotal

    Notes
    -----
    ``Y_hat = sum N_h ybar_h``; ``v = sum N_h^2 (1 - f_h) s_h^2 / n_h``;
    ``df = (sum g_h s_h^2)^2 / sum (g_h s_h^2)^2 / (n_h - 1)`` with ``g_h = N_h (N_h - n_h) / n_h``.

    References
    ----------
    Cochran, W. G. (1977). Sampling Techniques, 3rd ed., Wiley. Ch. 5, eqs. 5.1-5.16.
    Satterthwaite, F. E. (1946). An approximate distribution of estimates of variance
    components. Biometrics Bulletin 2:110-114.
    """
    sizes = np.asarray(population_sizes, dtype=float)
    n_h = np.asarray(sample_sizes, dtype=float)
    m = np.asarray(means, dtype=float)
    v = np.asarray(variances, dtype=float)
    if not (sizes.shape == n_h.shape == m.shape == v.shape) or sizes.ndim != 1 or sizes.size == 0:
        raise EstimationError("strata summaries must be equal-length one-dimensional sequences")
    if not np.all(np.isfinite(np.concatenate([sizes, n_h, m, v]))):
        raise EstimationError("strata summaries contain missing or infinite values")
    if (sizes <= 0).any():
        raise EstimationError("every stratum needs a size (area) > 0")
    if (n_h < 2).any():
        raise EstimationError("need at least 2 quadrats in every stratum for a variance")
    if (n_h > sizes).any():
        raise EstimationError("a stratum has more sampled units than units in it")
    if (v < 0).any():
        raise EstimationError("a stratum variance is negative")
    factors = (1.0 - n_h / sizes) if fpc else np.ones_like(sizes)
    return _stratified(sizes, n_h, m, v, factors, confidence)


@dataclass(frozen=True)
class StratifiedDensityEstimate(Result):
    """Stratified density and total for a site, strata weighted by area."""

    n: int
    site_area_m2: float
    density: float
    density_se: float
    density_lower: float
    density_upper: float
    total: float
    total_se: float
    total_lower: float
    total_upper: float
    df: float                         # Satterthwaite
    t_quantile: float
    confidence: float
    design: str
    variance_estimator: str
    note: str
    strata: tuple[DensityEstimate, ...]
    stratum_codes: tuple[str, ...]
    diagnostics: tuple[Diagnostic, ...] = ()


def estimate_density_stratified(
    quadrats: pd.DataFrame,
    strata: pd.DataFrame,
    *,
    quadrat_area_m2: float | None = None,
    confidence: float = 0.95,
    fpc: bool = True,
    design: str = C.PLACEMENT_STRATIFIED,
) -> StratifiedDensityEstimate:
    """Stratified density per m^2 and population total, strata weighted by their area.

    Parameters
    ----------
    quadrats : DataFrame
        One row per quadrat: ``stratum``, ``count`` and ``quadrat_area_m2`` (or give
        ``quadrat_area_m2``).
    strata : DataFrame
        One row per stratum: ``stratum`` and ``area_m2`` [m^2].  Their areas sum to the site's.
    quadrat_area_m2 : float, optional
        Area of every quadrat [m^2].
    confidence : float
        Level of the two-sided t interval (Satterthwaite degrees of freedom).
    fpc : bool
        Apply ``1 - f_h`` in each stratum.
    design : str
        Placement within strata; systematic or balanced placement adds the conservative-variance
        note.

    Returns
    -------
    StratifiedDensityEstimate
        With ``strata``, the per-stratum :class:`DensityEstimate` in ``stratum_codes`` order.

    Notes
    -----
    ``D_st = sum_h (A_h / A) D_h``; ``Y_st = sum_h A_h D_h``;
    ``v(Y_st) = sum_h A_h^2 (1 - f_h) s_{d,h}^2 / n_h``; Satterthwaite df.

    References
    ----------
    Cochran, W. G. (1977). Sampling Techniques, 3rd ed., Wiley. Ch. 5, eqs. 5.1-5.16.
    """
    what = "stratified density estimate"
    require_columns(quadrats, [C.STRATUM, C.COUNT], what)
    require_columns(strata, [C.STRATUM, C.AREA], "strata table")
    codes = strata[C.STRATUM].astype(str).tolist()
    if len(set(codes)) != len(codes):
        raise EstimationError("strata table lists a stratum more than once")
    areas = numeric_column(strata, C.AREA, "strata table")
    for code, area in zip(codes, areas, strict=True):
        check_positive_area(area, f"stratum '{code}'")
    quadrat_strata = quadrats[C.STRATUM].astype(str)
    unknown = sorted(set(quadrat_strata) - set(codes))
    if unknown:
        raise EstimationError(f"quadrats name stratum/strata not in the strata table: {', '.join(unknown)}")
    per_stratum: list[DensityEstimate] = []
    n_h, means, variances, factors = [], [], [], []
    for code, area in zip(codes, areas, strict=True):
        rows = quadrats[quadrat_strata == code]
        label = f"stratum '{code}'"
        if len(rows) < 2:
            raise EstimationError(f"{label}: need at least 2 quadrats for an interval, got {len(rows)}")
        counts, q_areas = _quadrat_data(rows, quadrat_area_m2, label)
        mean_d, var_d, _, factor = _srs_moments(counts, q_areas, float(area), fpc, label)
        densities = counts / q_areas
        n_h.append(counts.size)
        means.append(mean_d)
        variances.append(float(densities.var(ddof=1)))
        factors.append(factor)
        per_stratum.append(
            estimate_density(
                rows,
                float(area),
                quadrat_area_m2=quadrat_area_m2,
                confidence=confidence,
                design=C.PLACEMENT_RANDOM if design == C.PLACEMENT_STRATIFIED else design,
                fpc=fpc,
            )
        )
    combined = _stratified(
        np.asarray(areas, dtype=float),
        np.asarray(n_h, dtype=float),
        np.asarray(means),
        np.asarray(variances),
        np.asarray(factors),
        confidence,
    )
    site_area = float(np.sum(areas))
    note = design_note(C.PLACEMENT_STRATIFIED)
    if design != C.PLACEMENT_STRATIFIED:
        note += " Within strata: " + design_note(design)
    diagnostics = list(few_quadrats(combined.n, "stratified estimate"))
    counted = float(numeric_column(quadrats, C.COUNT, what).sum())
    total_lower = combined.total_lower
    if total_lower < counted:
        total_lower = counted
        diagnostics.append(
            Diagnostic(
                "lower_limit_raised",
                "The lower limit was raised to the number of individuals actually counted.",
                severity="info",
            )
        )
    small = [c for c, k in zip(codes, n_h, strict=True) if k < 3]
    if small:
        diagnostics.append(
            Diagnostic(
                "small_strata",
                f"Stratum/strata {', '.join(small)} have 2 quadrats: their variance is poorly known.",
            )
        )
    return StratifiedDensityEstimate(
        n=combined.n,
        site_area_m2=site_area,
        density=combined.mean,
        density_se=combined.mean_se,
        density_lower=total_lower / site_area,
        density_upper=combined.mean_upper,
        total=combined.total,
        total_se=combined.total_se,
        total_lower=total_lower,
        total_upper=combined.total_upper,
        df=combined.df,
        t_quantile=combined.t_quantile,
        confidence=float(confidence),
        design=design,
        variance_estimator=combined.variance_estimator,
        note=note,
        strata=tuple(per_stratum),
        stratum_codes=tuple(codes),
        diagnostics=tuple(diagnostics),
    )
