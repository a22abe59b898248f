"""Simulated power against exact results, seeding, searches and the figure.

Reference: the exact power of the t test of a regression slope is noncentral t,
T ~ t'(df = n - 2, ncp = beta sqrt(S_xx) / sigma) (e.g. Neter, Kutner, Nachtsheim & Wasserman 1996,
Applied Linear Statistical Models, 4th ed., section 2.5 "power of tests"), computed with
scipy.stats.nct (scipy 1.17).  The fitter "ols-log" regresses log values on year, so on data with
no random effects the simulated power must match it within Monte-Carlo error.
"""

import dataclasses
import math

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pytest
from scipy import stats

from monitor import columns as col
from monitor.errors import DesignError
from monitor.power import (
    Design,
    Scenario,
    VarianceComponents,
    compare_designs,
    design_grid,
    detectable_change,
    plot_power,
    reject_null,
    results_frame,
    simulate_power,
    smallest_design,
)

SIGMA = 0.6
COMPONENTS = VarianceComponents.from_mean("lognormal", 10.0, residual_sd=SIGMA)


def exact_power(stations: int, years: int, slope: float, alpha: float, side: str) -> float:
    """Exact t-test power for OLS of log y on year, every station every year, no random effects."""
    df = stations * years - 2
    sxx = stations * years * (years**2 - 1) / 12
    nc = slope * math.sqrt(sxx) / SIGMA
    if side == "two-sided":
        tc = stats.t.isf(alpha / 2, df)
        return float(stats.nct.sf(tc, df, nc) + stats.nct.cdf(-tc, df, nc))
    tc = stats.t.isf(alpha, df)
    return float(stats.nct.cdf(-tc, df, nc) if side == "decline" else stats.nct.sf(tc, df, nc))


@pytest.mark.parametrize("side,alpha", [("two-sided", 0.05), ("decline", 0.1)])
def test_simulated_power_matches_exact_noncentral_t(side, alpha):
    scenario = Scenario.from_change(-0.5, 10, alpha=alpha, side=side)
    stations, years = 6, 7
    exact = exact_power(stations, years, scenario.slope, alpha, side)
    assert 0.3 < exact < 0.8  # the informative range for this check
    result = simulate_power(COMPONENTS, Design(stations, years), scenario, rng=np.random.default_rng(31),
                            n_replicates=1200, fitter="ols-log")
    assert result.n_fitted == 1200
    assert result.power_se == pytest.approx(math.sqrt(result.power * (1 - result.power) / 1200))
    assert abs(result.power - exact) < 3.5 * result.power_se


def test_interval_width_matches_expected_t_interval_width():
    # median width of exp(b +- t se) - 1 ~ 2 sinh(t se) exp(b); se from sigma / sqrt(S_xx) (chi-square median)
    scenario = Scenario(annual_change=-0.05)
    stations, years = 10, 8
    result = simulate_power(COMPONENTS, Design(stations, years), scenario, rng=np.random.default_rng(5),
                            n_replicates=600, fitter="ols-log")
    df = stations * years - 2
    se = SIGMA * math.sqrt(stats.chi2.median(df) / df) / math.sqrt(stations * years * (years**2 - 1) / 12)
    q = stats.t.isf(0.025, df)
    expected = math.exp(scenario.slope) * 2 * math.sinh(q * se)
    assert result.median_interval_width == pytest.approx(expected, rel=0.03)


def test_same_seed_same_answer_with_one_and_two_processes():
    designs = [Design(5, 6), Design(10, 6, revisit="[1-1]", missed_share=0.2)]
    scenario = Scenario.from_change(-0.3, 10)
    one = compare_designs(COMPONENTS, designs, scenario, rng=np.random.default_rng(99), n_replicates=60,
                          n_workers=1, fitter="ols-log")
    two = compare_designs(COMPONENTS, designs, scenario, rng=np.random.default_rng(99), n_replicates=60,
                          n_workers=2, fitter="ols-log")
    for a, b in zip(one, two, strict=True):
        assert a.power == b.power
        assert a.seed_entropy == b.seed_entropy
        assert a.replicates.equals(b.replicates)
    assert not one[0].replicates["slope"].equals(one[1].replicates["slope"])


def test_progress_reports_every_replicate():
    calls = []
    simulate_power(COMPONENTS, Design(5, 5), Scenario(-0.05), rng=np.random.default_rng(1), n_replicates=37,
                   fitter="ols-log", progress=lambda done, total: calls.append((done, total)))
    assert calls[0] == (0, 37) and calls[-1] == (37, 37)
    assert all(b[0] >= a[0] for a, b in zip(calls, calls[1:], strict=False))


def test_fitter_must_suit_the_family():
    # the trend engine fits the lognormal family to a positive measure, not to counts
    as_counts = dataclasses.replace(COMPONENTS, measure=col.MEASURE_COUNT)
    with pytest.raises(DesignError, match="lognormal"):
        simulate_power(as_counts, Design(5, 5), Scenario(-0.05), rng=np.random.default_rng(1), n_replicates=2,
                       fitter="trend")
    counts = VarianceComponents(family="poisson", intercept=1.0)
    with pytest.raises(DesignError):
        simulate_power(counts, Design(5, 5), Scenario(-0.05), rng=np.random.default_rng(1), n_replicates=2,
                       fitter="ols-log")
    with pytest.raises(DesignError):
        simulate_power(counts, Design(5, 5), Scenario(-0.05), rng=np.random.default_rng(1), n_replicates=2,
                       fitter="bayes")


