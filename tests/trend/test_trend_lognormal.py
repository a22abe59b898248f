"""The lognormal family (a linear mixed model on log y) against R's lme4 on two real data sets.

References are made by tests/fixtures/trend/reference_lognormal.R (R 4.2.2, lme4 1.1-31,
nlme 3.1-162; versions in the JSON): lme4's sleepstudy (Belenky et al. 2003; reaction time
[ms], Subject -> station, Days -> year) and nlme's Oxboys (Goldstein 1987; height [cm],
Subject -> station, Occasion -> year), each with log(y) ~ t + (1 | Subject) [+ (1 | year)],
t the day or occasion centred at the middle of the series, as the trend model centres years.

The family object of the registry (monitor.families) makes the response (log y) and the fit's
density; the engine fits it.  Tolerances as tests/trend/test_trend_year_reference.py: fixed
effects 1e-4 absolute, SDs, residual SD and standard errors 1e-3 relative (lmer's SEs are
(X' V^-1 X)^-1, as ours for Gaussian models), log-likelihood 1e-3 absolute.
"""

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from monitor.families import family
from monitor.trend.families import Gaussian, density
from monitor.trend.glmm import GlmmSpec, fit_glmm, year_terms

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures" / "trend"
REF = json.loads((FIXTURES / "reference_lognormal_values.json").read_text())
SLEEP = pd.read_csv(FIXTURES / "sleepstudy.csv")
OX = pd.read_csv(FIXTURES / "oxboys.csv")
LOGNORMAL = family("lognormal")

# key: (data, value column, station, year column, year effect?, REML?, R's name of the year effect)
CASES = {
    "sleepstudy_ml": (SLEEP, "Reaction", "Subject", "Days", False, False, None),
    "sleepstudy_year_ml": (SLEEP, "Reaction", "Subject", "Days", True, False, "fDays"),
    "sleepstudy_year_reml": (SLEEP, "Reaction", "Subject", "Days", True, True, "fDays"),
    "oxboys_year_ml": (OX, "height", "Subject", "Occasion", True, False, "fOccasion"),
}


def spec_of(d, value, station, year, year_effect):
    y, adjust = LOGNORMAL.response(d[value].to_numpy(float))
    assert adjust is None
    yr = d[year].to_numpy(float)
    t = yr - (yr.min() + yr.max()) / 2
    st = pd.factorize(d[station].astype(str))[0]
    yi = pd.factorize(d[year], sort=True)[0]
    terms = year_terms(yi, int(yi.max()) + 1, "iid") if year_effect else []
    return GlmmSpec(family=density(LOGNORMAL, y), X=np.column_stack([np.ones(len(d)), t]),
                    x_names=["(Intercept)", "t"], station=st, n_station=int(st.max()) + 1, terms=terms)


def test_fixture_versions():
    assert REF["versions"]["lme4"] == "1.1.31"
    assert REF["versions"]["nlme"] == "3.1.162"
    assert REF["versions"]["R"].startswith("R version 4.2.2")


def test_the_family_is_a_gaussian_model_on_log_y():
    assert LOGNORMAL.gaussian and LOGNORMAL.log_scale and LOGNORMAL.dispersion_name == "residual SD"
    d = density(LOGNORMAL, np.log(SLEEP["Reaction"].to_numpy(float)))
    assert isinstance(d, Gaussian)
    # the engine's log density of log y is the normal density (scipy.stats.norm.logpdf)
    from scipy.stats import norm

    d.dispersion = 0.1
    eta = np.full(len(d.y), 5.6)
    assert d.loglik(eta) == pytest.approx(norm.logpdf(d.y, 5.6, 0.1), rel=1e-12)
    assert LOGNORMAL.check_values(np.array([1.0, 0.0])) is not None
    assert LOGNORMAL.check_values(np.array([1.0, 2.5])) is None


