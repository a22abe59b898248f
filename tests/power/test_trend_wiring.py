"""The power study wired to the trend engine's fast path (monitor.trend).

References: a seeded simulation must give back the components it was simulated from (style
rule 12, invented data); for a balanced every-year design with large counts, the Poisson-lognormal
GLMM's slope is the within-station least-squares slope of log counts, whose exact test power is
noncentral t with df = S (N - 1) - 1 (Searle, Casella & McCulloch 1992, Variance Components,
balanced one-way model with a covariate; computed with scipy.stats.nct, scipy 1.17).
"""

import math

import numpy as np
import pytest
from scipy import stats

from monitor import columns as col
from monitor.power import (
    Design,
    Scenario,
    VarianceComponents,
    compare_designs,
    components_from_trend,
    simulate_dataset,
    simulate_power,
    trials_from_data,
)
from monitor.errors import EstimationError
from monitor.trend import TrendModel

TRUTH = VarianceComponents(family="poisson-lognormal", intercept=1.2, station_sd=0.7, site_sd=0.0,
                           observation_sd=0.35, stations_per_site=10)


def test_components_from_a_fitted_trend_recover_the_simulated_truth():
    design = Design(300, 6)
    data = simulate_dataset(TRUTH, design, Scenario(-0.05), np.random.default_rng(2024))
    result = TrendModel(data, measure=col.MEASURE_COUNT, family="poisson-lognormal").fit(profile=False, indices=False)
    got = components_from_trend(result)
    assert got.family == "poisson-lognormal" and got.measure == col.MEASURE_COUNT
    # 300 stations: SE of a log-SD about 1/sqrt(2*300) = 0.04; 5 SE on the SD scale
    assert got.station_sd == pytest.approx(0.7, rel=0.2)
    assert got.observation_sd == pytest.approx(0.35, rel=0.25)
    # level of a typical station in the first year: b0 (station effects average 0 +- 0.7/sqrt(300))
    assert got.intercept == pytest.approx(1.2, abs=0.15)
    assert got.stations_per_site == pytest.approx(10.0)  # 300 stations over 30 simulated sites


def test_engine_power_run_is_complete_and_reproducible_across_processes():
    scenario = Scenario.from_change(-0.5, 10)
    designs = [Design(20, 6, revisit="[1-1]", missed_share=0.1)]
    one = compare_designs(TRUTH, designs, scenario, rng=np.random.default_rng(8), n_replicates=4, n_workers=1)
    two = compare_designs(TRUTH, designs, scenario, rng=np.random.default_rng(8), n_replicates=4, n_workers=2)
    a, b = one[0], two[0]
    assert a.replicates.equals(b.replicates)
    assert a.fitter == "trend" and a.n_replicates == 4
    assert a.n_fitted + a.n_failed == 4
    assert 0 <= a.power <= 1 and math.isfinite(a.power_se)
    assert a.median_interval_width > 0
    assert 0 <= a.share_right_call <= 1
    assert set(a.replicates["call"].dropna()) <= set(col.CALLS)
    assert a.approximation is not None and 0 < a.approximation.power < 1
    d = a.to_dict()
    assert d["design"]["revisit"] == "[1-1]" and d["fitter"] == "trend"


@pytest.mark.slow
def test_engine_power_matches_exact_t_power_of_within_station_regression():
    # counts near 2000: Poisson noise on the log scale (1/2000) is negligible beside sd_obs = 0.3,
    # so the GLMM slope is the within-station OLS slope of log counts: T ~ nct(S(N-1)-1, beta sqrt(S_xx)/sd)
    components = VarianceComponents(family="poisson-lognormal", intercept=math.log(2000.0), station_sd=0.5,
                                    observation_sd=0.3, stations_per_site=1000)
    stations, years = 12, 6
    scenario = Scenario.from_change(-0.3, 10)
    sd = math.sqrt(0.3**2 + 1 / 2000)
    df = stations * (years - 1) - 1
    nc = scenario.slope * math.sqrt(stations * years * (years**2 - 1) / 12) / sd
    tc = stats.t.isf(0.025, df)
    exact = stats.nct.sf(tc, df, nc) + stats.nct.cdf(-tc, df, nc)
    # the truth has no year variation, so the reference is the engine without a year effect
    result = simulate_power(components, Design(stations, years), scenario, rng=np.random.default_rng(77),
                            n_replicates=1000, n_workers=2, fitter="trend-no-year")
    assert result.n_failed == 0
    # Wald z against exact t on 59 df adds at most ~0.01 to the power here; allow it beside 3.5 MC SE
    assert abs(result.power - exact) < 3.5 * result.power_se + 0.01


