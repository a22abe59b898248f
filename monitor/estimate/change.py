"""Change between two seasons at permanent quadrats: paired beside unpaired.

For stations measured in both seasons, with differences ``d_i = y_{2i} - y_{1i}``::

    paired t:    dbar / (s_d / sqrt(m)),                  df = m - 1
    Wilcoxon:    signed-rank test of the d_i (zeros dropped, Wilcoxon 1945)
    Welch:       (ybar_2 - ybar_1) / sqrt(s_1^2/n_1 + s_2^2/n_2), Welch-Satterthwaite df

Why permanent quadrats gain power: ``var(d) = s_1^2 + s_2^2 - 2 r s_1 s_2``, so with correlation
``r`` between a station's two seasons the paired variance is smaller than the unpaired
``s_1^2 + s_2^2`` by the factor ``1 - 2 r s_1 s_2 / (s_1^2 + s_2^2)`` (about ``1 - r`` when the
spreads are alike).  ``efficiency`` reports the ratio unpaired / paired variance on the paired
stations.

References
----------
Student (1908). The probable error of a mean. Biometrika 6:1-25.
Wilcoxon, F. (1945). Individual comparisons by ranking methods. Biometrics Bulletin 1:80-83.
Welch, B. L. (1947). The generalization of 'Student's' problem when several different population
variances are involved. Biometrika 34:28-35.
Zar, J. H. (2010). Biostatistical Analysis, 5th ed. Prentice Hall. Ch. 9.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

from monitor import columns as C
from monitor.errors import Diagnostic, EstimationError

from ._common import Result, check_confidence, few_quadrats, numeric_column, require_columns, t_quantile


@dataclass(frozen=True)
class SeasonComparison(Result):
    """Change in the mean between two seasons, paired and unpaired."""

    value: str
    first_season: object
    second_season: object
    n: int                          # stations measured in both seasons (pairs)
    n_first: int                    # stations measured in the first season
    n_second: int
    mean_first: float               # over all stations of that season
    mean_second: float
    # paired analysis (stations in both seasons)
    mean_difference: float          # second - first
    paired_se: float
    paired_lower: float
    paired_upper: float
    paired_t: float
    paired_df: float
    paired_p: float
    wilcoxon_statistic: float       # scipy's two-sided statistic: the smaller signed-rank sum
    wilcoxon_p: float
    wilcoxon_nonzero: int           # differences used (zeros dropped)
    # unpaired analysis (all stations of each season)
    welch_difference: float
    welch_se: float
    welch_lower: float
    welch_upper: float
    welch_t: float
    welch_df: float
    welch_p: float
    # why pairing helps
    correlation: float              # Pearson r between seasons over the paired stations
    unpaired_se_on_pairs: float     # se of the difference if the pairs were treated as unpaired
    efficiency: float               # (s1^2 + s2^2) / var(d) on the paired stations
    confidence: float
    note: str
    pairs: tuple[tuple[str, float, float], ...] = ()   # (station, first, second) for the figure
    diagnostics: tuple[Diagnostic, ...] = ()


def compare_seasons(
    data: pd.DataFrame,
    *,
    value: str = C.COUNT,
    season: str = C.YEAR,
    first=None,
    second=None,
    confidence: float = 0.95,
) -> SeasonComparison:
    """Compare two seasons at permanent quadrats: paired t and Wilcoxon beside Welch.

    Parameters
    ----------
    data : DataFrame
        Long table: ``station``, the season column (``year``) and the value column, one row per
        station and season.
    value : str
        Value column (``count``, ``cover_pct``, ...).
    season : str
        Season column.
    first, second : optional
        The two seasons to compare; by default the two present (error if more than two).
    confidence : float
        Two-sided confidence level of the intervals for the change.

    Returns
    -------
    SeasonComparison

    Notes
    -----
    Paired: ``dbar +/- t_{m-1} s_d / sqrt(m)``.  Unpaired: Welch with
    ``df = (v_1 + v_2)^2 / (v_1^2/(n_1-1) + v_2^2/(n_2-1))``, ``v_j = s_j^2 / n_j``.
    ``var(d) = s_1^2 + s_2^2 - 2 r s_1 s_2``.

    References
    ----------
    Student (1908) Biometrika 6:1-25; Wilcoxon (1945) Biometrics Bulletin 1:80-83;
    Welch (1947) Biometrika 34:28-35; Zar (2010) Biostatistical Analysis, 5th ed., ch. 9.
    """
    what = "season comparison"
    check_confidence(confidence)
    require_columns(data, [C.STATION, season, value], what)
    values = numeric_column(data, value, what)
    frame = pd.DataFrame({"station": data[C.STATION].astype(str).to_numpy(), "season": data[season].to_numpy(),
                          "value": values})
    seasons = sorted(frame["season"].unique().tolist())
    if first is None and second is None:
        if len(seasons) != 2:
            raise EstimationError(
                f"{what}: found {len(seasons)} seasons ({seasons}); name the two to compare (first=, second=)"
            )
        first, second = seasons
    elif first is None or second is None:
        raise EstimationError(f"{what}: name both seasons (first= and second=) or neither")
    for s in (first, second):
        if s not in seasons:
            raise EstimationError(f"{what}: season {s!r} has no data")
    if first == second:
        raise EstimationError(f"{what}: the two seasons are the same ({first!r})")
    one = frame[frame["season"] == first]
    two = frame[frame["season"] == second]
    for label, part in (("first", one), ("second", two)):
        if part["station"].duplicated().any():
            dup = part.loc[part["station"].duplicated(), "station"].iloc[0]
            raise EstimationError(f"{what}: station '{dup}' appears twice in the {label} season")
    y1_all, y2_all = one["value"].to_numpy(), two["value"].to_numpy()
    if y1_all.size < 2 or y2_all.size < 2:
        raise EstimationError(f"{what}: need at least 2 quadrats in each season for an interval")
    paired = one.merge(two, on="station", suffixes=("_1", "_2"))
    m = len(paired)
    if m < 2:
        raise EstimationError(f"{what}: need at least 2 stations measured in both seasons, got {m}")
    y1, y2 = paired["value_1"].to_numpy(), paired["value_2"].to_numpy()
    d = y2 - y1
    if np.all(d == d[0]):
        raise EstimationError(
            f"{what}: every station changed by the same amount ({d[0]:g}); the paired tests are undefined"
        )
    diagnostics: list[Diagnostic] = list(few_quadrats(m, "paired comparison"))
    dropped = (len(one) - m) + (len(two) - m)
    if dropped:
        diagnostics.append(
            Diagnostic(
                "unpaired_stations",
                f"{dropped} station-season value(s) had no partner in the other season and are used only "
                "in the unpaired comparison.",
                severity="info",
            )
        )

    # paired t
    tq = t_quantile(confidence, m - 1)
    mean_d = float(d.mean())
    se_d = float(d.std(ddof=1) / np.sqrt(m))
    paired_test = stats.ttest_rel(y2, y1)
    # Wilcoxon signed-rank (zeros dropped)
    nonzero = int(np.count_nonzero(d))
    if nonzero == 0:
        raise EstimationError(f"{what}: no station changed; the signed-rank test is undefined")
    wil = stats.wilcoxon(d, zero_method="wilcox")
    # Welch on all stations of each season
    v1, v2 = y1_all.var(ddof=1) / y1_all.size, y2_all.var(ddof=1) / y2_all.size
    se_w = float(np.sqrt(v1 + v2))
    if se_w == 0.0:
        raise EstimationError(f"{what}: no variation within either season; the Welch test is undefined")
    df_w = float((v1 + v2) ** 2 / (v1**2 / (y1_all.size - 1) + v2**2 / (y2_all.size - 1)))
    welch = stats.ttest_ind(y2_all, y1_all, equal_var=False)
    diff_w = float(y2_all.mean() - y1_all.mean())
    tw = t_quantile(confidence, df_w)
    # correlation and efficiency on the pairs
    s1, s2 = y1.std(ddof=1), y2.std(ddof=1)
    if s1 == 0 or s2 == 0:
        r = 0.0
        diagnostics.append(
            Diagnostic(
                "no_variation",
                "One season's values do not vary between stations, so their correlation is taken as 0.",
                severity="info",
            )
        )
    else:
        r = float(np.corrcoef(y1, y2)[0, 1])
    var_d = float(d.var(ddof=1))
    efficiency = float((s1**2 + s2**2) / var_d)
    note = (
        f"Paired analyses use the {m} stations measured in both seasons. Their two seasons correlate "
        f"(r = {r:.2f}), so the variance of a station's change is s1^2 + s2^2 - 2 r s1 s2: "
        f"{efficiency:.1f} times smaller than if the seasons were independent samples."
    )
    return SeasonComparison(
        value=value,
        first_season=first,
        second_season=second,
        n=m,
        n_first=int(y1_all.size),
        n_second=int(y2_all.size),
        mean_first=float(y1_all.mean()),
        mean_second=float(y2_all.mean()),
        mean_difference=mean_d,
        paired_se=se_d,
        paired_lower=mean_d - tq * se_d,
        paired_upper=mean_d + tq * se_d,
        paired_t=float(paired_test.statistic),
        paired_df=float(m - 1),
        paired_p=float(paired_test.pvalue),
        wilcoxon_statistic=float(wil.statistic),
        wilcoxon_p=float(wil.pvalue),
        wilcoxon_nonzero=nonzero,
        welch_difference=diff_w,
        welch_se=se_w,
        welch_lower=diff_w - tw * se_w,
        welch_upper=diff_w + tw * se_w,
        welch_t=float(welch.statistic),
        welch_df=df_w,
        welch_p=float(welch.pvalue),
        correlation=r,
        unpaired_se_on_pairs=float(np.sqrt((s1**2 + s2**2) / m)),
        efficiency=efficiency,
        confidence=float(confidence),
        note=note,
        pairs=tuple(
            (str(st), float(a), float(b)) for st, a, b in zip(paired["station"], y1, y2, strict=True)
        ),
        diagnostics=tuple(diagnostics),
    )
