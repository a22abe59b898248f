"""TrendModel / TrendResult behaviour: API, diagnostics, fast path, station changes."""

import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from monitor.errors import EstimationError, InputError
from monitor.trend import FAMILIES, TrendModel, default_family, station_changes


def simulate(rng, n_station=20, years=range(2010, 2020), slope=-0.05, sd_station=0.5, sd_obs=0.2, n_site=4):
    st = np.repeat(np.arange(n_station), len(years))
    yr = np.tile(np.array(list(years)), n_station)
    site = st % n_site
    eta = 1.5 + slope * (yr - np.mean(list(years))) + rng.normal(0, sd_station, n_station)[st] \
        + rng.normal(0, sd_obs, len(st))
    return pd.DataFrame({"station": [f"Q{i:03d}" for i in st], "site": [f"A{s}" for s in site], "year": yr,
                         "count": rng.poisson(np.exp(eta))})


def test_default_family():
    # the attributes monitor.trend.TrendResult documents
    assert default_family("count") == "poisson-lognormal"
    assert default_family("frequency") == "binomial"
    assert default_family("pin_hits") == "binomial"
    assert default_family("presence") == "binomial"
    assert default_family("cover") == "logit-normal"
    assert FAMILIES == ("poisson", "poisson-lognormal", "negbin", "binomial", "logit-normal", "lognormal")
    with pytest.raises(InputError):
        default_family("biomass")


def test_input_errors(glmm_data):
    with pytest.raises(InputError):
        TrendModel(glmm_data, "count", family="binomial")
    with pytest.raises(InputError):
        TrendModel(glmm_data.drop(columns="count"), "count")
    with pytest.raises(InputError):
        TrendModel(glmm_data.assign(count=-1), "count")
    with pytest.raises(InputError):
        TrendModel(glmm_data, "count", reml=True)
    with pytest.raises(InputError):
        TrendModel(glmm_data, "count", family="poisson", method="agq")  # site effect present
    with pytest.raises(InputError):
        TrendModel(glmm_data.drop(columns="observer"), "count", observer_effect=True)
    with pytest.raises(EstimationError):
        TrendModel(glmm_data[glmm_data.year == 2011], "count").fit()


def test_result_contents_and_json(glmm_data):
    # the model without a year effect (normal reference; the year effect is tested separately)
    r = TrendModel(glmm_data, "count", family="poisson", year_random="none").fit(profile=True, indices=True)
    out = r.to_dict()
    json.dumps(out)  # JSON-ready
    for key in ("measure", "family", "n_obs", "n_stations", "n_sites", "years", "slope", "annual_change",
                "annual_change_profile", "period_change", "random_sd", "loglik", "aic", "call", "call_reason",
                "margin", "indices", "diagnostics"):
        assert key in out
    assert out["years"] == [2011, 2018]
    assert r.n_stations == 40 and r.n_sites == 8 and r.n_obs == len(glmm_data)
    # exp(slope) - 1 and the period change follow from the slope exactly
    assert r.annual_change.estimate == pytest.approx(np.expm1(r.slope), rel=1e-12)
    assert r.period_change.estimate == pytest.approx(np.expm1(7 * r.slope), rel=1e-12)
    assert r.annual_change.lower < r.annual_change.estimate < r.annual_change.upper
    assert r.aic == pytest.approx(-2 * r.loglik + 2 * r.df)
    ci = r.conf_int()
    assert ci.loc["year", "lower"] == pytest.approx(r.slope - 1.959964 * r.slope_se, rel=1e-6)
    assert list(r.indices.columns) == ["year", "index", "lower", "upper"]
    assert list(r.fitted_trend.columns) == ["year", "fit", "lower", "upper"]
    assert r.indices.iloc[0]["index"] == 1.0
    assert (r.fitted_trend["lower"] <= r.fitted_trend["fit"]).all()
    assert "overdispersion" in {d.code for d in r.diagnostics}   # the data are Poisson-lognormal
    assert r.call == "declining"
    assert "annual change" in r.summary()


def test_fast_path_close_to_full(glmm_data):
    full = TrendModel(glmm_data, "count").fit(profile=False, indices=False, fast=False)
    fast = TrendModel(glmm_data, "count").fit(profile=False, indices=False)
    assert fast.annual_change_profile is None and fast.indices.empty
    assert fast.slope == pytest.approx(full.slope, abs=0.1 * full.slope_se)
    assert fast.slope_se == pytest.approx(full.slope_se, rel=0.05)


