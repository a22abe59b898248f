"""Density and totals: simple random and stratified sampling against textbook examples."""

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from monitor import columns as C
from monitor.errors import EstimationError
from monitor.estimate import (
    FEW_QUADRATS,
    combine_strata,
    estimate_density,
    estimate_density_stratified,
)

# Cochran (1977) Sampling Techniques, 3rd ed., ch. 2, petition example: 676 sheets, 50 sampled,
# signatures per sheet (Table 2.1 frequency table).  The table is from memory; it reproduces the
# sums quoted in the text, sum y = 1471 and sum y^2 = 54,497, which the test checks first.
PETITION = [42] * 23 + [41] * 4 + [36, 32, 29, 27, 27, 23, 19, 16, 16, 15, 15, 14, 11, 10, 9, 7,
                                   6, 6, 6, 5, 5, 4, 3]


def frame(counts, area=None):
    data = {C.COUNT: counts}
    if area is not None:
        data[C.QUADRAT_AREA] = area
    return pd.DataFrame(data)


def test_cochran_petition_total_and_standard_error():
    assert len(PETITION) == 50
    assert sum(PETITION) == 1471                         # Cochran 1977 ch. 2 (from memory)
    assert sum(y * y for y in PETITION) == 54497        # Cochran 1977 ch. 2 (from memory)
    # a "sheet" is a quadrat of 1 unit in a site of 676 units
    result = estimate_density(frame(PETITION), 676.0, quadrat_area_m2=1.0)
    assert round(result.total) == 19888                  # Cochran 1977 ch. 2: Y_hat = 19,888 (from memory)
    assert round(result.total_se) == 1392                # Cochran 1977 ch. 2: s(Y_hat) = 1,392 (from memory)
    # independent computation from the two sums, written out by hand
    n, big_n = 50, 676
    s2 = (54497 - 1471**2 / n) / (n - 1)
    se = big_n * math.sqrt(s2 / n) * math.sqrt(1 - n / big_n)
    assert result.total_se == pytest.approx(se, rel=1e-12)
    assert result.sampling_fraction == pytest.approx(50 / 676)
    # t quantile: scipy.stats 1.17 t.ppf(0.975, 49)
    t = stats.t.ppf(0.975, 49)
    assert result.t_quantile == pytest.approx(t, rel=1e-12)
    assert result.total_lower == pytest.approx(result.total - t * se, rel=1e-12)
    assert result.total_upper == pytest.approx(result.total + t * se, rel=1e-12)
    assert result.n == 50


def test_t_quantiles_match_scipy_at_other_levels():
    rng = np.random.default_rng(3)
    counts = rng.poisson(4, 12)
    for level in (0.8, 0.9, 0.99):
        r = estimate_density(frame(counts), 1000.0, quadrat_area_m2=0.25, confidence=level)
        assert r.t_quantile == pytest.approx(stats.t.ppf(0.5 + level / 2, 11), rel=1e-12)  # scipy.stats


def test_quadrat_of_033_m_is_about_a_tenth_of_a_square_metre_and_total_is_mean_times_ratio():
    # common practice: a 0.33 m x 0.33 m frame is "a 0.1 m^2 quadrat"
    area = 0.33 * 0.33
    assert area == pytest.approx(0.1, abs=0.01)
    counts = [3, 0, 5, 2, 7, 1, 0, 4, 6, 2, 3]
    site = 2500.0
    r = estimate_density(frame(counts), site, quadrat_area_m2=area)
    # common practice: total = mean count per quadrat x (site area / quadrat area)
    assert r.total == pytest.approx(np.mean(counts) * site / area, rel=1e-12)
    assert r.density == pytest.approx(np.mean(counts) / area, rel=1e-12)


