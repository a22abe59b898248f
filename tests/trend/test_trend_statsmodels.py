"""Our engine against statsmodels 0.15 (GLM, discrete NB2, MixedLM)."""

import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf

from monitor.trend import TrendModel, logit_cover
from monitor.trend.families import Binomial, Gaussian, NegativeBinomial, Poisson
from monitor.trend.glmm import LOG_SD_MIN, GlmmSpec, LaplaceEngine, Term, _conditional_vcov


def engine_at_zero_variance(glmm_data, family, dispersion=None):
    """Our Laplace log-likelihood with the station and site SDs at 1e-5, beta at its mode."""
    st = pd.factorize(glmm_data["station"])[0]
    si = pd.factorize(glmm_data["site"])[0]
    X = np.c_[np.ones(len(glmm_data)), glmm_data["year"] - 2014.5]
    spec = GlmmSpec(family=family, X=X, x_names=["(Intercept)", "year"], station=st, n_station=st.max() + 1,
                    terms=[Term("site", si, si.max() + 1)])
    eng = LaplaceEngine(spec)
    phi = [LOG_SD_MIN, LOG_SD_MIN] + ([np.log(dispersion)] if dispersion is not None else [])
    ll = eng.loglik_profiled(np.array(phi))
    return ll, eng.beta.copy(), _conditional_vcov(eng.last_factor, eng), X


@pytest.mark.parametrize("kind", ["poisson", "binomial"])
def test_glm_limit_matches_statsmodels_glm(glmm_data, kind):
    # statsmodels 0.15 GLM: as the random-effect variances go to zero the GLMM becomes the GLM
    if kind == "poisson":
        fam = Poisson(glmm_data["count"])
        ll, beta, vcov, X = engine_at_zero_variance(glmm_data, fam)
        glm = sm.GLM(glmm_data["count"].to_numpy(float), X, family=sm.families.Poisson()).fit()
    else:
        fam = Binomial(glmm_data["occupied"], glmm_data["cells"])
        ll, beta, vcov, X = engine_at_zero_variance(glmm_data, fam)
        k, n = glmm_data["occupied"].to_numpy(float), glmm_data["cells"].to_numpy(float)
        glm = sm.GLM(np.c_[k, n - k], X, family=sm.families.Binomial()).fit()
    np.testing.assert_allclose(beta, glm.params, atol=1e-6)
    np.testing.assert_allclose(np.sqrt(np.diag(vcov)), glm.bse, rtol=1e-4)
    assert ll == pytest.approx(glm.llf, abs=1e-3)


def test_glm_limit_matches_statsmodels_ols(glmm_data):
    # statsmodels 0.15 OLS (Gaussian GLM): beta, and the log-likelihood at the ML sigma
    z, _ = logit_cover(glmm_data["cover_pct"].to_numpy())
    X = np.c_[np.ones(len(z)), glmm_data["year"] - 2014.5]
    ols = sm.OLS(z, X).fit()
    sigma = np.sqrt(ols.ssr / len(z))
    fam = Gaussian(z)
    ll, beta, vcov, _ = engine_at_zero_variance(glmm_data, fam, dispersion=sigma)
    np.testing.assert_allclose(beta, ols.params, atol=1e-6)
    assert ll == pytest.approx(ols.llf, abs=1e-3)


def test_glm_limit_matches_statsmodels_nb2(glmm_data):
    # statsmodels 0.15 discrete NegativeBinomial (NB2) maximum likelihood: at its alpha,
    # our zero-variance GLMM has the same beta and log-likelihood (size theta = 1 / alpha)
    y = glmm_data["count_nb"].to_numpy(float)
    X = np.c_[np.ones(len(y)), glmm_data["year"] - 2014.5]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        nb = sm.NegativeBinomial(y, X, loglike_method="nb2").fit(disp=0, maxiter=200, method="bfgs", gtol=1e-10)
    alpha = nb.params[-1]
    ll, beta, _, _ = engine_at_zero_variance(glmm_data, NegativeBinomial(y), dispersion=1 / alpha)
    np.testing.assert_allclose(beta, nb.params[:2], atol=1e-5)
    assert ll == pytest.approx(nb.llf, abs=1e-3)


def test_trend_model_goes_to_glm_when_no_station_variation():
    # data simulated with no random effects (statsmodels 0.15 GLM as the reference)
    rng = np.random.default_rng(7)
    st = np.repeat(np.arange(30), 8)
    yr = np.tile(np.arange(2001, 2009), 30)
    y = rng.poisson(np.exp(1.0 - 0.05 * (yr - 2004.5)))
    d = pd.DataFrame({"station": st, "year": yr, "count": y})
    r = TrendModel(d, "count", family="poisson", year_random="none").fit(profile=False, indices=False, fast=False)
    glm = sm.GLM(y.astype(float), np.c_[np.ones(len(y)), yr - 2004.5], family=sm.families.Poisson()).fit()
    # the station SD goes to its bound, is reported as 0 (as lme4 reports a singular
    # fit) and flagged, and the fit is then statsmodels' GLM: slope, SE and log-likelihood
    assert r.random_sd["station"] == 0.0
    assert "variance_at_bound" in {x.code for x in r.diagnostics}
    assert r.converged
    assert r.slope == pytest.approx(glm.params[1], abs=1e-6)
    assert r.slope_se == pytest.approx(glm.bse[1], rel=1e-3)
    assert r.loglik == pytest.approx(glm.llf, abs=1e-4)


@pytest.mark.parametrize("reml", [False, True])
def test_cover_model_matches_mixedlm(glmm_data, reml):
    # statsmodels 0.15 MixedLM: site intercept + station-within-site variance component,
    # i.e. the same nested model as ours, by ML and by REML
    d = glmm_data.copy()
    d["z"], _ = logit_cover(d["cover_pct"].to_numpy())
    d["t"] = d["year"] - 2014.5
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        f = smf.mixedlm("z ~ t", d, groups="site", re_formula="1",
                        vc_formula={"station": "0 + C(station)"}).fit(reml=reml, method=["lbfgs"])
    r = TrendModel(d, "cover", reml=reml, year_random="none").fit(profile=False, indices=False)
    np.testing.assert_allclose(r.params.to_numpy(), f.fe_params.to_numpy(), atol=1e-5)
    np.testing.assert_allclose(r.bse.to_numpy(), f.bse_fe.to_numpy(), rtol=1e-3)
    assert r.random_sd["site"] == pytest.approx(float(np.sqrt(f.cov_re.iloc[0, 0])), rel=1e-3)
    assert r.random_sd["station"] == pytest.approx(float(np.sqrt(f.vcomp[0])), rel=1e-3)
    assert r.dispersion == pytest.approx(float(np.sqrt(f.scale)), rel=1e-4)
    assert r.loglik == pytest.approx(f.llf, abs=1e-4)
