"""Seeded simulations recover the population model they were given.

Each check compares a simulated summary with the closed-form moment of the model (Poisson mean
exp(eta); lognormal mean exp(mu + s^2/2); NB2 variance mu + mu^2/theta; binomial mean n p) with a
tolerance of about four standard errors.  Invented parameters only.
"""

import math

import numpy as np
import pytest

from monitor import columns as col
from monitor.power import Design, Scenario, VarianceComponents, simulate_dataset
from monitor.power.model import scaled_components


def test_poisson_yearly_means_follow_the_steady_change():
    components = VarianceComponents(family="poisson", intercept=math.log(8.0))
    scenario = Scenario(annual_change=-0.1)
    data = simulate_dataset(components, Design(4000, 5), scenario, np.random.default_rng(1))
    means = data.groupby(col.YEAR)[col.COUNT].mean().to_numpy()
    expected = 8.0 * 0.9 ** np.arange(5)
    se = np.sqrt(expected / 4000)
    assert np.all(np.abs(means - expected) < 4 * se)


def test_from_mean_gives_the_marginal_mean_of_a_lognormal_poisson():
    # E[y] = exp(b0 + (s_station^2 + s_site^2 + s_obs^2)/2) for the Poisson-lognormal
    components = VarianceComponents.from_mean("poisson-lognormal", 3.0, station_sd=0.5, site_sd=0.2,
                                              observation_sd=0.3, stations_per_site=1)
    data = simulate_dataset(components, Design(20000, 2), Scenario(0.0), np.random.default_rng(2))
    first = data.loc[data[col.YEAR] == 2001, col.COUNT]
    assert abs(first.mean() - 3.0) < 4 * first.std() / math.sqrt(len(first))


def test_negative_binomial_variance():
    components = VarianceComponents(family="negbin", intercept=math.log(5.0), theta=2.0)
    data = simulate_dataset(components, Design(40000, 2), Scenario(0.0), np.random.default_rng(3))
    y = data[col.COUNT]
    assert y.mean() == pytest.approx(5.0, rel=0.02)
    assert y.var() == pytest.approx(5.0 + 25.0 / 2.0, rel=0.05)   # NB2: mu + mu^2 / theta


def test_binomial_frequency_and_presence_columns():
    freq = VarianceComponents(family="binomial", intercept=math.log(0.3 / 0.7), trials=25)
    data = simulate_dataset(freq, Design(4000, 2), Scenario(0.0), np.random.default_rng(4))
    assert set(data.columns) >= {col.OCCUPIED, col.CELLS}
    assert (data[col.CELLS] == 25).all()
    share = data[col.OCCUPIED].sum() / data[col.CELLS].sum()
    assert abs(share - 0.3) < 4 * math.sqrt(0.3 * 0.7 / (25 * len(data)))
    presence = VarianceComponents(family="binomial", intercept=0.0, trials=1)
    assert presence.measure == col.MEASURE_PRESENCE
    data = simulate_dataset(presence, Design(50, 3), Scenario(0.0), np.random.default_rng(4))
    assert set(data[col.PRESENT].unique()) <= {0, 1}


def test_logit_normal_cover_on_the_logit_scale():
    components = VarianceComponents(family="logit-normal", intercept=-1.0, residual_sd=0.7)
    data = simulate_dataset(components, Design(20000, 2), Scenario(0.0), np.random.default_rng(5))
    p = data[col.COVER] / 100
    z = np.log(p / (1 - p))
    assert z.mean() == pytest.approx(-1.0, abs=4 * 0.7 / math.sqrt(len(z)))
    assert z.std() == pytest.approx(0.7, rel=0.02)
    assert ((data[col.COVER] > 0) & (data[col.COVER] < 100)).all()