def test_fpc_applies_when_quadrats_are_a_real_share_of_the_site():
    counts = [4, 8, 6, 5, 9, 3, 7, 6, 5, 8]
    with_fpc = estimate_density(frame(counts), 20.0, quadrat_area_m2=1.0)        # half the site
    without = estimate_density(frame(counts), 20.0, quadrat_area_m2=1.0, fpc=False)
    assert with_fpc.fpc == pytest.approx(0.5)
    assert with_fpc.total_se == pytest.approx(without.total_se * math.sqrt(0.5), rel=1e-12)
    # infinite-population textbook form: N s / sqrt(n)
    assert without.total_se == pytest.approx(20 * np.std(counts, ddof=1) / math.sqrt(10), rel=1e-12)


def test_census_has_no_sampling_error():
    counts = [1, 4, 2, 0, 3]
    r = estimate_density(frame(counts), 5.0, quadrat_area_m2=1.0)
    assert r.total == pytest.approx(10.0)
    assert r.total_se == pytest.approx(0.0, abs=1e-12)
    assert r.total_lower == pytest.approx(10.0) and r.total_upper == pytest.approx(10.0)


def test_unequal_quadrat_areas_use_mean_density():
    counts = [2, 8, 3, 12]
    areas = [0.25, 1.0, 0.25, 1.0]
    r = estimate_density(frame(counts, areas), 400.0)
    densities = np.array(counts) / np.array(areas)
    assert r.density == pytest.approx(densities.mean())
    assert r.total == pytest.approx(400.0 * densities.mean())
    assert "differ" in r.note


def test_lower_limit_never_below_the_number_counted():
    counts = [0, 0, 0, 0, 0, 0, 0, 0, 0, 25, 0, 0]
    r = estimate_density(frame(counts), 1000.0, quadrat_area_m2=1.0)
    assert r.total_lower == pytest.approx(25.0)
    assert any(d.code == "lower_limit_raised" for d in r.diagnostics)


def test_few_quadrats_warn_below_ten():
    # common practice: fewer than 10 quadrats gives a warning
    few = estimate_density(frame(list(range(FEW_QUADRATS - 1))), 100.0, quadrat_area_m2=1.0)
    enough = estimate_density(frame(list(range(FEW_QUADRATS))), 100.0, quadrat_area_m2=1.0)
    assert FEW_QUADRATS == 10
    assert [d.code for d in few.diagnostics].count("few_quadrats") == 1
    assert not any(d.code == "few_quadrats" for d in enough.diagnostics)


@pytest.mark.parametrize("design", [C.PLACEMENT_SYSTEMATIC, C.PLACEMENT_BALANCED, C.PLACEMENT_TRANSECT])
def test_systematic_and_balanced_designs_state_the_conservative_estimator(design):
    r = estimate_density(frame([1, 2, 3, 4]), 100.0, quadrat_area_m2=1.0, design=design)
    assert "simple-random-sampling estimator" in r.note and "conservative" in r.note
    assert r.variance_estimator.startswith("simple random sampling")


def test_to_dict_is_json_ready():
    import json

    r = estimate_density(frame([1, 2, 3, 4, 5]), 100.0, quadrat_area_m2=1.0)
    d = json.loads(json.dumps(r.to_dict()))
    assert d["n"] == 5 and d["diagnostics"][0]["code"] == "few_quadrats"


@pytest.mark.parametrize(
    ("site_area", "counts", "quadrat", "message"),
    [
        (0.0, [1, 2, 3], 1.0, "no area"),
        (None, [1, 2, 3], 1.0, "no area"),
        (float("nan"), [1, 2, 3], 1.0, "no area"),
        (0.5, [1, 2, 3], 1.0, "larger than its site"),
        (100.0, [4], 1.0, "at least 2 quadrats"),
        (100.0, [], 1.0, "at least 2 quadrats"),
        (100.0, [1, -2, 3], 1.0, "negative"),
        (100.0, [1, None, 3], 1.0, "missing"),
        (2.5, [1, 2, 3], 1.0, "more than the site"),
    ],
)
def test_bad_input_raises_a_clear_error(site_area, counts, quadrat, message):
    with pytest.raises(EstimationError, match=message):
        estimate_density(frame(counts), site_area, quadrat_area_m2=quadrat)


