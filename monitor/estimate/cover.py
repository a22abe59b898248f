"""Percent cover, gridded frequency and point-frame (pin-hit) cover.

Mean percent cover
------------------
``cbar = mean(c_i)``, ``se = sqrt((1 - f) s^2 / n)``, interval ``cbar +/- t_{n-1} se`` clipped to
[0, 100] (Cochran 1977, ch. 2).

Proportions within one quadrat: Wilson score interval
-----------------------------------------------------
For ``k`` successes (cells occupied, pins touching) out of ``n``, with ``z = z_{1-alpha/2}``::

    centre = (k + z^2/2) / (n + z^2)
    half   = z sqrt(n) / (n + z^2) * sqrt(p (1 - p) + z^2 / (4 n)),   p = k / n

(Wilson 1927; Newcombe 1998, method 3).

Pooling over quadrats: a ratio estimator for cluster samples
------------------------------------------------------------
Cells of one grid, or pins of one frame, are clustered: they share the quadrat's plants, so they
are not independent trials.  The site proportion is the ratio estimator
``p = sum k_i / sum n_i`` whose variance comes from the spread *between* quadrats
(Cochran 1977, sec. 3.12 and 6.4)::

    v(p) = (1 - f) / (m nbar^2) * sum_i (k_i - p n_i)^2 / (m - 1),    nbar = sum n_i / m

The design effect is ``deff = v(p) / [p (1 - p) / sum n_i]`` (Kish 1965), taken as at least 1 so the
interval is never narrower than the binomial one.  The pooled interval is the Wilson interval with
the number of trials replaced by the effective sample size
``n_eff = (sum n_i / deff) * (z / t_{m-1})^2``, the degrees-of-freedom-adjusted form of Korn &
Graubard (1998).

References
----------
Wilson, E. B. (1927). Probable inference, the law of succession, and statistical inference.
JASA 22:209-212.
Newcombe, R. G. (1998). Two-sided confidence intervals for the single proportion: comparison of
seven methods. Statistics in Medicine 17:857-872.
Cochran, W. G. (1977). Sampling Techniques, 3rd ed. Wiley, New York.
Kish, L. (1965). Survey Sampling. Wiley, New York.
Korn, E. L. & Graubard, B. I. (1998). Confidence intervals for proportions with small expected
number of positive counts estimated from survey data. Survey Methodology 24:193-201.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.errors import Diagnostic, EstimationError

from ._common import (
    Result,
    check_positive_area,
    few_quadrats,
    numeric_column,
    require_columns,
    require_n,
    t_quantile,
    z_quantile,
)


def wilson_interval(successes, trials, confidence: float = 0.95):
    """Wilson score interval for a binomial proportion.

    Parameters
    ----------
    successes : int or array-like
        ``k`` [count], 0 <= k <= n.
    trials : float or array-like
        ``n`` > 0; non-integer ``n`` (an effective sample size) is allowed.
    confidence : float
        Two-sided confidence level.

    Returns
    -------
    (lower, upper) : floats, or arrays when the input is an array

    Notes
    -----
    ``(k + z^2/2)/(n + z^2) -/+ z sqrt(n)/(n + z^2) sqrt(p(1-p) + z^2/(4n))``, ``p = k/n``.

    References
    ----------
    Wilson, E. B. (1927). JASA 22:209-212.  Newcombe, R. G. (1998). Stat. Med. 17:857-872.
    """
    k = np.asarray(successes, dtype=float)
    n = np.asarray(trials, dtype=float)
    if not (np.all(np.isfinite(k)) and np.all(np.isfinite(n))):
        raise EstimationError("successes and trials must be finite numbers")
    if np.any(n <= 0):
        raise EstimationError("trials (n) must be > 0")
    if np.any(k < 0) or np.any(k > n):
        raise EstimationError("successes k must satisfy 0 <= k <= n (k > n is impossible)")
    z = z_quantile(confidence)
    p = k / n
    denominator = n + z * z
    centre = (k + z * z / 2.0) / denominator
    half = z * np.sqrt(n) / denominator * np.sqrt(p * (1.0 - p) + z * z / (4.0 * n))
    lower = np.clip(centre - half, 0.0, 1.0)
    upper = np.clip(centre + half, 0.0, 1.0)
    # exact limits at the boundaries (rounding must not leave 1e-17 above 0)
    lower = np.where(k == 0, 0.0, lower)
    upper = np.where(k == n, 1.0, upper)
    if lower.ndim == 0:
        return float(lower), float(upper)
    return lower, upper


# --- mean percent cover --------------------------------------------------------------


@dataclass(frozen=True)
class CoverEstimate(Result):
    """Mean percent cover for a site with a t interval."""

    n: int
    mean_cover_pct: float
    sd_cover_pct: float
    se: float
    lower: float
    upper: float
    df: float
    t_quantile: float
    confidence: float
    fpc: float
    note: str
    diagnostics: tuple[Diagnostic, ...] = ()


def estimate_cover(
    quadrats: pd.DataFrame,
    *,
    confidence: float = 0.95,
    site_area_m2: float | None = None,
    quadrat_area_m2: float | None = None,
) -> CoverEstimate:
    """Mean percent cover with a t-based interval.

    Parameters
    ----------
    quadrats : DataFrame
        One row per quadrat with ``cover_pct`` [%, 0-100].
    confidence : float
        Two-sided confidence level.
    site_area_m2, quadrat_area_m2 : float, optional
        With both (or a ``quadrat_area_m2`` column), the finite population correction
        ``1 - sum(a_i)/A`` is applied.

    Returns
    -------
    CoverEstimate

    Notes
    -----
    ``cbar +/- t_{n-1} sqrt((1 - f) s^2 / n)``, clipped to [0, 100].

    References
    ----------
    Cochran, W. G. (1977). Sampling Techniques, 3rd ed., Wiley. Ch. 2.
    """
    what = "cover estimate"
    require_columns(quadrats, [C.COVER], what)
    cover = numeric_column(quadrats, C.COVER, what)
    if ((cover < 0) | (cover > 100)).any():
        raise EstimationError(f"{what}: '{C.COVER}' must lie between 0 and 100 (percent)")
    n = int(cover.size)
    require_n(n, 2, what)
    factor = 1.0
    note = "Mean of per-quadrat percent cover; t interval"
    if site_area_m2 is not None:
        site_area = check_positive_area(site_area_m2, "the site")
        if quadrat_area_m2 is not None:
            sampled = n * check_positive_area(quadrat_area_m2, "the quadrat")
        elif C.QUADRAT_AREA in quadrats.columns:
            sampled = float(numeric_column(quadrats, C.QUADRAT_AREA, what).sum())
        else:
            raise EstimationError(f"{what}: give quadrat_area_m2 with site_area_m2 for the fpc")
        if sampled > site_area:
            raise EstimationError(f"{what}: the quadrats cover more than the site's area")
        factor = 1.0 - sampled / site_area
        note += f" with finite population correction {factor:.3f}"
    note += "."
    mean = float(cover.mean())
    sd = float(cover.std(ddof=1))
    se = float(np.sqrt(factor * sd * sd / n))
    tq = t_quantile(confidence, n - 1)
    lower, upper = mean - tq * se, mean + tq * se
    diagnostics = list(few_quadrats(n, "cover estimate"))
    if lower < 0 or upper > 100:
        diagnostics.append(
            Diagnostic(
                "interval_clipped",
                "The t interval reached past 0 or 100 % and was clipped; cover is skewed near its bounds.",
                severity="info",
            )
        )
    return CoverEstimate(
        n=n,
        mean_cover_pct=mean,
        sd_cover_pct=sd,
        se=se,
        lower=float(max(lower, 0.0)),
        upper=float(min(upper, 100.0)),
        df=float(n - 1),
        t_quantile=tq,
        confidence=float(confidence),
        fpc=factor,
        note=note,
        diagnostics=tuple(diagnostics),
    )


# --- proportions: gridded frequency and pin hits -----------------------------------------


@dataclass(frozen=True)
class QuadratProportion(Result):
    """One quadrat's share (cells occupied / cells, or hits / pins) with its Wilson interval."""

    station: str
    successes: int
    trials: int
    share: float
    lower: float
    upper: float


