"""The year effect through TrendModel: default rule, t reference, profile, estimator labels, convergence flag."""

import json
import math
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm, t

import monitor.trend.glmm as engine
from monitor.trend import TrendModel
from monitor.trend.glmm import YEAR_EFFECT_MIN_YEARS, fit_glmm

sys.path.insert(0, str(Path(__file__).parent))
from yearfit_helpers import spec_from_frame  # noqa: E402

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures" / "trend"
REF = json.loads((FIXTURES / "reference_year_values.json").read_text())
YEAR = pd.read_csv(FIXTURES / "glmm_year_data.csv")


def nb_frame():
    return YEAR.drop(columns="count").rename(columns={"count_nb": "count"})


def reml_equivalent_scale(r, n_years=12, df=10):
    """sqrt((G - 1 + k) / df) with k = S_xx var(b1) / (G var(level at the mean year)), from the fit's
    covariance (the rule of monitor.trend.model._ml_year_scale, written out again here)."""
    V = r.vcov
    t_ = np.arange(n_years) - (n_years - 1) / 2     # 12 consecutive years, centred
    level = V.loc["(Intercept)", "(Intercept)"]      # the mean year is the centre
    k = float(np.sum(t_ ** 2)) * V.loc["year", "year"] / (n_years * level)
    assert 0 < k < 1
    return math.sqrt((n_years - 1 + k) / df)


def test_default_year_effect_rule():
    assert YEAR_EFFECT_MIN_YEARS == 5
    d = nb_frame()
    assert TrendModel(d, "count", family="negbin").year_random == "iid"          # 12 years
    short = d[d["year"] <= 2013]                                                 # 4 years
    assert TrendModel(short, "count", family="negbin").year_random == "none"
    assert TrendModel(d[d["year"] <= 2014], "count", family="negbin").year_random == "iid"  # 5 years
    assert TrendModel(d, "count", family="negbin", year_random="none").year_random == "none"


def test_trend_with_year_effect_uses_t_reference():
    r = TrendModel(nb_frame(), "count", family="negbin").fit(profile=False, indices=False, fast=False)
    ref = REF["negbin_year"]
    # glmmTMB 1.1.5 glmmTMB(count_nb ~ t + (1|site) + (1|station) + (1|fyear), nbinom2)
    assert r.slope == pytest.approx(ref["fixef"]["t"], abs=1e-4)
    assert r.slope_se == pytest.approx(ref["se"]["t"], rel=1e-3)
    assert r.random_sd["year"] == pytest.approx(ref["sd"]["fyear"], rel=1e-3)
    assert r.slope_df == 10 and "containment" in r.df_method and r.estimator == "ml-laplace"
    # scipy.stats.t, times the factor bringing the ML year variance to its REML equivalent
    # (monitor.trend.model._ml_year_scale; 12 years with data, 10 between-year df)
    assert r.se_scale == pytest.approx(reml_equivalent_scale(r), rel=1e-12)
    assert math.sqrt(11 / 10) < r.se_scale < math.sqrt(12 / 10)
    q = t.ppf(0.975, 10) * r.se_scale
    assert r.annual_change.lower == pytest.approx(math.expm1(r.slope - q * r.slope_se), rel=1e-12)
    assert r.annual_change.upper == pytest.approx(math.expm1(r.slope + q * r.slope_se), rel=1e-12)
    out = r.to_dict()
    assert out["slope_df"] == 10 and out["year_random"] == "iid" and out["estimator"] == "ml-laplace"
    # without the year effect the reference is normal
    r0 = TrendModel(nb_frame(), "count", family="negbin", year_random="none").fit(profile=False, indices=False,
                                                                                   fast=False)
    assert math.isinf(r0.slope_df) and r0.df_method == "z"
    assert r0.annual_change.upper == pytest.approx(math.expm1(r0.slope + norm.ppf(0.975) * r0.slope_se), rel=1e-12)
    # ignoring the year effect understates the slope's SE on these data (simulated with one)
    assert r.slope_se > 1.5 * r0.slope_se


