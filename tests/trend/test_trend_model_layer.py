"""The trend model layer: empty years, overdispersed k-of-n data, blank observers, the fast-path
label, the single-visit note, the t reference with a year effect.

Simulated data here are invented (seeded numpy Generators) with known truth; outside references
are named beside each check.
"""

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.special import expit

from monitor.trend import TrendModel
from monitor.trend.model import OVERDISPERSION_RATIO, _pearson_test

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures" / "trend"


@pytest.fixture(scope="module")
def year_reference():
    """tests/fixtures/trend/reference_year_values.json (R 4.2.2, lme4 1.1-31, glmmTMB 1.1.5)."""
    return json.loads((FIXTURES / "reference_year_values.json").read_text())


def counts(rng, n_station=12, years=range(2010, 2018), mean=1.5):
    years = np.array(list(years))
    st = np.repeat(np.arange(n_station), len(years))
    yr = np.tile(years, n_station)
    eta = math.log(mean) + rng.normal(0, 0.5, n_station)[st]
    return pd.DataFrame({"station": st.astype(str), "site": (st % 3).astype(str), "year": yr,
                         "count": rng.poisson(np.exp(eta))})


@pytest.mark.parametrize("family", ["poisson", "poisson-lognormal", "negbin"])
@pytest.mark.parametrize("where", ["first", "last"])
def test_a_year_of_zeros_never_breaks_the_fit(family, where):
    # before: an overflow from the yearly indices (warnings are errors here), in every count family
    d = counts(np.random.default_rng(11 if where == "first" else 12))
    empty = 2010 if where == "first" else 2017
    d.loc[d.year == empty, "count"] = 0
    r = TrendModel(d, "count", family=family).fit(profile=False, indices=True)
    idx = r.indices.set_index("year")
    assert idx.loc[empty, "index"] == 0.0 and idx.loc[empty, "lower"] == 0.0 and np.isnan(idx.loc[empty, "upper"])
    others = idx.drop(index=empty)
    assert np.isfinite(others.to_numpy()).all() and (others["upper"] < 1e6).all()
    assert r.yearly.set_index("year").loc[empty, "estimate"] == 0.0
    assert r.no_index_years == (empty,)
    codes = {x.code for x in r.diagnostics}
    assert "no_index_year" in codes
    if where == "first":   # the base moves to the first year the data can carry, and the result says so
        assert r.base_year == 2011 and idx.loc[2011, "index"] == 1.0 and "base_year_moved" in codes
    else:
        assert r.base_year == 2010
    assert np.isfinite(r.annual_change.estimate) and r.annual_change.lower < r.annual_change.upper
    r.to_dict()   # JSON-ready: NaN becomes None


def test_binomial_year_at_its_maximum_has_no_index():
    rng = np.random.default_rng(4)
    st = np.repeat(np.arange(12), 6)
    yr = np.tile(np.arange(2015, 2021), 12)
    k = rng.binomial(10, expit(1.0 + rng.normal(0, 0.5, 12)[st]))
    d = pd.DataFrame({"station": st, "year": yr, "hits": k, "pins": 10})
    d.loc[d.year == 2020, "hits"] = 10
    r = TrendModel(d, "pin_hits", observation_effect=False).fit(profile=False, indices=True)
    row = r.yearly.set_index("year").loc[2020]
    assert row["estimate"] == 100.0 and row["upper"] == 100.0 and np.isnan(row["lower"])
    assert np.isnan(r.indices.set_index("year").loc[2020, "index"])