@dataclass(frozen=True)
class ProportionEstimate(Result):
    """Site-level share pooled over quadrats (ratio estimator), plus per-quadrat shares."""

    measure: str                 # "frequency" or "pin_hits"
    n: int                       # quadrats (clusters)
    successes: int               # sum of k
    trials: int                  # sum of n
    share: float                 # pooled ratio estimate sum k / sum n
    se: float                    # between-quadrat (ratio-estimator) standard error
    se_binomial: float           # what the standard error would be if trials were independent
    design_effect: float         # v(p) / binomial variance, at least 1
    effective_n: float           # trials / deff, df-adjusted
    lower: float                 # Wilson interval on effective_n
    upper: float
    naive_lower: float           # Wilson interval treating all trials as independent (for comparison)
    naive_upper: float
    mean_of_shares: float        # unweighted mean of per-quadrat shares
    confidence: float
    per_quadrat: tuple[QuadratProportion, ...]
    note: str
    diagnostics: tuple[Diagnostic, ...] = ()

    def to_frame(self) -> pd.DataFrame:
        """Per-quadrat shares as a DataFrame."""
        return pd.DataFrame([q.to_dict() for q in self.per_quadrat])


def pooled_proportion(
    successes,
    trials,
    *,
    stations=None,
    confidence: float = 0.95,
    measure: str = C.MEASURE_PIN_HITS,
    sampling_fraction: float = 0.0,
) -> ProportionEstimate:
    """Pool k-of-n proportions over quadrats with the clustering taken into account.

    Parameters
    ----------
    successes, trials : array-like
        Per quadrat ``k_i`` (occupied cells or pin hits) and ``n_i`` (cells or pins), ``0 <= k_i <= n_i``.
    stations : sequence of str, optional
        Quadrat codes for the per-quadrat table.
    confidence : float
        Two-sided confidence level.
    measure : str
        Label stored on the result.
    sampling_fraction : float
        Share of the site's quadrat positions that were sampled (fpc ``1 - f``); 0 ignores it.

    Returns
    -------
    ProportionEstimate

    Notes
    -----
    ``p = sum k_i / sum n_i``; ``v(p) = (1 - f) sum (k_i - p n_i)^2 / ((m - 1) m nbar^2)``;
    ``deff = max(1, v(p) / (p (1 - p) / sum n_i))``; interval: Wilson with
    ``n_eff = (sum n_i / deff) (z / t_{m-1})^2``.

    References
    ----------
    Cochran (1977) Sampling Techniques, 3rd ed., sec. 3.12 and 6.4; Kish (1965) Survey Sampling;
    Korn & Graubard (1998) Survey Methodology 24:193-201; Wilson (1927) JASA 22:209-212.
    """
    k = np.asarray(successes, dtype=float)
    n_i = np.asarray(trials, dtype=float)
    what = measures.get(measure).label  # "frequency", "pin hits"
    if k.shape != n_i.shape or k.ndim != 1:
        raise EstimationError(f"{what}: successes and trials must be equal-length sequences")
    if not (np.all(np.isfinite(k)) and np.all(np.isfinite(n_i))):
        raise EstimationError(f"{what}: missing values in successes or trials")
    if np.any(n_i <= 0):
        raise EstimationError(f"{what}: every quadrat needs n > 0 (cells or pins)")
    if np.any(k < 0) or np.any(k > n_i):
        bad = int(np.flatnonzero((k < 0) | (k > n_i))[0])
        raise EstimationError(
            f"{what}: quadrat {bad + 1} has k={k[bad]:g} of n={n_i[bad]:g}; k must be between 0 and n"
        )
    if np.any(k != np.round(k)) or np.any(n_i != np.round(n_i)):
        raise EstimationError(f"{what}: k and n must be whole numbers")
    m = int(k.size)
    require_n(m, 2, what)
    if not 0.0 <= sampling_fraction < 1.0:
        raise EstimationError(f"{what}: sampling fraction must be in [0, 1)")
    if stations is None:
        stations = [str(i + 1) for i in range(m)]
    stations = [str(s) for s in stations]
    if len(stations) != m:
        raise EstimationError(f"{what}: {len(stations)} station codes for {m} quadrats")

    total_k, total_n = float(k.sum()), float(n_i.sum())
    p = total_k / total_n
    nbar = total_n / m
    residual = k - p * n_i
    v_ratio = (1.0 - sampling_fraction) * float(np.sum(residual**2)) / ((m - 1) * m * nbar**2)
    v_binomial = p * (1.0 - p) / total_n
    diagnostics = list(few_quadrats(m, f"{what} estimate"))
    if v_binomial > 0:
        deff = max(1.0, v_ratio / v_binomial)
    else:
        deff = 1.0
        diagnostics.append(
            Diagnostic(
                "all_or_none",
                "Every trial was a success or every one a failure: the interval uses the binomial "
                "form with no design effect.",
                severity="info",
            )
        )
    z = z_quantile(confidence)
    tq = t_quantile(confidence, m - 1)
    n_eff = total_n / deff * (z / tq) ** 2
    lower, upper = wilson_interval(p * n_eff, n_eff, confidence)
    naive_lower, naive_upper = wilson_interval(total_k, total_n, confidence)
    lo_i, hi_i = wilson_interval(k, n_i, confidence)
    shares = k / n_i
    per = tuple(
        QuadratProportion(
            station=stations[i],
            successes=int(k[i]),
            trials=int(n_i[i]),
            share=float(shares[i]),
            lower=float(lo_i[i]),
            upper=float(hi_i[i]),
        )
        for i in range(m)
    )
    if deff > 2.0:
        diagnostics.append(
            Diagnostic(
                "clustered",
                f"Quadrats differ much more than chance allows (design effect {deff:.1f}); treating "
                "cells or pins as independent would give a far too narrow interval.",
                severity="info",
            )
        )
    unit = measures.get(measure).k_words  # "occupied cells", "pin hits"
    note = (
        f"Pooled share = all {unit} / all trials (ratio estimator). Interval: Wilson score interval on "
        f"the effective sample size (trials / design effect {deff:.2f}, adjusted to {m - 1} df), "
        "so that the clustering of trials within quadrats is taken into account."
    )
    return ProportionEstimate(
        measure=measure,
        n=m,
        successes=int(total_k),
        trials=int(total_n),
        share=p,
        se=float(np.sqrt(v_ratio)),
        se_binomial=float(np.sqrt(v_binomial)),
        design_effect=float(deff),
        effective_n=float(n_eff),
        lower=float(lower),
        upper=float(upper),
        naive_lower=float(naive_lower),
        naive_upper=float(naive_upper),
        mean_of_shares=float(shares.mean()),
        confidence=float(confidence),
        per_quadrat=per,
        note=note,
        diagnostics=tuple(diagnostics),
    )