def test_conf_int_and_frame_use_the_reference_of_the_slope_interval():
    # The fixed-effect table and conf_int() use the reference of the Wald interval and call:
    # t with the between-year (containment) df, 12 years - 2 = 10, quantile from scipy.stats.t,
    # and the ML standard error times the REML-equivalent factor; estimates and SEs against glmmTMB
    # 1.1.5 glmmTMB(count_nb ~ t + (1|site) + (1|station) + (1|fyear), nbinom2)
    r = TrendModel(nb_frame(), "count", family="negbin").fit(profile=False, indices=False, fast=False)
    ref = REF["negbin_year"]
    scale = reml_equivalent_scale(r)
    q = t.ppf(0.975, 10) * scale
    ci, frame = r.conf_int(), r.to_frame()
    for ours, theirs in (("year", "t"), ("(Intercept)", "(Intercept)")):
        est, se = ref["fixef"][theirs], ref["se"][theirs]
        assert ci.loc[ours, "lower"] == pytest.approx(est - q * se, abs=2e-4), ours
        assert ci.loc[ours, "upper"] == pytest.approx(est + q * se, abs=2e-4), ours
        assert frame.loc[ours, "df"] == 10 and frame.loc[ours, "se_scale"] == pytest.approx(scale)
        assert frame.loc[ours, "reference"] == f"t, 10 df, SE x {scale:.4g}"
    # the same bounds as the annual change (exp(b1) - 1) that the call reads
    assert math.expm1(ci.loc["year", "lower"]) == pytest.approx(r.annual_change.lower, rel=1e-12)
    assert math.expm1(ci.loc["year", "upper"]) == pytest.approx(r.annual_change.upper, rel=1e-12)
    assert list(frame.columns) == ["estimate", "se", "lower", "upper", "df", "se_scale", "reference"]
    # 90 % intervals take scipy's 0.95 quantile
    assert r.conf_int(0.10).loc["year", "upper"] == pytest.approx(
        r.slope + t.ppf(0.95, 10) * scale * r.slope_se, rel=1e-12)
    # a covariate that varies within years keeps the normal reference, unscaled
    rng = np.random.default_rng(3)
    d = nb_frame().assign(wet=lambda x: rng.normal(0, 1, len(x)))
    rc = TrendModel(d, "count", family="negbin", covariates=["wet"]).fit(profile=False, indices=False, fast=False)
    fc = rc.to_frame()
    assert math.isinf(fc.loc["wet", "df"]) and fc.loc["wet", "reference"] == "normal (z)"
    assert rc.conf_int().loc["wet", "lower"] == pytest.approx(
        rc.params["wet"] - norm.ppf(0.975) * rc.bse["wet"], rel=1e-12)
    assert fc.loc["year", "df"] == 10


def test_conf_int_of_reml_and_ml_cover_against_lmer():
    # lme4 1.1-31 lmer(z ~ t + (1|site) + (1|station) + (1|fyear)), REML and ML: the REML interval is
    # estimate -/+ t(0.975, 10) x its SE (no scaling); the ML fit's SE times its factor is lmer's REML
    # SE of the slope (the factor's purpose), here on unbalanced data (651 of 720 station-years)
    cover = YEAR.assign(cover_pct=100 / (1 + np.exp(-YEAR["z"])))
    reml_se = REF["gaussian_year_reml"]["se"]["t"]
    ml = TrendModel(cover, "cover").fit(profile=False, indices=False, fast=False)
    assert ml.slope_se == pytest.approx(REF["gaussian_year_ml"]["se"]["t"], rel=1e-3)
    assert ml.slope_se * ml.se_scale == pytest.approx(reml_se, rel=1e-3)
    # ...which the old factor sqrt(G / (G - 2)) missed by 3 %
    assert abs(ml.slope_se * math.sqrt(12 / 10) / reml_se - 1) > 0.03
    for reml, key in ((True, "gaussian_year_reml"), (False, "gaussian_year_ml")):
        r = TrendModel(cover, "cover", reml=reml).fit(profile=False, indices=False, fast=False) if reml else ml
        ref = REF[key]
        ci = r.conf_int()
        q = t.ppf(0.975, 10) * (1.0 if reml else r.se_scale)
        for ours, theirs in (("year", "t"), ("(Intercept)", "(Intercept)")):
            est, se = ref["fixef"][theirs], ref["se"][theirs]
            # z in the fixture is rounded to 6 decimals before the logistic: 1e-4 on the estimates
            assert ci.loc[ours, "lower"] == pytest.approx(est - q * se, abs=2e-4), (key, ours)
            assert ci.loc[ours, "upper"] == pytest.approx(est + q * se, abs=2e-4), (key, ours)
        assert r.to_frame().loc["year", "reference"] == ("t, 10 df" if reml else f"t, 10 df, SE x {r.se_scale:.4g}")
    # the ML slope interval is lmer's REML interval (to its estimate's and SE's tolerances)
    est = REF["gaussian_year_reml"]["fixef"]["t"]
    assert ml.conf_int().loc["year", "lower"] == pytest.approx(est - t.ppf(0.975, 10) * reml_se, abs=2e-4)
    # without a year effect: the normal reference everywhere
    r0 = TrendModel(cover, "cover", year_random="none").fit(profile=False, indices=False, fast=False)
    f0 = r0.to_frame()
    assert (f0["reference"] == "normal (z)").all() and (f0["se_scale"] == 1.0).all()
    assert r0.conf_int().loc["year", "lower"] == pytest.approx(r0.slope - norm.ppf(0.975) * r0.slope_se, rel=1e-12)