def k_of_n(rng, phi, n=25, n_station=40, years=np.arange(2010, 2020), obs_sd=None):
    """k-of-n data with station, site and year effects and extra visit-to-visit variation: beta-binomial
    with dispersion ratio phi = 1 + (n - 1) rho (Var k = phi n p (1 - p)), or logit-normal-binomial."""
    st = np.repeat(np.arange(n_station), len(years))
    yr = np.tile(years, n_station)
    eta = (-0.5 - 0.03 * (yr - years.mean()) + rng.normal(0, 0.6, n_station)[st]
           + rng.normal(0, 0.2, len(years))[yr - years[0]] + rng.normal(0, 0.3, 8)[st % 8])
    if obs_sd is not None:
        k = rng.binomial(n, expit(eta + rng.normal(0, obs_sd, len(st))))
    elif phi == 1:
        k = rng.binomial(n, expit(eta))
    else:
        rho = (phi - 1) / (n - 1)
        p = expit(eta)
        k = rng.binomial(n, rng.beta(p * (1 - rho) / rho, (1 - p) * (1 - rho) / rho))
    return pd.DataFrame({"station": st, "site": st % 8, "year": yr, "occupied": k, "cells": n})


@pytest.mark.parametrize("phi,seed", [(1.0, 1), (1.0, 2), (1.5, 3), (2.0, 4), (4.0, 5)])
def test_overdispersion_diagnostic_fires_at_known_dispersion(phi, seed):
    # beta-binomial Var = n p (1 - p) [1 + (n - 1) rho] (e.g. McCullagh & Nelder 1989, sec. 4.5.1):
    # the Pearson ratio of the binomial fit estimates phi, and the test fires from 1.5, never at 1
    d = k_of_n(np.random.default_rng(seed), phi)
    plain = TrendModel(d, "frequency", observation_effect=False)
    spec, _, _ = plain._spec("linear", False)
    ratio, p = _pearson_test(spec, plain._fit_spec(spec, False))
    assert ratio == pytest.approx(phi, rel=0.2)
    r = plain.fit(profile=False, indices=False, fast=False)
    fired = "overdispersion" in {x.code for x in r.diagnostics}
    assert fired == (phi >= 1.5)
    # by default the observation-level effect comes in exactly where the data show overdispersion
    auto = TrendModel(d, "frequency").fit(profile=False, indices=False, fast=False)
    assert auto.observation_effect == (phi >= 1.5)
    assert ("observation" in auto.random_sd) == (phi >= 1.5)
    if phi >= 1.5:
        assert auto.model_label == "binomial with an observation-level effect"
        assert "observation_effect_added" in {x.code for x in auto.diagnostics}
        assert "overdispersion" not in {x.code for x in auto.diagnostics}
        assert auto.random_sd["observation"] > 0.1
    assert OVERDISPERSION_RATIO < 1.5


def test_logit_normal_binomial_gets_its_observation_effect_back():
    # truth: glmer-style (1 | obs) with SD 0.5 on the logit scale; the fitted SD recovers it
    d = k_of_n(np.random.default_rng(9), None, obs_sd=0.5)
    r = TrendModel(d, "frequency").fit(profile=False, indices=False, fast=False)
    assert r.observation_effect and r.random_sd["observation"] == pytest.approx(0.5, rel=0.25)


def test_presence_never_gets_an_observation_effect():
    d = k_of_n(np.random.default_rng(2), 1.0, n=1).rename(columns={"occupied": "present"}).drop(columns="cells")
    assert not TrendModel(d, "presence").fit(profile=False, indices=False, fast=False).observation_effect
    with pytest.raises(Exception, match="presence"):
        TrendModel(d, "presence", observation_effect=True)


def test_blank_observers_are_a_level_of_their_own(glmm_data):
    d = glmm_data.copy()
    d.loc[d.index[:20], "observer"] = np.nan
    d.loc[d.index[20:25], "observer"] = "  "
    r = TrendModel(d, "count", family="poisson", observer_effect=True, year_random="none").fit(
        profile=False, indices=False, fast=False)
    notes = {x.code: x.message for x in r.diagnostics}
    assert "observer_blank" in notes and "25 of 272" in notes["observer_blank"]
    assert "observer" in r.random_sd
    # the same fit as with the blank cells written as one observer code of their own
    named = glmm_data.copy()
    named.loc[named.index[:25], "observer"] = "(not recorded)"
    same = TrendModel(named, "count", family="poisson", observer_effect=True, year_random="none").fit(
        profile=False, indices=False, fast=False)
    assert r.slope == pytest.approx(same.slope, rel=1e-8) and r.n_obs == same.n_obs == len(d)