def test_missing_quadrat_area_is_an_error():
    with pytest.raises(EstimationError, match="quadrat_area_m2"):
        estimate_density(frame([1, 2, 3]), 100.0)


def _finite_population(rng, rows=40, cols=50, trend=0.0, noise=0.6):
    """Counts in every quadrat position of a grid (invented, for simulation)."""
    x = np.tile(np.arange(cols), rows)
    mu = np.exp(1.0 + trend * x / cols + rng.normal(0, noise, rows * cols))
    return rng.poisson(mu).astype(float)


def test_simulated_coverage_of_the_total_under_simple_random_sampling():
    # seeded simulation: 25 % of a finite grid sampled, fpc matters; coverage should be near 95 %
    rng = np.random.default_rng(20240501)
    population = _finite_population(rng)
    big_n, n, reps = population.size, 500, 1500
    truth = population.sum()
    hits = 0
    for _ in range(reps):
        sample = rng.choice(population, n, replace=False)
        r = estimate_density(frame(sample), float(big_n), quadrat_area_m2=1.0)
        hits += r.total_lower <= truth <= r.total_upper
    assert 0.93 <= hits / reps <= 0.97


def test_srs_variance_is_conservative_for_a_systematic_sample_of_a_trended_site():
    # seeded simulation: strong trend across the site; systematic samples (every k-th position
    # along the trend, random start) vary less than the SRS estimator says
    rng = np.random.default_rng(7)
    rows, cols, step = 30, 100, 5
    population = _finite_population(rng, rows=rows, cols=cols, trend=3.0, noise=0.3).reshape(rows, cols)
    ratios = []
    for row in range(rows):            # each row is one site of 100 quadrat positions
        totals, estimated_var = [], []
        for start in range(step):      # every possible systematic sample of that site
            r = estimate_density(frame(population[row, start::step]), float(cols), quadrat_area_m2=1.0,
                                 design=C.PLACEMENT_SYSTEMATIC)
            totals.append(r.total)
            estimated_var.append(r.total_se**2)
        ratios.append(np.mean(estimated_var) / np.var(totals))
    assert np.median(ratios) > 1.5


# --- stratified ------------------------------------------------------------------

# Lohr (2010) Sampling: Design and Analysis, 2nd ed., Example 3.2: farm acreage, four regions,
# proportional allocation; per-stratum N_h, n_h, means and variances and the printed results
# t_str = 909,736,035 and SE = 50,417,248 are from memory (the summaries reproduce both).
LOHR_N = [220, 1054, 1382, 422]
LOHR_n = [21, 103, 135, 41]
LOHR_MEAN = [97629.81, 300504.16, 211315.04, 662295.51]
LOHR_VAR = [7647472708, 29618183543, 53587487856, 396185950266]


def test_lohr_example_3_2_stratified_total():
    r = combine_strata(LOHR_N, LOHR_n, LOHR_MEAN, LOHR_VAR)
    assert abs(r.total - 909_736_035) < 20        # Lohr 2010 Ex. 3.2 (means printed to 2 dp)
    assert abs(r.total_se - 50_417_248) < 1       # Lohr 2010 Ex. 3.2
    assert r.n == 300 and r.strata == 4


def test_satterthwaite_df_matches_cochran_5_16_written_out():
    r = combine_strata(LOHR_N, LOHR_n, LOHR_MEAN, LOHR_VAR)
    # Cochran 1977 eq. 5.16 with g_h = N_h (N_h - n_h) / n_h
    g = [N * (N - n) / n for N, n in zip(LOHR_N, LOHR_n, strict=True)]
    num = sum(gh * s2 for gh, s2 in zip(g, LOHR_VAR, strict=True)) ** 2
    den = sum((gh * s2) ** 2 / (n - 1) for gh, s2, n in zip(g, LOHR_VAR, LOHR_n, strict=True))
    assert r.df == pytest.approx(num / den, rel=1e-10)
    assert min(LOHR_n) - 1 <= r.df <= sum(LOHR_n) - 4
    assert r.t_quantile == pytest.approx(stats.t.ppf(0.975, num / den), rel=1e-10)  # scipy.stats