@pytest.mark.slow
def test_engine_type_one_error_under_no_change():
    # 1000 replicates under X = 0: share of two-sided rejections within 3 MC SE of alpha = 0.05.  The
    # truth has no year variation, so the reference is the engine without a year effect (with its
    # default year effect the engine keeps the t reference on n_years - 2 df even where the year SD
    # comes out 0, and is conservative by design: 1.4 % of 1000 in DEVELOPERS.md's figures)
    scenario = Scenario(annual_change=0.0, alpha=0.05, side="two-sided")
    components = VarianceComponents.from_mean("poisson-lognormal", 4.0, station_sd=0.8, site_sd=0.3,
                                              observation_sd=0.3, stations_per_site=6)
    result = simulate_power(components, Design(30, 8, missed_share=0.1), scenario, rng=np.random.default_rng(5),
                            n_replicates=1000, n_workers=2, fitter="trend-no-year")
    assert result.n_failed <= 10
    assert abs(result.power - 0.05) < 3 * math.sqrt(0.05 * 0.95 / result.n_fitted)


@pytest.mark.parametrize("truth,check", [
    (VarianceComponents(family="negbin", intercept=1.5, station_sd=0.5, theta=3.0, stations_per_site=1000),
     lambda got: got.theta == pytest.approx(3.0, rel=0.3)),
    (VarianceComponents(family="logit-normal", intercept=-1.0, station_sd=0.6, residual_sd=0.5,
                        stations_per_site=1000),
     lambda got: got.residual_sd == pytest.approx(0.5, rel=0.1)),
    (VarianceComponents(family="binomial", intercept=-0.5, station_sd=0.8, trials=25, stations_per_site=1000),
     lambda got: got.trials == 25),
])
def test_components_from_trend_for_each_family(truth, check):
    # seeded simulation, 200 stations x 5 years, one site: the fitted components give back the truth
    data = simulate_dataset(truth, Design(200, 5), Scenario(0.02), np.random.default_rng(404))
    # simulated cover has no 0 or 100 %, so the engine's default adjustment (the smallest cover,
    # Warton & Hui 2011) would shrink the logits; a negligible constant keeps the model unadjusted
    extra = {"cover_adjust": 1e-9} if truth.family == "logit-normal" else {}
    result = TrendModel(data, measure=truth.measure, family=truth.family, **extra).fit(profile=False, indices=False)
    got = components_from_trend(result, data=data)
    assert got.family == truth.family and got.measure == truth.measure
    assert got.station_sd == pytest.approx(truth.station_sd, rel=0.2)
    assert got.intercept == pytest.approx(truth.intercept, abs=0.2)
    assert check(got)


def test_cells_or_pins_come_from_the_programmes_own_grid_never_a_fixed_table():
    # a 40-cell grid (not the 25 a fixed table assumed), and a frame re-strung from 10 to 20 pins:
    # the last year's n is the programme's grid now
    truth = VarianceComponents(family="binomial", intercept=-0.5, station_sd=0.5, trials=40, stations_per_site=1000)
    data = simulate_dataset(truth, Design(60, 5), Scenario(0.0), np.random.default_rng(8))
    result = TrendModel(data, measure=truth.measure, family="binomial").fit(profile=False, indices=False)
    assert components_from_trend(result, data=data).trials == 40
    assert components_from_trend(result, trials=12).trials == 12
    with pytest.raises(EstimationError, match="cells or pins"):
        components_from_trend(result)
    pins = data.rename(columns={"occupied": "hits", "cells": "pins"})
    pins.loc[pins["year"] < pins["year"].max(), "pins"] = 10
    assert trials_from_data(pins, "pin_hits") == 40
    assert trials_from_data(pins.drop(columns="pins"), "pin_hits") is None
    assert trials_from_data(pins, "presence") == 1