def test_reject_null_uses_t_and_normal_quantiles():
    # scipy.stats.t: two-sided p of T = 2.0 on 10 df is 2 * t.sf(2, 10) = 0.0734
    p = 2 * stats.t.sf(2.0, 10)
    assert 0.05 < p < 0.1
    assert not reject_null(np.array([2.0]), np.array([1.0]), np.array([10.0]), 0.05, "two-sided")[0]
    assert reject_null(np.array([2.0]), np.array([1.0]), np.array([10.0]), 0.10, "two-sided")[0]
    # normal: 1.7 > z_0.95 = 1.645 one-sided; only in the tested direction
    assert reject_null(np.array([-1.7]), np.array([1.0]), np.array([np.inf]), 0.05, "decline")[0]
    assert not reject_null(np.array([-1.7]), np.array([1.0]), np.array([np.inf]), 0.05, "rise")[0]
    with pytest.raises(DesignError):
        reject_null(np.array([1.0]), np.array([1.0]), np.array([1.0]), 0.05, "both")


def test_smallest_number_of_stations_matches_exact_power():
    scenario = Scenario.from_change(-0.5, 10, side="decline")
    grid = [2, 4, 8, 16, 32]
    exact = [exact_power(s, 8, scenario.slope, 0.05, "decline") for s in grid]
    truth = next(s for s, p in zip(grid, exact, strict=True) if p >= 0.8)
    # the grid neighbours are far from 0.8 so Monte-Carlo error cannot move the answer
    assert all(abs(p - 0.8) > 0.08 for p in exact)
    search = smallest_design(COMPONENTS, scenario, Design(2, 8), vary="n_stations", grid=grid,
                             rng=np.random.default_rng(7), n_replicates=300, fitter="ols-log")
    assert search.value == truth
    assert search.result is not None and search.result.power >= 0.8
    assert search.approximate_value is not None
    below = [r for r in search.evaluated if r.design.n_stations < truth]
    assert all(r.power < 0.8 for r in below)


def test_smallest_number_of_years_reports_when_grid_is_too_short():
    scenario = Scenario.from_change(-0.02, 10)
    search = smallest_design(COMPONENTS, scenario, Design(3, 3), vary="n_years", grid=[3, 4],
                             rng=np.random.default_rng(7), n_replicates=50, fitter="ols-log")
    assert search.value is None and "reached" in search.note


def test_simulated_detectable_change_matches_exact_noncentral_t():
    stations, years = 8, 8
    design = Design(stations, years)

    def gap(slope):
        return exact_power(stations, years, -slope, 0.05, "decline") - 0.8

    from scipy.optimize import brentq

    exact_slope = brentq(gap, 1e-6, 2.0)
    found = detectable_change(COMPONENTS, design, side="decline", method="simulation",
                              rng=np.random.default_rng(17), n_replicates=250, fitter="ols-log")
    assert found.annual_change < 0
    assert abs(math.log1p(found.annual_change)) == pytest.approx(exact_slope, rel=0.08)
    assert found.over_years == 7
    assert found.period_change == pytest.approx((1 + found.annual_change) ** 7 - 1)
    quick = detectable_change(COMPONENTS, design, side="decline")
    assert quick.method == "approximation" and quick.curve is None
    assert abs(math.log1p(quick.annual_change)) == pytest.approx(exact_slope, rel=0.05)


def test_results_frame_and_figure():
    scenario = Scenario.from_change(-0.3, 10)
    results = compare_designs(COMPONENTS, design_grid([3, 6, 9], [5, 8]), scenario,
                              rng=np.random.default_rng(3), n_replicates=40, fitter="ols-log")
    frame = results_frame(results)
    assert list(frame["n_stations"]) == [3, 6, 9, 3, 6, 9]
    assert frame["power"].between(0, 1).all()
    figure = plot_power(results)
    try:
        ax = figure.axes[0]
        assert len(ax.containers) == 2                 # one error-bar line per number of years
        labels = [t.get_text() for t in ax.get_legend().get_texts()]
        assert set(labels) == {"5 years", "8 years", "80% power"}
        assert [tuple(line.get_ydata()) for line in ax.lines if line.get_linestyle() == "--"] == [(0.8, 0.8)]
    finally:
        import matplotlib.pyplot as plt

        plt.close(figure)


@pytest.mark.slow
def test_type_one_error_under_no_change():
    # 2000 replicates under X = 0: share rejecting within 3 MC SE of alpha (sqrt(a(1-a)/R))
    scenario = Scenario(annual_change=0.0, alpha=0.05, side="two-sided")
    result = simulate_power(COMPONENTS, Design(6, 6, missed_share=0.2), scenario, rng=np.random.default_rng(123),
                            n_replicates=2000, fitter="ols-log", n_workers=2)
    assert abs(result.power - 0.05) < 3 * math.sqrt(0.05 * 0.95 / 2000)