def _proportion_frame(
    quadrats: pd.DataFrame, k_col: str, n_col: str, measure: str, confidence: float
) -> ProportionEstimate:
    what = f"{measures.get(measure).label} estimate"
    require_columns(quadrats, [k_col, n_col], what)
    k = numeric_column(quadrats, k_col, what)
    n = numeric_column(quadrats, n_col, what)
    bad = np.flatnonzero(k > n)
    if bad.size:
        raise EstimationError(
            f"{what}: row {int(bad[0]) + 1} has {k_col}={k[bad[0]]:g} > {n_col}={n[bad[0]]:g} (k > n)"
        )
    stations = quadrats[C.STATION].astype(str).tolist() if C.STATION in quadrats.columns else None
    return pooled_proportion(k, n, stations=stations, confidence=confidence, measure=measure)


def estimate_frequency(quadrats: pd.DataFrame, *, confidence: float = 0.95) -> ProportionEstimate:
    """Gridded frequency: share of cells occupied, per quadrat and pooled over quadrats.

    Parameters
    ----------
    quadrats : DataFrame
        ``occupied`` (k) and ``cells`` (n) per quadrat; ``station`` optional.
    confidence : float
        Two-sided confidence level.

    Returns
    -------
    ProportionEstimate
        Per-quadrat Wilson intervals and the pooled ratio estimate with a clustering-aware
        Wilson interval (see :func:`pooled_proportion`).

    References
    ----------
    Wilson (1927) JASA 22:209-212; Cochran (1977) sec. 3.12; Korn & Graubard (1998).
    """
    return _proportion_frame(quadrats, C.OCCUPIED, C.CELLS, C.MEASURE_FREQUENCY, confidence)


def estimate_pin_cover(quadrats: pd.DataFrame, *, confidence: float = 0.95) -> ProportionEstimate:
    """Point-frame cover: hits / pins per frame and pooled across frames.

    Parameters
    ----------
    quadrats : DataFrame
        ``hits`` (k) and ``pins`` (n) per frame; ``station`` optional.
    confidence : float
        Two-sided confidence level.

    Returns
    -------
    ProportionEstimate
        Per-frame Wilson intervals and the pooled ratio estimate; pins within a frame are
        clustered, so the pooled interval uses the design effect (see :func:`pooled_proportion`).

    References
    ----------
    Wilson (1927) JASA 22:209-212; Cochran (1977) sec. 3.12; Korn & Graubard (1998).
    """
    return _proportion_frame(quadrats, C.HITS, C.PINS, C.MEASURE_PIN_HITS, confidence)
