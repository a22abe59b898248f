"""Power with year-to-year variation: the simulation, the approximation, the ceiling and how many years.

References
----------
- Exact power of the t test of the regression of yearly means on year: with a balanced design and
  normal noise on the link scale the yearly means are independent N(a + b t, s_year^2 + s_e^2/m),
  so T ~ noncentral t(df = n_years - 2, ncp = b sqrt(S_xx) / sqrt(s_year^2 + s_e^2/m))
  (Urquhart, Paulsen & Larsen 1998, Ecol. Appl. 8:246-257, for the variance; Neter, Kutner,
  Nachtsheim & Wasserman 1996, Applied Linear Statistical Models, section 2.5, for the noncentral t),
  computed with scipy.stats.nct (scipy 1.17).
- Monte-Carlo limits: a simulated share p over R replicates has SE sqrt(p (1 - p) / R); checks allow
  3.5 SE (common practice).
Invented parameters only.
"""

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from monitor import columns as col
from monitor.power import (
    Design,
    Scenario,
    VarianceComponents,
    approximate_power,
    compare_designs,
    index_variance,
    simulate_dataset,
    simulate_power,
    smallest_design,
    years_needed,
)


def exact_power(slope: float, sd_index: float, n_years: int, alpha: float = 0.05, side: str = "decline") -> float:
    """t test of the regression of n_years yearly means with SD sd_index (scipy.stats.nct, scipy 1.17)."""
    df = n_years - 2
    ncp = slope * math.sqrt(n_years * (n_years**2 - 1) / 12) / sd_index
    if side == "two-sided":
        q = stats.t.isf(alpha / 2, df)
        return float(stats.nct.sf(q, df, ncp) + stats.nct.cdf(-q, df, ncp))
    q = stats.t.isf(alpha, df)
    return float(stats.nct.cdf(-q, df, ncp) if side == "decline" else stats.nct.sf(q, df, ncp))


def lognormal(year_sd: float, residual_sd: float, **kw) -> VarianceComponents:
    return VarianceComponents.from_mean("lognormal", 10.0, residual_sd=residual_sd, year_sd=year_sd, **kw)


def _values(data, components) -> pd.Series:
    """The simulated values of the family's measure (the measure registry names its column)."""
    return data[col.MEASURE_COLUMNS[components.measure][0]]


def test_simulated_year_effects_have_the_stated_sd_and_are_shared_by_every_station():
    components = lognormal(0.3, 1e-6, stations_per_site=1000)
    data = simulate_dataset(components, Design(5, 400), Scenario(0.0), np.random.default_rng(1))
    y = np.log(_values(data, components))
    by_year = y.groupby(data[col.YEAR])
    assert float(by_year.std().max()) < 1e-4  # every station sees the same year effect
    means = by_year.mean().to_numpy()
    # sample SD of 400 normal draws: SE about s / sqrt(2 (n - 1)) = 0.0106
    assert np.std(means, ddof=1) == pytest.approx(0.3, abs=4 * 0.3 / math.sqrt(2 * 399))


def test_site_by_year_effects_are_shared_within_a_site_only():
    components = VarianceComponents.from_mean("lognormal", 10.0, residual_sd=1e-6, site_year_sd=0.4,
                                              stations_per_site=10)
    data = simulate_dataset(components, Design(400, 3, n_sites=40), Scenario(0.0), np.random.default_rng(2))
    y = np.log(_values(data, components))
    within = y.groupby([data[col.SITE], data[col.YEAR]]).std()
    assert float(within.max()) < 1e-4
    cells = y.groupby([data[col.SITE], data[col.YEAR]]).mean()
    # 120 site-years: SD about 0.4, SE 0.4 / sqrt(2 * 119) = 0.026
    assert np.std(cells.to_numpy(), ddof=1) == pytest.approx(0.4, abs=4 * 0.026)


def test_designs_from_one_seed_share_their_year_effects():
    # common random numbers: 20 and 40 stations over 6 and 11 years see the same good and bad years
    components = lognormal(0.3, 1e-6, stations_per_site=1000)
    a = simulate_dataset(components, Design(20, 6), Scenario(0.0), np.random.default_rng(5))
    b = simulate_dataset(components, Design(40, 11), Scenario(0.0), np.random.default_rng(5))
    ya = np.log(_values(a, components)).groupby(a[col.YEAR]).mean().to_numpy()
    yb = np.log(_values(b, components)).groupby(b[col.YEAR]).mean().to_numpy()
    np.testing.assert_allclose(ya, yb[:6], atol=1e-5)


