"""Sample adequacy: how many quadrats give a mean within +/- p % at a stated confidence.

The half-width of the t interval for a mean from ``n`` quadrats is ``t_{n-1} s / sqrt(n)``.
Asking it to be at most ``p * xbar`` gives::

    n >= g(n) = (t_{n-1, 1-alpha/2} * s / (p * xbar))^2

Because ``t`` depends on ``n`` the formula is solved by iteration: start from the normal value
``n_0 = (z s / (p xbar))^2`` and replace ``t`` by its value at the current ``n`` until ``n`` stops
changing (Cochran 1977, sec. 4.4-4.6; Krebs 1999, ch. 7; Elzinga et al. 1998, app. 7).  ``g`` falls
as ``n`` grows, so the answer is the smallest whole ``n`` with ``n >= g(n)``; we find that ``n``
directly, which is where the iteration settles.  With a finite number ``N`` of quadrat positions
the requirement becomes ``n >= g(n) / (1 + g(n) / N)`` (Cochran 1977, eq. 4.2).

The *adequacy test* used in reclamation and range monitoring keeps ``t`` at the df of the pilot
sample, ``n_min = t_{n-1}^2 s^2 / (p xbar)^2`` (often one-sided at 90 %), and calls the sample
adequate when ``n >= n_min``; it is reported as ``n_required_at_pilot_df``.

References
----------
Cochran, W. G. (1977). Sampling Techniques, 3rd ed. Wiley, New York. Ch. 4.
Krebs, C. J. (1999). Ecological Methodology, 2nd ed. Addison-Wesley Longman, Menlo Park. Ch. 7.
Elzinga, C. L., Salzer, D. W. & Willoughby, J. W. (1998). Measuring and Monitoring Plant
Populations. BLM Technical Reference 1730-1, Denver. Appendix 7.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from monitor.errors import Diagnostic, EstimationError

from ._common import Result, check_confidence, few_quadrats, require_n, t_quantile

_SIDED = ("two", "one")


def _t(confidence: float, df: float, sided: str) -> float:
    if sided == "two":
        return t_quantile(confidence, df)
    return float(stats.t.ppf(confidence, df))


def _z(confidence: float, sided: str) -> float:
    return float(stats.norm.ppf(0.5 + confidence / 2.0 if sided == "two" else confidence))


@dataclass(frozen=True)
class SampleAdequacy(Result):
    """Quadrats needed for a mean within +/- precision, from a pilot (or this season's) sample."""

    n: int                           # quadrats taken
    mean: float
    sd: float
    cv: float                        # sd / mean
    precision: float                 # target relative half-width, e.g. 0.2 for +/-20 %
    confidence: float
    sided: str
    population_size: float | None    # N quadrat positions, if the fpc was used
    n_required: int                  # smallest n with n >= g(n) (iterated t)
    n_required_normal: float         # (z s / (p xbar))^2, the iteration's start
    n_required_at_pilot_df: float | None  # t_{n-1}^2 s^2 / (p xbar)^2 with the pilot's df
    additional_required: int         # max(0, n_required - n)
    achieved_precision: float | None  # t_{n-1} s / (sqrt(n) xbar), relative half-width now
    adequate: bool
    note: str
    diagnostics: tuple[Diagnostic, ...] = ()


def quadrats_needed_from_moments(
    mean: float,
    sd: float,
    *,
    n_taken: int | None = None,
    precision: float = 0.2,
    confidence: float = 0.95,
    population_size: float | None = None,
    sided: str = "two",
    max_n: int = 1_000_000,
) -> SampleAdequacy:
    """Quadrats needed to estimate a mean within +/- ``precision`` (relative) at ``confidence``.

    Parameters
    ----------
    mean, sd : float
        Pilot mean and standard deviation per quadrat (any unit; only ``sd / mean`` matters).
    n_taken : int, optional
        Quadrats in the pilot; needed for the pilot-df form and ``additional_required``.
    precision : float
        Target half-width as a fraction of the mean (0.2 for +/-20 %).
    confidence : float
        Confidence level.
    population_size : float, optional
        ``N`` = site area / quadrat area; applies the finite population correction.
    sided : {"two", "one"}
        Two-sided interval (default) or the one-sided form used in adequacy tests.
    max_n : int
        Give up above this many quadrats.

    Returns
    -------
    SampleAdequacy

    Notes
    -----
    ``n = (t_{n-1} s / (p xbar))^2`` solved by iteration (the smallest whole ``n >= 2`` meeting
    it); with fpc ``n >= g / (1 + g / N)``.

    References
    ----------
    Cochran (1977) Sampling Techniques, 3rd ed., sec. 4.4-4.6; Krebs (1999) Ecological Methodology,
    2nd ed., ch. 7; Elzinga, Salzer & Willoughby (1998) BLM TR 1730-1, app. 7.
    """
    check_confidence(confidence)
    if sided not in _SIDED:
        raise EstimationError(f"sided must be 'two' or 'one', got {sided!r}")
    if not (np.isfinite(mean) and np.isfinite(sd)) or sd < 0:
        raise EstimationError("sample adequacy needs a finite mean and a standard deviation >= 0")
    if mean <= 0:
        raise EstimationError(
            "sample adequacy: the mean is 0 (nothing found), so a precision relative to the mean is undefined"
        )
    if not 0 < precision < 10:
        raise EstimationError(f"precision must be a positive fraction of the mean (e.g. 0.2), got {precision!r}")
    if population_size is not None and not population_size >= 2:
        raise EstimationError(f"population size N must be at least 2, got {population_size!r}")
    if n_taken is not None:
        require_n(int(n_taken), 2, "sample adequacy")
    ratio = sd / (precision * mean)

    def requirement(g: float) -> float:
        return g if population_size is None else g / (1.0 + g / population_size)

    n_normal = requirement((_z(confidence, sided) * ratio) ** 2)
    n = max(2, math.ceil(n_normal))
    while n < requirement((_t(confidence, n - 1, sided) * ratio) ** 2):
        n += 1
        if n > max_n:
            raise EstimationError(
                f"sample adequacy: more than {max_n} quadrats would be needed (cv {sd / mean:.2f})"
            )
    diagnostics: list[Diagnostic] = []
    if n_taken is not None:
        n_taken = int(n_taken)
        fpc = 1.0 if population_size is None else max(0.0, 1.0 - n_taken / population_size)
        tq = _t(confidence, n_taken - 1, sided)
        achieved = tq * sd * math.sqrt(fpc) / (math.sqrt(n_taken) * mean)
        at_pilot = requirement((tq * ratio) ** 2)
        additional = max(0, n - n_taken)
        diagnostics.extend(few_quadrats(n_taken, "pilot for the sample size"))
    else:
        achieved, at_pilot, additional = None, None, n
    adequate = bool(n_taken is not None and n_taken >= n)
    level = f"{confidence:.0%} ({sided}-sided)"
    note = (
        f"Quadrats needed for the mean within +/-{precision:.0%} at {level}: "
        f"n = (t_(n-1) * s / ({precision:g} * mean))^2 iterated to convergence"
        + ("" if population_size is None else f", with finite population correction (N = {population_size:g})")
        + ". The pilot's standard deviation is itself uncertain: treat n as a guide."
    )
    return SampleAdequacy(
        n=0 if n_taken is None else n_taken,
        mean=float(mean),
        sd=float(sd),
        cv=float(sd / mean),
        precision=float(precision),
        confidence=float(confidence),
        sided=sided,
        population_size=None if population_size is None else float(population_size),
        n_required=int(n),
        n_required_normal=float(n_normal),
        n_required_at_pilot_df=None if at_pilot is None else float(at_pilot),
        additional_required=int(additional),
        achieved_precision=None if achieved is None else float(achieved),
        adequate=adequate,
        note=note,
        diagnostics=tuple(diagnostics),
    )


def quadrats_needed(
    values,
    *,
    precision: float = 0.2,
    confidence: float = 0.95,
    population_size: float | None = None,
    sided: str = "two",
) -> SampleAdequacy:
    """Quadrats needed for a mean within +/- ``precision``, from the values already taken.

    Parameters
    ----------
    values : array-like
        Per-quadrat values (counts, cover, ...), at least 2.
    precision, confidence, population_size, sided
        As in :func:`quadrats_needed_from_moments`.

    Returns
    -------
    SampleAdequacy
        ``n_required``, ``additional_required`` (how many more quadrats) and the precision the
        present quadrats achieve.

    References
    ----------
    Cochran (1977) Sampling Techniques, 3rd ed., sec. 4.4-4.6; Krebs (1999) Ecological Methodology,
    2nd ed., ch. 7.
    """
    x = np.asarray(values, dtype=float)
    if x.ndim != 1 or not np.all(np.isfinite(x)):
        raise EstimationError("sample adequacy needs a one-dimensional sequence of finite values")
    require_n(int(x.size), 2, "sample adequacy")
    return quadrats_needed_from_moments(
        float(x.mean()),
        float(x.std(ddof=1)),
        n_taken=int(x.size),
        precision=precision,
        confidence=confidence,
        population_size=population_size,
        sided=sided,
    )


# --- running mean -----------------------------------------------------------------------


@dataclass(frozen=True)
class RunningMeanStep(Result):
    """The mean and its interval after the first ``k`` quadrats."""

    k: int
    mean: float
    lower: float
    upper: float
    relative_half_width: float | None   # half-width / mean; None while the mean is 0


@dataclass(frozen=True)
class RunningMean(Result):
    """Running mean with its t interval as quadrats are added, in the order taken."""

    n: int
    confidence: float
    precision: float                      # target shown on the figure
    steps: tuple[RunningMeanStep, ...]    # k = 2 .. n
    first_adequate_k: int | None          # first k whose relative half-width <= precision
    note: str
    diagnostics: tuple[Diagnostic, ...] = ()

    def to_frame(self):
        import pandas as pd

        return pd.DataFrame([s.to_dict() for s in self.steps])


def running_mean(values, *, confidence: float = 0.95, precision: float = 0.2) -> RunningMean:
    """Running mean and t interval after each added quadrat (a sample-adequacy curve).

    Parameters
    ----------
    values : array-like
        Per-quadrat values in the order they were taken (at least 2).
    confidence : float
        Two-sided confidence level.
    precision : float
        Target relative half-width for ``first_adequate_k`` and the figure's band.

    Returns
    -------
    RunningMean
        Steps from ``k = 2`` (one quadrat gives no interval).

    Notes
    -----
    ``xbar_k +/- t_{k-1} s_k / sqrt(k)`` for ``k = 2 .. n``.  The curve flattening is a visual
    check only: with few quadrats it can settle by chance.

    References
    ----------
    Krebs, C. J. (1999). Ecological Methodology, 2nd ed., ch. 7.
    """
    check_confidence(confidence)
    x = np.asarray(values, dtype=float)
    if x.ndim != 1 or not np.all(np.isfinite(x)):
        raise EstimationError("running mean needs a one-dimensional sequence of finite values")
    n = int(x.size)
    require_n(n, 2, "running mean")
    k = np.arange(1, n + 1)
    cumulative = np.cumsum(x)
    means = cumulative / k
    # running variance by Welford's update, stable for long series
    variances = np.zeros(n)
    mean_run, m2 = 0.0, 0.0
    for i, value in enumerate(x):
        delta = value - mean_run
        mean_run += delta / (i + 1)
        m2 += delta * (value - mean_run)
        variances[i] = m2 / i if i > 0 else 0.0
    steps = []
    first_ok = None
    for i in range(1, n):
        half = t_quantile(confidence, i) * math.sqrt(variances[i] / (i + 1))
        rel = half / means[i] if means[i] > 0 else None
        if first_ok is None and rel is not None and rel <= precision:
            first_ok = i + 1
        steps.append(
            RunningMeanStep(
                k=i + 1,
                mean=float(means[i]),
                lower=float(means[i] - half),
                upper=float(means[i] + half),
                relative_half_width=None if rel is None else float(rel),
            )
        )
    return RunningMean(
        n=n,
        confidence=float(confidence),
        precision=float(precision),
        steps=tuple(steps),
        first_adequate_k=first_ok,
        note=(
            f"Running mean with its {confidence:.0%} t interval as quadrats are added in the order "
            "taken; the band marks +/-"
            f"{precision:.0%} of the final mean."
        ),
        diagnostics=few_quadrats(n, "running mean"),
    )
