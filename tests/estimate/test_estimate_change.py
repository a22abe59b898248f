"""Two seasons at permanent quadrats: paired t and Wilcoxon beside Welch."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from monitor import columns as C
from monitor.errors import EstimationError
from monitor.estimate import compare_seasons

# Student (1908) Biometrika 6:1-25, the Cushny & Peebles sleep data (R datasets::sleep):
# extra hours of sleep of 10 patients under drug 1 and drug 2.
DRUG1 = [0.7, -1.6, -0.2, -1.2, -0.1, 3.4, 3.7, 0.8, 0.0, 2.0]
DRUG2 = [1.9, 0.8, 1.1, 0.1, -0.1, 4.4, 5.5, 1.6, 4.6, 3.4]

# Hollander & Wolfe (1973) Nonparametric Statistical Methods, p. 29: Hamilton depression scale
# factor at the first (x) and second (y) visit of 9 patients (R wilcox.test help example).
HW_X = [1.83, 0.50, 1.62, 2.48, 1.68, 1.88, 1.55, 3.06, 1.30]
HW_Y = [0.878, 0.647, 0.598, 2.05, 1.06, 1.29, 1.06, 3.14, 1.29]


def long(first, second, value="value", years=(2023, 2024)):
    n = len(first)
    return pd.DataFrame({
        C.STATION: [f"q{i}" for i in range(n)] * 2,
        C.YEAR: [years[0]] * n + [years[1]] * n,
        value: list(first) + list(second),
    })


def test_paired_and_welch_match_student_sleep_data():
    r = compare_seasons(long(DRUG1, DRUG2), value="value")
    # R 4.x t.test(extra ~ group, data = sleep, paired = TRUE): t = -4.0621, df = 9,
    # p-value = 0.002833, 95 % CI -2.4598858 -0.7001142 (group 1 - group 2; from memory)
    assert r.mean_difference == pytest.approx(1.58)
    assert r.paired_t == pytest.approx(4.0621, abs=5e-5)
    assert r.paired_df == 9
    assert r.paired_p == pytest.approx(0.002833, abs=5e-7)
    assert r.paired_lower == pytest.approx(0.7001142, abs=5e-8)
    assert r.paired_upper == pytest.approx(2.4598858, abs=5e-8)
    # R 4.x t.test(extra ~ group, data = sleep): Welch t = -1.8608, df = 17.776, p = 0.07939,
    # 95 % CI -3.3654832 0.2054832 (from memory)
    assert r.welch_t == pytest.approx(1.8608, abs=5e-5)
    assert r.welch_df == pytest.approx(17.776, abs=5e-4)
    assert r.welch_p == pytest.approx(0.07939, abs=5e-6)
    assert r.welch_lower == pytest.approx(-0.2054832, abs=5e-8)
    assert r.welch_upper == pytest.approx(3.3654832, abs=5e-8)
    # scipy.stats 1.17 as a second reference
    assert r.paired_p == pytest.approx(stats.ttest_rel(DRUG2, DRUG1).pvalue, rel=1e-12)
    welch = stats.ttest_ind(DRUG2, DRUG1, equal_var=False)
    assert r.welch_t == pytest.approx(welch.statistic, rel=1e-12)
    assert r.welch_df == pytest.approx(welch.df, rel=1e-12)


def test_wilcoxon_matches_hollander_wolfe_example():
    r = compare_seasons(long(HW_X, HW_Y), value="value")
    # Hollander & Wolfe 1973 p. 29 / R wilcox.test(x, y, paired = TRUE, alternative = "greater"):
    # V = 40, p = 0.01953 (= 10/512); two-sided p is twice that and scipy's statistic is
    # min(T+, T-) = 45 - 40 = 5 (from memory)
    assert r.wilcoxon_statistic == 5
    assert r.wilcoxon_p == pytest.approx(20 / 512, rel=1e-12)
    ref = stats.wilcoxon(np.subtract(HW_Y, HW_X))       # scipy.stats 1.17
    assert r.wilcoxon_p == pytest.approx(ref.pvalue, rel=1e-12)
    assert r.wilcoxon_nonzero == 9


def test_correlation_explains_the_gain_from_pairing():
    r = compare_seasons(long(DRUG1, DRUG2), value="value")
    s1, s2 = np.std(DRUG1, ddof=1), np.std(DRUG2, ddof=1)
    rho = np.corrcoef(DRUG1, DRUG2)[0, 1]
    var_d = s1**2 + s2**2 - 2 * rho * s1 * s2        # var(d) = s1^2 + s2^2 - 2 r s1 s2
    assert r.correlation == pytest.approx(rho)
    assert np.var(np.subtract(DRUG2, DRUG1), ddof=1) == pytest.approx(var_d)
    assert r.efficiency == pytest.approx((s1**2 + s2**2) / var_d)
    assert r.paired_se < r.unpaired_se_on_pairs
    assert "r = 0.80" in r.note


def test_simulated_power_is_higher_for_permanent_quadrats():
    # seeded simulation: stations persist between seasons (correlation ~0.8), true change +15 %
    rng = np.random.default_rng(31)
    paired_hits = welch_hits = 0
    reps = 150
    for _ in range(reps):
        station = rng.normal(0, 0.8, 20)
        y1 = rng.poisson(np.exp(2.0 + station + rng.normal(0, 0.3, 20)))
        y2 = rng.poisson(np.exp(2.0 + np.log(1.15) + station + rng.normal(0, 0.3, 20)))
        r = compare_seasons(long(y1, y2, value=C.COUNT))
        paired_hits += r.paired_p < 0.05
        welch_hits += r.welch_p < 0.05
    assert paired_hits > 2 * welch_hits


def test_unpaired_stations_are_used_only_by_welch():
    data = long([5, 6, 7, 8], [6, 8, 7, 11])
    extra = pd.DataFrame({C.STATION: ["new1", "new2"], C.YEAR: [2024, 2024], "value": [20, 1]})
    r = compare_seasons(pd.concat([data, extra]), value="value")
    assert r.n == 4 and r.n_second == 6 and r.n_first == 4
    assert r.welch_difference == pytest.approx(np.mean([6, 8, 7, 11, 20, 1]) - 6.5)
    assert any(d.code == "unpaired_stations" for d in r.diagnostics)


def test_season_comparison_bad_input():
    three = pd.concat([long([1, 2, 3], [2, 3, 5]), long([1, 2, 3], [1, 1, 1], years=(2022, 2025))])
    with pytest.raises(EstimationError, match="name the two"):
        compare_seasons(three, value="value")
    with pytest.raises(EstimationError, match="both seasons"):
        compare_seasons(long([1, 2, 3, 1], [2, 2, 4, 3]).assign(station=["a", "b", "c", "d", "e", "f", "g", "h"]),
                        value="value")
    with pytest.raises(EstimationError, match="same amount"):
        compare_seasons(long([1, 2, 3], [2, 3, 4]), value="value")
    with pytest.raises(EstimationError, match="twice"):
        compare_seasons(long([1, 2, 3], [2, 3, 5]).assign(station=["a", "a", "b", "a", "b", "c"]),
                        value="value")
    with pytest.raises(EstimationError, match="lacks column"):
        compare_seasons(long([1, 2, 3], [2, 3, 5]))


def test_pairs_are_kept_for_the_figure():
    r = compare_seasons(long(DRUG1, DRUG2), value="value")
    assert len(r.pairs) == 10
    assert r.pairs[0] == ("q0", 0.7, 1.9)