def test_profile_interval_uses_t_quantile():
    m = TrendModel(YEAR, "frequency")   # occupied of 20 cells, binomial with a year effect
    r = m.fit(profile=True, indices=False)
    q = t.ppf(0.975, r.slope_df) * r.se_scale   # the Wald interval's multiplier (see the test above)
    assert math.sqrt((r.n_years - 1) / r.slope_df) <= r.se_scale <= math.sqrt(r.n_years / r.slope_df)
    lo, hi = np.log1p(r.annual_change_profile.lower), np.log1p(r.annual_change_profile.upper)
    # independent check: refit with the slope fixed at each bound (as an offset); the
    # likelihood-ratio statistic there is the square of the t quantile
    spec, _, _ = m._spec("linear")
    full = fit_glmm(spec)
    j = spec.x_names.index("year")
    for b in (lo, hi):
        sp = replace(spec, family=m._response()[0], X=spec.X[:, [0]], x_names=["(Intercept)"], offset=b * spec.X[:, j])
        dev = 2 * (full.loglik - fit_glmm(sp).loglik)
        assert math.sqrt(dev) == pytest.approx(q, abs=5e-4)
    assert lo < r.slope < hi


def test_fast_path_is_labelled_joint_mode():
    fast = TrendModel(nb_frame(), "count", family="negbin").fit(profile=False, indices=False)
    full = TrendModel(nb_frame(), "count", family="negbin").fit(profile=False, indices=False, fast=False)
    assert fast.estimator == "joint-mode" and full.estimator == "ml-laplace"
    cover = TrendModel(YEAR.assign(cover_pct=100 / (1 + np.exp(-YEAR["z"]))), "cover").fit(profile=False, indices=False)
    assert cover.estimator == "ml-exact"   # the Gaussian model is exact ML on either path


def test_ar1_and_site_by_year_through_the_model():
    d = YEAR.drop(columns="count").rename(columns={"count_sy": "count"})
    r = TrendModel(d, "count", family="negbin", site_by_year=True).fit(profile=False, indices=False, fast=False)
    ref = REF["negbin_site_year"]
    # glmmTMB 1.1.5 (count_sy ~ t + (1|site) + (1|station) + (1|fyear) + (1|site:fyear), nbinom2)
    assert r.slope == pytest.approx(ref["fixef"]["t"], abs=1e-4)
    assert r.random_sd["site_year"] == pytest.approx(ref["sd"]["site:fyear"], rel=1e-3)
    r = TrendModel(nb_frame(), "count", family="negbin", year_random="ar1").fit(profile=False, indices=False,
                                                                                 fast=False)
    # glmmTMB 1.1.5 (count_nb ~ t + (1|site) + (1|station) + ar1(fyear + 0 | one), nbinom2)
    assert r.slope == pytest.approx(REF["negbin_year_ar1"]["fixef"]["t"], abs=1e-4)
    assert r.random_sd["year"] == pytest.approx(REF["negbin_year_ar1"]["sd"]["one"], rel=1e-3)


def test_year_factor_model_has_no_random_year():
    m = TrendModel(nb_frame(), "count", family="negbin")
    spec, _, _ = m._spec("factor")
    assert "year" not in spec.sd_names()


# ---------------------------------------------------------------- convergence flag
def _stopping_early(monkeypatch, max_iter):
    real = engine._newton_bounded

    def capped(*a, **kw):
        kw["max_iter"] = min(kw.get("max_iter", 60), max_iter)
        res = real(*a, **kw)
        res.success, res.message = False, "iteration limit"
        return res

    monkeypatch.setattr(engine, "_newton_bounded", capped)