def test_cover_recorded_to_a_step():
    components = VarianceComponents(family="logit-normal", intercept=-4.0, residual_sd=1.0, cover_resolution=1.0)
    data = simulate_dataset(components, Design(2000, 2), Scenario(0.0), np.random.default_rng(5))
    cover = data[col.COVER].to_numpy()
    assert np.allclose(cover, np.round(cover))
    # P(cover < 0.5 %) = Phi((logit(0.005) + 4) / 1) = Phi(-1.29) = 0.0980 (scipy.stats.norm 1.17)
    share_zero = np.mean(cover == 0)
    assert abs(share_zero - 0.0980) < 4 * math.sqrt(0.0980 * 0.9020 / len(cover))


def test_missed_visits_are_dropped_never_zeroed():
    components = VarianceComponents(family="poisson", intercept=math.log(50.0))
    data = simulate_dataset(components, Design(1000, 10, missed_share=0.2), Scenario(0.0),
                            np.random.default_rng(6))
    n_due = 1000 * 10
    assert abs(len(data) - 0.8 * n_due) < 4 * math.sqrt(n_due * 0.2 * 0.8)
    # with a mean of 50 a zero count has probability exp(-50): zeros would mean missed visits written as 0
    assert (data[col.COUNT] > 0).all()
    assert not data.duplicated([col.STATION, col.YEAR]).any()


def test_rotating_panel_table_holds_only_due_visits():
    components = VarianceComponents(family="poisson", intercept=1.0)
    data = simulate_dataset(components, Design(40, 8, revisit="[1-3]"), Scenario(0.0), np.random.default_rng(7))
    assert (data.groupby(col.YEAR).size() == 10).all()
    assert (data.groupby(col.STATION).size() == 2).all()


def test_quadrat_area_scales_mean_and_sds():
    components = VarianceComponents(family="poisson-lognormal", intercept=0.5, station_sd=0.8, site_sd=0.4,
                                    observation_sd=0.6, quadrat_area=1.0)
    design = Design(10, 5, quadrat_area=4.0, area_exponent=0.5)
    scaled = scaled_components(components, design)
    assert scaled["intercept"] == pytest.approx(0.5 + math.log(4.0))    # counts proportional to area
    assert scaled["station_sd"] == pytest.approx(0.8 * 4.0**-0.5)      # SD proportional to area^-b
    assert scaled["observation_sd"] == pytest.approx(0.6 * 4.0**-0.5)
    assert scaled["site_sd"] == pytest.approx(0.4)                      # between-site spread unchanged
    plain = VarianceComponents(family="poisson", intercept=math.log(3.0), quadrat_area=1.0)
    small = simulate_dataset(plain, Design(5000, 2, quadrat_area=1.0), Scenario(0.0), np.random.default_rng(8))
    large = simulate_dataset(plain, Design(5000, 2, quadrat_area=2.0), Scenario(0.0), np.random.default_rng(8))
    assert large[col.COUNT].mean() / small[col.COUNT].mean() == pytest.approx(2.0, rel=0.04)


def test_same_generator_state_gives_same_table_and_global_state_is_unused():
    components = VarianceComponents.from_mean("poisson-lognormal", 3.0, station_sd=0.5, site_sd=0.2,
                                              observation_sd=0.3)
    design = Design(30, 6, missed_share=0.1)
    np.random.seed(1)
    a = simulate_dataset(components, design, Scenario(-0.05), np.random.default_rng(11))
    np.random.seed(2)
    b = simulate_dataset(components, design, Scenario(-0.05), np.random.default_rng(11))
    assert a.equals(b)
    assert set(a.columns) == {col.STATION, col.SITE, col.YEAR, col.COUNT}
    assert a[col.SITE].nunique() == 3


def test_design_read_back_from_a_table():
    components = VarianceComponents(family="poisson", intercept=math.log(50.0), site_sd=0.2)
    made = Design(40, 9, missed_share=0.25, n_sites=4, first_year=2010)
    data = simulate_dataset(components, made, Scenario(0.0), np.random.default_rng(9))
    read = Design.from_data(data)
    assert (read.n_stations, read.n_years, read.n_sites, read.first_year) == (40, 9, 4, 2010)
    # missed share: 360 due visits, each missed with probability 0.25 (4 binomial SE)
    assert abs(read.missed_share - 0.25) < 4 * math.sqrt(0.25 * 0.75 / 360)