def test_urquhart_variance_of_a_years_index():
    # var(index) = s_year^2 + s_site_year^2 / J + s_e^2 / m for a lognormal model, every station every year
    components = VarianceComponents.from_mean("lognormal", 10.0, residual_sd=0.5, year_sd=0.2, site_year_sd=0.3,
                                              station_sd=0.4, stations_per_site=10)
    design = Design(40, 10, n_sites=4)
    assert index_variance(components, design) == pytest.approx(0.2**2 + 0.3**2 / 4 + 0.5**2 / 40, rel=1e-12)
    # unlimited stations in the same 4 sites keep the site-by-year part; more sites lose it too
    assert index_variance(components, design, unlimited_stations=True) == pytest.approx(0.2**2 + 0.3**2 / 4)
    assert index_variance(components, Design(40, 10), unlimited_stations=True) == pytest.approx(0.2**2)


@pytest.mark.parametrize("side,alpha", [("decline", 0.05), ("two-sided", 0.1), ("rise", 0.05)])
def test_approximation_is_the_exact_noncentral_t_of_yearly_means(side, alpha):
    components = lognormal(0.15, 0.6)
    change = 0.05 if side == "rise" else -0.05
    scenario = Scenario(change, alpha=alpha, side=side)
    for stations, years in [(10, 6), (40, 12), (400, 25)]:
        approx = approximate_power(components, Design(stations, years), scenario)
        sd = math.sqrt(0.15**2 + 0.6**2 / stations)
        assert approx.df == years - 2
        assert approx.power == pytest.approx(exact_power(scenario.slope, sd, years, alpha, side), rel=1e-9)
        assert approx.ceiling == pytest.approx(exact_power(scenario.slope, 0.15, years, alpha, side), rel=1e-9)
        assert "Urquhart" in approx.label


def test_more_stations_cannot_buy_what_only_years_can():
    components = lognormal(0.2, 0.8)
    scenario = Scenario.from_change(-0.3, 10, side="decline")
    powers = [approximate_power(components, Design(m, 6), scenario).power for m in (10, 40, 160, 640, 10**6)]
    ceiling = approximate_power(components, Design(10, 6), scenario).ceiling
    assert all(b > a for a, b in zip(powers, powers[1:], strict=False))
    assert powers[-1] == pytest.approx(ceiling, abs=1e-4)
    assert ceiling < 0.5          # six years cannot reach 80 % with any number of stations
    # ...while more years can: the smallest number of years at 40 stations, by brute force on the exact power
    sd = math.sqrt(0.2**2 + 0.8**2 / 40)
    truth = next(n for n in range(3, 60) if exact_power(scenario.slope, sd, n) >= 0.8)
    assert years_needed(components, Design(40, 6), scenario, target=0.8) == truth
    assert years_needed(components, Design(40, 6), scenario, target=0.8, max_years=truth - 1) is None


def test_no_year_variation_keeps_gerrodettes_normal_form():
    components = lognormal(0.0, 0.6)
    approx = approximate_power(components, Design(10, 8), Scenario(-0.05, side="decline"))
    assert math.isinf(approx.df) and approx.ceiling == 1.0 and "Gerrodette" in approx.label


@pytest.mark.parametrize("side,alpha", [("decline", 0.05), ("two-sided", 0.05)])
def test_simulated_power_approaches_the_exact_noncentral_t_as_station_noise_vanishes(side, alpha):
    # station noise 1e-3 against a year SD of 0.25: the yearly means carry only the year effect
    components = lognormal(0.25, 1e-3, station_sd=0.5, stations_per_site=1000)
    scenario = Scenario.from_change(-0.4, 10, alpha=alpha, side=side)
    design = Design(20, 10)
    exact = exact_power(scenario.slope, 0.25, 10, alpha, side)
    assert 0.3 < exact < 0.8     # the informative range for this check
    result = simulate_power(components, design, scenario, rng=np.random.default_rng(2024), n_replicates=1500,
                            fitter="yearly-means")
    assert result.n_fitted == 1500
    assert abs(result.power - exact) < 3.5 * math.sqrt(exact * (1 - exact) / 1500)


def test_type_one_error_with_year_variation_quick():
    # no change, a year SD of 0.2 and 40 stations: the yearly-means t test rejects alpha of the time
    # (least squares ignoring the year effect rejects far more often: checked below)
    components = lognormal(0.2, 0.5, station_sd=0.4, stations_per_site=10)
    result = simulate_power(components, Design(40, 10), Scenario(0.0, side="two-sided"),
                            rng=np.random.default_rng(7), n_replicates=600, fitter="yearly-means")
    assert abs(result.power - 0.05) < 3.5 * math.sqrt(0.05 * 0.95 / 600)
    ignoring = simulate_power(components, Design(40, 10), Scenario(0.0, side="two-sided"),
                              rng=np.random.default_rng(7), n_replicates=200, fitter="ols-log")
    assert ignoring.power > 0.3