@pytest.mark.parametrize("key", list(CASES))
def test_lognormal_fit_matches_lmer(key):
    data, value, station, year, year_effect, reml, r_year = CASES[key]
    ref = REF[key]   # lme4 1.1-31 lmer(log(y) ~ t + (1 | Subject) [+ (1 | year)], REML = reml)
    f = fit_glmm(spec_of(data, value, station, year, year_effect), reml=reml)
    assert f.converged, f.diagnostics
    assert f.estimator == ("reml-exact" if reml else "ml-exact")
    for i, name in enumerate(["(Intercept)", "t"]):
        assert f.beta[i] == pytest.approx(ref["fixef"][name], abs=1e-4), name
        assert math.sqrt(f.vcov[i, i]) == pytest.approx(ref["se"][name], rel=1e-3), name
    assert f.sd["station"] == pytest.approx(ref["sd"]["Subject"], rel=1e-3)
    if year_effect:
        if ref["sd"][r_year] < 1e-6:   # lmer puts the year SD on zero (a singular fit)
            assert f.sd["year"] < 1e-3 * ref["sigma"]
        else:
            assert f.sd["year"] == pytest.approx(ref["sd"][r_year], rel=1e-3)
    assert f.dispersion == pytest.approx(ref["sigma"], rel=1e-3)
    crit = f.reml_criterion if reml else f.loglik
    assert crit == pytest.approx(ref["loglik"], abs=1e-3)
    # the annual change is exp(b1) - 1: the change of the geometric mean (sleepstudy: +3.4 % a day)
    assert math.expm1(f.beta[1]) == pytest.approx(math.expm1(ref["fixef"]["t"]), abs=1e-4)


def test_trend_model_of_a_positive_measure_matches_lmer_on_oxboys():
    # the whole trend model on nlme's Oxboys as a positive measure (heights in cm): Subject ->
    # station, Occasion -> year; lme4 1.1-31 lmer(log(height) ~ t + (1 | Subject) + (1 | fOccasion),
    # REML = FALSE), t = Occasion - 5 (the trend model centres years at the middle of the series)
    from monitor import columns as C
    from monitor import measures
    from monitor.errors import InputError
    from monitor.trend import TrendModel

    measure = measures.of_kind(measures.KIND_POSITIVE)[0]
    column = measures.get(measure).value_column
    data = pd.DataFrame({C.STATION: OX["Subject"].astype(str), C.YEAR: OX["Occasion"], column: OX["height"]})
    r = TrendModel(data, measure, family="lognormal", site_effect=False).fit(profile=True, indices=True, fast=False)
    ref = REF["oxboys_year_ml"]
    assert r.year_random == "iid" and r.converged
    assert r.slope == pytest.approx(ref["fixef"]["t"], abs=1e-4)
    assert r.params["(Intercept)"] == pytest.approx(ref["fixef"]["(Intercept)"], abs=1e-4)
    assert r.slope_se == pytest.approx(ref["se"]["t"], rel=1e-3)
    assert r.random_sd["station"] == pytest.approx(ref["sd"]["Subject"], rel=1e-3)
    assert r.random_sd["year"] == pytest.approx(ref["sd"]["fOccasion"], rel=1e-3)
    assert r.dispersion == pytest.approx(ref["sigma"], rel=1e-3)
    assert r.loglik == pytest.approx(ref["loglik"], abs=1e-3)
    # the annual change is that of the geometric mean; the line is on the measure's own scale
    assert r.change_scale == "geometric mean" and "geometric mean" in r.change_label
    assert r.annual_change.estimate == pytest.approx(math.expm1(ref["fixef"]["t"]), abs=1e-4)
    assert r.trend_line["fit"].is_monotonic_increasing and r.annual_change_profile is not None
    # the mean over stations and visits: exp(eta + (s_station^2 + sigma^2) / 2) at the middle occasion
    s2 = ref["sd"]["Subject"] ** 2 + ref["sigma"] ** 2
    mid = r.trend_line.set_index("year").loc[5, "fit"]
    assert mid == pytest.approx(math.exp(ref["fixef"]["(Intercept)"] + s2 / 2), rel=1e-3)
    # a height of 0 cannot be modelled on the log scale: refused, naming the column
    bad = data.copy()
    bad.loc[3, column] = 0.0
    with pytest.raises(InputError, match=column):
        TrendModel(bad, measure, family="lognormal")