def test_stratified_from_quadrats_matches_summaries_and_weights_by_area():
    rng = np.random.default_rng(11)
    a = 0.5
    q = pd.DataFrame({
        C.STRATUM: ["wet"] * 8 + ["dry"] * 12,
        C.COUNT: np.concatenate([rng.poisson(12, 8), rng.poisson(2, 12)]),
    })
    strata = pd.DataFrame({C.STRATUM: ["wet", "dry"], C.AREA: [300.0, 1700.0]})
    r = estimate_density_stratified(q, strata, quadrat_area_m2=a)
    wet = q.loc[q[C.STRATUM] == "wet", C.COUNT]
    dry = q.loc[q[C.STRATUM] == "dry", C.COUNT]
    # Cochran 1977 ch. 5 with N_h = A_h / a: independent path through per-stratum count summaries
    ref = combine_strata([300 / a, 1700 / a], [8, 12], [wet.mean(), dry.mean()],
                         [wet.var(ddof=1), dry.var(ddof=1)])
    assert r.total == pytest.approx(ref.total, rel=1e-12)
    assert r.total_se == pytest.approx(ref.total_se, rel=1e-12)
    assert r.df == pytest.approx(ref.df, rel=1e-12)
    assert r.density == pytest.approx((300 * wet.mean() / a + 1700 * dry.mean() / a) / 2000)
    assert r.stratum_codes == ("wet", "dry") and r.n == 20
    assert r.strata[0].total == pytest.approx(300 * wet.mean() / a)


def test_one_stratum_equals_simple_random_sampling():
    counts = [3, 5, 2, 8, 6, 4, 1, 7, 5, 3, 2]
    q = pd.DataFrame({C.STRATUM: "all", C.COUNT: counts})
    strat = estimate_density_stratified(q, pd.DataFrame({C.STRATUM: ["all"], C.AREA: [90.0]}),
                                        quadrat_area_m2=1.0)
    srs = estimate_density(q, 90.0, quadrat_area_m2=1.0)
    assert strat.total == pytest.approx(srs.total) and strat.total_se == pytest.approx(srs.total_se)
    assert strat.df == pytest.approx(srs.df)


def test_stratified_bad_input():
    strata = pd.DataFrame({C.STRATUM: ["a", "b"], C.AREA: [100.0, 50.0]})
    one_in_b = pd.DataFrame({C.STRATUM: ["a", "a", "b"], C.COUNT: [1, 2, 3]})
    with pytest.raises(EstimationError, match="stratum 'b'.*at least 2"):
        estimate_density_stratified(one_in_b, strata, quadrat_area_m2=1.0)
    stray = pd.DataFrame({C.STRATUM: ["a", "a", "b", "b", "c"], C.COUNT: [1, 2, 3, 4, 5]})
    with pytest.raises(EstimationError, match="not in the strata table: c"):
        estimate_density_stratified(stray, strata, quadrat_area_m2=1.0)
    no_area = pd.DataFrame({C.STRATUM: ["a", "b"], C.AREA: [100.0, 0.0]})
    ok = pd.DataFrame({C.STRATUM: ["a", "a", "b", "b"], C.COUNT: [1, 2, 3, 4]})
    with pytest.raises(EstimationError, match="stratum 'b' has no area"):
        estimate_density_stratified(ok, no_area, quadrat_area_m2=1.0)
    with pytest.raises(EstimationError, match="at least 2"):
        combine_strata([10, 10], [1, 3], [1.0, 2.0], [1.0, 1.0])