def test_common_random_numbers_keep_power_in_order_of_stations():
    # 20 and 40 stations share every draw they have in common, so 40 never shows less power than 20
    # by the luck of the draw (the demo once did, inside the noise of independent runs)
    components = lognormal(0.1, 0.8, stations_per_site=1000)
    scenario = Scenario.from_change(-0.3, 10)
    low, high = compare_designs(components, [Design(20, 8), Design(40, 8)], scenario,
                                rng=np.random.default_rng(3), n_replicates=300, fitter="yearly-means")
    assert high.power >= low.power
    rejected_low = set(low.replicates.index[low.replicates["reject"]])
    rejected_high = set(high.replicates.index[high.replicates["reject"]])
    # replicates rejected at 20 stations are rejected at 40 far more often than independent draws
    # would be (about high.power of them): the draws are shared (here 71 % against 22 %)
    assert len(rejected_low & rejected_high) / len(rejected_low) > high.power + 0.3


def test_how_many_years_by_simulation_matches_the_exact_answer():
    components = lognormal(0.2, 0.5, stations_per_site=1000)
    scenario = Scenario.from_change(-0.3, 10, side="decline")
    sd = math.sqrt(0.2**2 + 0.5**2 / 30)
    exact = {n: exact_power(scenario.slope, sd, n) for n in range(3, 40)}
    grid = [4, 7, 10, 13, 16, 19, 22]
    truth = next(n for n in grid if exact[n] >= 0.8)
    assert all(abs(exact[n] - 0.8) > 0.08 for n in grid)  # Monte-Carlo error cannot move the answer
    search = smallest_design(components, scenario, Design(30, 5), vary="n_years", grid=grid,
                             rng=np.random.default_rng(11), n_replicates=300, fitter="yearly-means")
    assert search.value == truth


# --- the power study as users run it: the trend engine with its year effect ---------------------

def _engine_exact_case(stations: int):
    # counts near 5000 (Poisson noise on the log scale 1/5000) and an observation SD of 0.02 against a
    # year SD of 0.25: the station noise has all but vanished, so the engine's test of the slope (t on
    # n_years - 2 df) should have the exact power of the t test of the regression of yearly means
    components = VarianceComponents(family="poisson-lognormal", intercept=math.log(5000.0), station_sd=0.5,
                                    observation_sd=0.02, year_sd=0.25, stations_per_site=1000)
    scenario = Scenario.from_change(-0.4, 10, side="decline")
    sd = math.sqrt(0.25**2 + (0.02**2 + 1 / 5000) / stations)
    return components, scenario, exact_power(scenario.slope, sd, 10)


def test_engine_power_approaches_the_exact_noncentral_t_quick():
    components, scenario, exact = _engine_exact_case(10)
    assert 0.3 < exact < 0.8
    result = simulate_power(components, Design(10, 10), scenario, rng=np.random.default_rng(2024),
                            n_replicates=120, n_workers=2)
    assert result.n_failed == 0
    assert set(result.replicates["df"]) == {8.0}          # t on n_years - 2 df, from the engine
    assert abs(result.power - exact) < 3.5 * math.sqrt(exact * (1 - exact) / 120)


@pytest.mark.slow
def test_engine_power_approaches_the_exact_noncentral_t():
    components, scenario, exact = _engine_exact_case(20)
    result = simulate_power(components, Design(20, 10), scenario, rng=np.random.default_rng(77),
                            n_replicates=1000, n_workers=2)
    assert result.n_failed == 0
    assert abs(result.power - exact) < 3.5 * math.sqrt(exact * (1 - exact) / 1000)


def _engine_null_case():
    # no change; a year SD of 0.2 shared by every station, NB-like overdispersion, 10 years
    return (VarianceComponents.from_mean("poisson-lognormal", 4.0, station_sd=0.6, site_sd=0.2, observation_sd=0.3,
                                         year_sd=0.2, stations_per_site=8),
            Scenario(0.0, alpha=0.05, side="two-sided"))


def test_engine_type_one_error_with_year_variation_quick():
    # 80 replicates: the limit 0.05 + 3.5 SE = 0.135.  The engine without the year effect rejects in
    # 26 of these 80 data sets (0.325, fitter "trend-no-year"), so this cheap check fails if it is lost.
    components, scenario = _engine_null_case()
    result = simulate_power(components, Design(24, 10), scenario, rng=np.random.default_rng(5), n_replicates=80,
                            n_workers=2)
    assert result.n_failed <= 2
    assert result.power < 0.05 + 3.5 * math.sqrt(0.05 * 0.95 / result.n_fitted)


@pytest.mark.slow
def test_engine_type_one_error_with_year_variation():
    # 1000 replicates: the share rejecting lies within 3 MC SE of alpha (0.05 +- 0.021)
    components, scenario = _engine_null_case()
    result = simulate_power(components, Design(24, 10), scenario, rng=np.random.default_rng(6), n_replicates=1000,
                            n_workers=2)
    assert result.n_failed <= 10
    assert abs(result.power - 0.05) < 3 * math.sqrt(0.05 * 0.95 / result.n_fitted)