def test_converged_judged_by_gradient_not_by_message(monkeypatch):
    # cbpp (lme4 1.1-31) with period crossed: the period SD sits on zero at the optimum.
    # Even when the search reports "iteration limit" at the optimum, the flag is set from the
    # gradient there.
    cb = pd.read_csv(FIXTURES / "cbpp.csv").assign(t=lambda x: x["period"] - 2.5)
    spec = spec_from_frame(cb, "binomial", "incidence", ["t"], "herd", year="period", trials="size")
    ok = fit_glmm(spec)
    assert ok.converged and ok.sd["year"] == 0.0
    _stopping_early(monkeypatch, 60)
    f = fit_glmm(spec_from_frame(cb, "binomial", "incidence", ["t"], "herd", year="period", trials="size"))
    assert f.converged
    assert f.max_gradient < engine.GRADIENT_TOL
    assert "not_converged" not in {x.code for x in f.diagnostics}
    assert f.beta[1] == pytest.approx(ok.beta[1], abs=1e-6)


def test_not_converged_when_the_gradient_is_large(monkeypatch):
    _stopping_early(monkeypatch, 1)
    spec = spec_from_frame(YEAR, "negbin", "count_nb", ["t"], "station", site="site", year="year")
    f = fit_glmm(spec)
    assert not f.converged
    assert f.max_gradient > engine.GRADIENT_TOL
    msg = [x.message for x in f.diagnostics if x.code == "not_converged"][0]
    assert "still changes by" in msg and "iteration limit" in msg


def test_lbfgs_verdict_is_computed_from_the_numbers():
    # f(x) = (x0 - 2)^2 + 10 (x1 + 1)^2 on the box [-1, 1]^2: the minimum is (1, -1), on two
    # bounds, where the projected gradient is zero (analytic).  With one iteration the search
    # stops short and says so from its projected gradient, not from scipy's message.
    def f(x):
        return (x[0] - 2.0) ** 2 + 10.0 * (x[1] + 1.0) ** 2

    box = [(-1.0, 1.0), (-1.0, 1.0)]
    res = engine._bounded_minimize(f, np.array([0.0, 0.5]), box, np.full(2, 1e-6))
    assert res.success and res.x == pytest.approx([1.0, -1.0], abs=1e-8)
    short = engine._bounded_minimize(lambda x: (x[0] - 0.3) ** 2 + 100 * (x[1] - x[0] ** 2) ** 2,
                                     np.array([-0.9, 0.9]), box, np.full(2, 1e-6), maxiter=1)
    assert not short.success and "projected gradient" in short.message


def test_tuning_constants_are_named_and_the_old_literals_gone():
    # every tuning value of the optimiser is a module-level constant (the constants' comments say why)
    import inspect

    for name in ("PIRLS_DECREMENT_TOL", "STAGE1_NEWTON_MAX_PARAMS", "STAGE2_TOL", "SNAP_LOG_WIDTH", "GRADIENT_TOL",
                 "NEWTON_MAX_DIM", "START_SD", "EIGEN_FLOOR"):
        assert isinstance(getattr(engine, name), float | int)
    body = inspect.getsource(engine.fit_glmm) + inspect.getsource(engine.LaplaceEngine.pirls)
    for literal in ("1e-", "0.5", "5.0", "range(3", "range(4"):
        assert literal not in body.split('"""')[-1], literal
    assert len(inspect.getsource(engine.fit_glmm).splitlines()) < 90
    assert len(inspect.getsource(engine.LaplaceEngine.pirls).splitlines()) < 60


@pytest.mark.parametrize("family,y,olre", [("negbin", "count_sy", False), ("poisson", "count", True),
                                           ("binomial", "occupied_od", True)])
def test_site_by_year_elimination_equals_the_dense_block(family, y, olre):
    # the site-by-year cells are eliminated site by site after the stations; the same model
    # with the cells in the dense block (exact, slower) must give the same Laplace
    # log-likelihood and modes at any parameter value
    kw = {"trials": "cells"} if family == "binomial" else {}
    blocked = spec_from_frame(YEAR, family, y, ["t"], "station", site="site", year="year", site_by_year=True,
                              olre=olre, **kw)
    dense = replace(blocked, terms=[replace(t, group_size=None) for t in blocked.terms])
    eb, ed = engine.LaplaceEngine(blocked), engine.LaplaceEngine(dense)
    assert eb.cell is not None and ed.cell is None
    rng = np.random.default_rng(3)
    for _ in range(3):
        phi = np.log(rng.uniform(0.1, 0.8, eb.n_phi))
        beta = np.array([1.0, -0.02]) + rng.normal(0, 0.1, 2)
        assert eb.loglik_beta(phi, beta) == pytest.approx(ed.loglik_beta(phi, beta), abs=1e-8)
        np.testing.assert_allclose(eb.u_st, ed.u_st, atol=1e-7)
        assert eb.loglik_profiled(phi) == pytest.approx(ed.loglik_profiled(phi), abs=1e-8)
        np.testing.assert_allclose(eb.beta, ed.beta, atol=1e-7)
