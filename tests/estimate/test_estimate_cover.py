"""Cover, gridded frequency and pin hits: Wilson intervals and pooling over clustered quadrats."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.stats.proportion import proportion_confint

from monitor import columns as C
from monitor.errors import EstimationError
from monitor.estimate import (
    estimate_cover,
    estimate_frequency,
    estimate_pin_cover,
    pooled_proportion,
    wilson_interval,
)


@pytest.mark.parametrize(
    ("k", "n", "lower", "upper"),
    [
        # Newcombe (1998) Stat Med 17:857-872, Table I, method 3 (Wilson score, no continuity
        # correction), 95 %; values from memory, to 4 decimals.
        (81, 263, 0.2553, 0.3662),
        (15, 148, 0.0624, 0.1605),
        (0, 20, 0.0000, 0.1611),
        (1, 29, 0.0061, 0.1718),
    ],
)
def test_wilson_matches_newcombe_1998_table_1(k, n, lower, upper):
    lo, hi = wilson_interval(k, n, 0.95)
    assert lo == pytest.approx(lower, abs=5e-5)
    assert hi == pytest.approx(upper, abs=5e-5)


def test_wilson_matches_statsmodels_on_a_grid():
    # statsmodels 0.15 proportion_confint(method="wilson")
    for n in (1, 5, 10, 25, 100, 1000):
        k = np.arange(n + 1)
        for level in (0.8, 0.95, 0.99):
            lo, hi = wilson_interval(k, np.full(k.shape, n), level)
            ref_lo, ref_hi = proportion_confint(k, n, alpha=1 - level, method="wilson")
            np.testing.assert_allclose(lo, ref_lo, atol=1e-12)
            np.testing.assert_allclose(hi, ref_hi, atol=1e-12)


@pytest.mark.parametrize(("k", "n"), [(11, 10), (-1, 10), (1, 0)])
def test_wilson_rejects_impossible_counts(k, n):
    with pytest.raises(EstimationError):
        wilson_interval(k, n)


def test_mean_cover_interval_matches_scipy_t_interval():
    cover = [12.0, 30.0, 5.0, 22.5, 40.0, 18.0, 9.0, 27.0, 15.0, 33.0, 20.0]
    r = estimate_cover(pd.DataFrame({C.COVER: cover}))
    # scipy.stats 1.17 t.interval with the standard error of the mean
    lo, hi = stats.t.interval(0.95, len(cover) - 1, loc=np.mean(cover), scale=stats.sem(cover))
    assert r.lower == pytest.approx(lo, rel=1e-12) and r.upper == pytest.approx(hi, rel=1e-12)
    assert r.n == 11 and r.mean_cover_pct == pytest.approx(np.mean(cover))


def test_mean_cover_clips_at_zero_and_records_it():
    r = estimate_cover(pd.DataFrame({C.COVER: [0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 30]}))
    assert r.lower == 0.0
    assert any(d.code == "interval_clipped" for d in r.diagnostics)


def test_mean_cover_fpc():
    cover = pd.DataFrame({C.COVER: [10.0, 20.0, 30.0, 40.0]})
    full = estimate_cover(cover)
    half = estimate_cover(cover, site_area_m2=8.0, quadrat_area_m2=1.0)
    assert half.se == pytest.approx(full.se * np.sqrt(0.5))


@pytest.mark.parametrize("bad", [[10, 120, 30], [10, -1, 30]])
def test_cover_outside_0_100_is_an_error(bad):
    with pytest.raises(EstimationError, match="between 0 and 100"):
        estimate_cover(pd.DataFrame({C.COVER: bad}))


def test_cover_needs_two_quadrats():
    with pytest.raises(EstimationError, match="at least 2"):
        estimate_cover(pd.DataFrame({C.COVER: [10.0]}))


def test_equal_cluster_sizes_give_the_mean_of_shares_and_its_standard_error():
    # Cochran 1977 sec. 3.12: with equal cluster sizes the ratio estimate is the mean of the
    # cluster proportions and its variance is that of a mean of m values (closed form)
    hits = np.array([2, 7, 0, 5, 9, 3, 4, 6])
    r = pooled_proportion(hits, np.full(8, 10))
    shares = hits / 10
    assert r.share == pytest.approx(shares.mean())
    assert r.se == pytest.approx(shares.std(ddof=1) / np.sqrt(8), rel=1e-12)
    assert r.design_effect == pytest.approx((shares.var(ddof=1) / 8) / (r.share * (1 - r.share) / 80))


def test_unequal_cluster_sizes_use_the_ratio_estimator_variance():
    k = np.array([3, 10, 1, 6, 12])
    n = np.array([10, 25, 5, 20, 25])
    r = pooled_proportion(k, n)
    p = k.sum() / n.sum()
    # Cochran 1977 eq. 6.13 for a ratio, written out
    v = np.sum((k - p * n) ** 2) / (len(k) - 1) / (len(k) * n.mean() ** 2)
    assert r.share == pytest.approx(p) and r.se == pytest.approx(np.sqrt(v), rel=1e-12)


def test_independent_pins_give_design_effect_one_and_near_binomial_interval():
    # hits exactly as spread as binomial trials: deff is floored at 1, and with many frames the
    # interval approaches the ordinary Wilson interval on all pins
    rng = np.random.default_rng(5)
    hits = rng.binomial(10, 0.3, 400)
    r = pooled_proportion(hits, np.full(400, 10))
    assert r.design_effect == pytest.approx(1.0, abs=0.15)
    assert r.lower == pytest.approx(r.naive_lower, abs=0.005)
    assert r.upper == pytest.approx(r.naive_upper, abs=0.005)


def test_pooled_interval_covers_under_clustering_where_the_naive_one_does_not():
    # seeded simulation: frames differ (beta-binomial, intra-frame correlation 1/(a+b+1) = 0.2);
    # the design-effect Wilson interval keeps near-nominal coverage, the naive one does not
    rng = np.random.default_rng(1927)
    truth, a, b, frames, pins, reps = 0.3, 1.2, 2.8, 20, 10, 1000
    ours = naive = 0
    for _ in range(reps):
        hits = rng.binomial(pins, rng.beta(a, b, frames))
        r = pooled_proportion(hits, np.full(frames, pins))
        ours += r.lower <= truth <= r.upper
        naive += r.naive_lower <= truth <= r.naive_upper
    assert 0.92 <= ours / reps <= 0.98
    assert naive / reps < 0.85


def test_frequency_and_pin_cover_frames():
    grid = pd.DataFrame({C.STATION: ["q1", "q2", "q3"], C.OCCUPIED: [5, 12, 0], C.CELLS: [25, 25, 25]})
    f = estimate_frequency(grid)
    assert f.measure == C.MEASURE_FREQUENCY and f.n == 3 and f.trials == 75
    assert f.share == pytest.approx(17 / 75)
    q2 = f.per_quadrat[1]
    assert q2.station == "q2" and q2.share == pytest.approx(12 / 25)
    assert (q2.lower, q2.upper) == pytest.approx(proportion_confint(12, 25, method="wilson"))  # statsmodels
    assert list(f.to_frame().columns) == ["station", "successes", "trials", "share", "lower", "upper"]
    pins = pd.DataFrame({C.HITS: [3, 4, 1, 0], C.PINS: [10, 10, 10, 10]})
    p = estimate_pin_cover(pins)
    assert p.measure == C.MEASURE_PIN_HITS and p.share == pytest.approx(0.2)
    assert any(d.code == "few_quadrats" for d in p.diagnostics)


def test_k_greater_than_n_is_a_clear_error():
    with pytest.raises(EstimationError, match="k > n"):
        estimate_pin_cover(pd.DataFrame({C.HITS: [3, 11], C.PINS: [10, 10]}))
    with pytest.raises(EstimationError, match="k > n"):
        estimate_frequency(pd.DataFrame({C.OCCUPIED: [26, 1], C.CELLS: [25, 25]}))
    with pytest.raises(EstimationError, match="between 0 and n"):
        pooled_proportion([3, 11], [10, 10])


def test_one_frame_is_not_enough_for_a_site_interval():
    with pytest.raises(EstimationError, match="at least 2"):
        estimate_pin_cover(pd.DataFrame({C.HITS: [3], C.PINS: [10]}))


def test_all_zero_hits_give_a_finite_interval():
    r = estimate_pin_cover(pd.DataFrame({C.HITS: [0] * 12, C.PINS: [10] * 12}))
    assert r.share == 0.0 and r.lower == 0.0 and 0 < r.upper < 0.05
    assert any(d.code == "all_or_none" for d in r.diagnostics)