def test_diagnostics_for_sparse_data():
    rng = np.random.default_rng(3)
    d = simulate(rng, n_station=8, years=range(2015, 2019))
    d = pd.concat([d, pd.DataFrame({"station": ["Q900"], "site": ["A0"], "year": [2016], "count": [4]})])
    d = d[~((d.year == 2017) & (d.station != "Q000"))]
    r = TrendModel(d, "count").fit(profile=False, indices=False)
    codes = {x.code for x in r.diagnostics}
    assert {"one_visit_stations", "low_coverage_years", "few_stations", "few_years"} <= codes
    assert r.call == "unclear" and "station" in r.call_reason


def test_covariates_and_presence():
    rng = np.random.default_rng(11)
    d = simulate(rng, n_station=30)
    d["moist"] = rng.normal(size=len(d))
    d["protocol"] = np.where(d.year >= 2015, "v2", "v1")
    p = 1 / (1 + np.exp(-(-0.3 + 0.8 * d["moist"] - 0.05 * (d.year - 2014.5))))
    d["present"] = (rng.random(len(d)) < p).astype(int)
    r = TrendModel(d, "presence", covariates=("moist", "protocol")).fit(profile=False, indices=False, fast=False)
    assert {"moist", "protocol[v2]", "year"} <= set(r.params.index)
    # against statsmodels 0.15 GLM (binomial): the station SD is small here, so estimates agree loosely
    X = sm.add_constant(np.c_[d.year - 2014.5, d["moist"], (d["protocol"] == "v2").astype(float)])
    glm = sm.GLM(d["present"].to_numpy(float), X, family=sm.families.Binomial()).fit()
    assert r.params["moist"] == pytest.approx(glm.params[2], abs=2 * glm.bse[2])


def test_station_changes_match_per_station_glm(glmm_data):
    # statsmodels 0.15 GLM fitted station by station
    out = station_changes(glmm_data, "count").set_index("station")
    for code in ("S1-02", "S3-04", "S8-05"):
        s = glmm_data[glmm_data.station == code]
        glm = sm.GLM(s["count"].to_numpy(float), sm.add_constant(s["year"].to_numpy(float) - 2014),
                     family=sm.families.Poisson()).fit()
        assert out.loc[code, "annual_change"] == pytest.approx(np.expm1(glm.params[1]), abs=1e-7)
        assert out.loc[code, "n_years"] == s["year"].nunique()
    fr = station_changes(glmm_data, "frequency").set_index("station")
    s = glmm_data[glmm_data.station == "S2-03"]
    glm = sm.GLM(np.c_[s["occupied"], s["cells"] - s["occupied"]].astype(float),
                 sm.add_constant(s["year"].to_numpy(float)), family=sm.families.Binomial()).fit()
    assert fr.loc["S2-03", "annual_change"] == pytest.approx(np.expm1(glm.params[1]), abs=1e-7)
    short = pd.DataFrame({"station": ["a", "a", "b", "b", "b"], "year": [1, 2, 1, 2, 3], "count": [1, 2, 0, 0, 0]})
    sc = station_changes(short, "count").set_index("station")
    assert np.isnan(sc.loc["a", "annual_change"])   # fewer than 3 years
    assert np.isnan(sc.loc["b", "annual_change"])   # all zero: no estimate exists


def test_seeded_simulation_recovers_slope():
    # a known truth: -5 % a year on the log scale, 40 stations x 12 years
    rng = np.random.default_rng(2024)
    d = simulate(rng, n_station=40, years=range(2008, 2020), slope=-0.05)
    r = TrendModel(d, "count").fit(profile=False, indices=False)
    assert abs(r.slope + 0.05) < 3 * r.slope_se
    assert r.annual_change.lower < np.expm1(-0.05) < r.annual_change.upper


def test_no_database_or_cli_imports():
    # pure stage package: importing monitor.trend loads neither SQLAlchemy nor click
    code = "import sys, monitor.trend; print(any(m.split('.')[0] in ('sqlalchemy','sqlmodel','alembic','click') for m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_station_codes_reused_across_sites_are_distinct(glmm_data):
    # the same fit whether station codes are unique or only unique within their site
    d = glmm_data.copy()
    d2 = d.assign(station=d["station"].str.split("-").str[1])  # "01".."05" in every site
    a = TrendModel(d, "count", family="poisson").fit(profile=False, indices=False)
    b = TrendModel(d2, "count", family="poisson").fit(profile=False, indices=False)
    assert b.n_stations == a.n_stations == 40
    assert b.slope == pytest.approx(a.slope, rel=1e-8)
    assert b.loglik == pytest.approx(a.loglik, abs=1e-8)