def test_fast_path_is_labelled_and_never_what_people_read(glmm_data):
    fast = TrendModel(glmm_data, "count").fit(profile=False, indices=False)
    assert fast.estimator == "joint-mode" and "fast_path" in {x.code for x in fast.diagnostics}
    assert fast.to_dict()["estimator"] == "joint-mode" and "joint-mode" in fast.summary()
    full = TrendModel(glmm_data, "count").fit(profile=True, indices=True)
    assert full.estimator == "ml-laplace" and "fast_path" not in {x.code for x in full.diagnostics}


def test_single_visit_note_counts_years_not_rows(glmm_data):
    d = glmm_data[["station", "site", "year", "count"]].copy()
    # two new stations: one visited twice in one year (a repeat), one once
    extra = pd.DataFrame({"station": ["N1", "N1", "N2"], "site": ["S1", "S1", "S2"], "year": [2015, 2015, 2016],
                          "count": [3, 4, 2]})
    r = TrendModel(pd.concat([d, extra]), "count", family="poisson", year_random="none").fit(
        profile=False, indices=False)
    note = next(x.message for x in r.diagnostics if x.code == "one_visit_stations")
    assert note.startswith("2 station(s) have values from a single year")


def year_effect_data(rng, sd_year=0.3, n_station=100, years=np.arange(2011, 2021)):
    st = np.repeat(np.arange(n_station), len(years))
    yr = np.tile(years, n_station)
    eta = 1.0 + rng.normal(0, 0.5, n_station)[st] + rng.normal(0, sd_year, len(years))[yr - years[0]]
    return pd.DataFrame({"station": st, "site": st % 10, "year": yr, "count": rng.poisson(np.exp(eta))})


def test_a_shared_year_effect_widens_the_slope_interval_several_times():
    # Piepho & Ogutu (2002): with a year effect the slope's information comes from the years.  Their
    # regression of yearly means: se(b1) ~ sd_year / sqrt(sum (t - tbar)^2) = 0.3 / sqrt(82.5) = 0.033,
    # while station-years taken as independent give about 0.006 here (100 stations).
    d = year_effect_data(np.random.default_rng(21))
    with_year = TrendModel(d, "count", family="poisson").fit(profile=False, indices=False, fast=False)
    without = TrendModel(d, "count", family="poisson", year_random="none").fit(profile=False, indices=False,
                                                                                fast=False)
    assert with_year.year_random == "iid" and without.year_random == "none"
    assert with_year.slope_se > 3 * without.slope_se
    assert with_year.slope_se == pytest.approx(0.3 / math.sqrt(82.5), rel=0.35)
    # t reference with n_years - 2 df (containment), used by the Wald interval and the call
    assert with_year.slope_df == 8 and "t" in with_year.df_method
    # scipy.stats.t quantile, times the factor bringing the ML year variance to its REML equivalent,
    # sqrt((G - 1 + k) / (G - 2)) with k in [0, 1] (monitor.trend.model._ml_year_scale)
    q = stats.t.ppf(0.975, 8) * with_year.se_scale
    assert math.sqrt(9 / 8) <= with_year.se_scale <= math.sqrt(10 / 8)
    assert with_year.annual_change.lower == pytest.approx(math.expm1(with_year.slope - q * with_year.slope_se))
    assert with_year.conf_int().loc["year", "lower"] == pytest.approx(with_year.slope - q * with_year.slope_se)
    assert with_year.interval_label == "t, 8 df" and without.interval_label == "normal (z)"
    assert "no_year_effect" in {x.code for x in without.diagnostics}
    out = with_year.to_dict()
    assert out["year_random"] == "iid" and out["slope_df"] == 8 and out["df_method"].startswith("t")


def test_year_effect_options():
    d = year_effect_data(np.random.default_rng(5), n_station=20)
    ar1 = TrendModel(d, "count", family="poisson", year_random="ar1").fit(profile=False, indices=False, fast=False)
    assert ar1.year_random == "ar1" and "year" in ar1.rho and -1 < ar1.rho["year"] < 1
    sy = TrendModel(d, "count", family="poisson", site_by_year=True).fit(profile=False, indices=False, fast=False)
    assert sy.site_by_year and "site_year" in sy.random_sd
    short = d[d.year < 2015]   # 4 years: below the rule, no year effect, and the result says so
    r = TrendModel(short, "count", family="poisson").fit(profile=False, indices=False, fast=False)
    assert r.year_random == "none" and math.isinf(r.slope_df)
    with pytest.raises(Exception, match="year_random"):
        TrendModel(d, "count", year_random="yearly")


def test_profile_interval_uses_the_t_reference():
    d = year_effect_data(np.random.default_rng(8), n_station=15)
    r = TrendModel(d, "count", family="poisson").fit(profile=True, indices=False)
    wald, prof = r.annual_change, r.annual_change_profile
    assert prof is not None
    # with a t reference the profile interval is about as wide as the t-based Wald interval, not the z one
    width = math.log1p(prof.upper) - math.log1p(prof.lower)
    assert width == pytest.approx(math.log1p(wald.upper) - math.log1p(wald.lower), rel=0.25)
    assert width > 1.1 * 2 * 1.96 * r.slope_se


def test_default_year_effect_matches_glmmtmb_and_is_several_times_wider(year_reference):
    # glmmTMB 1.1.5 glmmTMB(count_nb ~ t + (1|site) + (1|station) + (1|fyear), nbinom2) on the invented
    # glmm_year_data.csv (tests/fixtures/trend/reference_year_fits.R): what `monitor trend` fits by default
    d = pd.read_csv(FIXTURES / "glmm_year_data.csv")
    nb = d.drop(columns="count").rename(columns={"count_nb": "count"})
    ref = year_reference["negbin_year"]
    r = TrendModel(nb, "count", family="negbin").fit(profile=False, indices=False, fast=False)
    assert r.year_random == "iid" and r.slope_df == 10
    assert r.slope == pytest.approx(ref["fixef"]["t"], abs=1e-5)
    assert r.slope_se == pytest.approx(ref["se"]["t"], rel=1e-3)
    assert r.random_sd["year"] == pytest.approx(ref["sd"]["fyear"], rel=1e-3)
    no_year = TrendModel(nb, "count", family="negbin", year_random="none").fit(profile=False, indices=False,
                                                                                fast=False)
    assert r.slope_se > 2.2 * no_year.slope_se   # 60 stations, year SD 0.23: about 2.5 times


def test_overdispersed_frequencies_get_glmers_observation_effect_by_default(year_reference):
    # glmmTMB 1.1.5 on overdispersed invented k-of-n data (occupied_od): (1|obs_id) added; the plain
    # binomial's Pearson chi2 from lme4 1.1-31 residuals(type = "pearson") over 651 rows is 1154.9
    d = pd.read_csv(FIXTURES / "glmm_year_data.csv").drop(columns="occupied").rename(
        columns={"occupied_od": "occupied"})
    r = TrendModel(d, "frequency").fit(profile=False, indices=False, fast=False)
    ref = year_reference["binomial_year_obs_tmb"]
    assert r.observation_effect and "observation_effect_added" in {x.code for x in r.diagnostics}
    assert r.slope == pytest.approx(ref["fixef"]["t"], abs=1e-4)
    assert r.slope_se == pytest.approx(ref["se"]["t"], rel=1e-3)
    assert r.random_sd["observation"] == pytest.approx(ref["sd"]["obs_id"], rel=1e-3)
    assert year_reference["binomial_od_year"]["pearson_chi2"] / 651 > OVERDISPERSION_RATIO
