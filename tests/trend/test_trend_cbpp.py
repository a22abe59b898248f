"""lme4's worked example: the cbpp data (contagious bovine pleuropneumonia, Lesnoff et al.
2004), binomial GLMM with herd random intercepts and period as a factor.

We map herd -> station, period -> year (a factor, base period 1), incidence -> occupied,
size -> cells; the model is then exactly glmer(cbind(incidence, size - incidence) ~ period
+ (1 | herd), family = binomial).
"""

import json
from pathlib import Path

import numpy as np
import pytest
from scipy.special import gammaln, xlogy

from monitor.trend import TrendModel


def cbpp_frame(cbpp):
    return cbpp.rename(columns={"herd": "station", "period": "year", "incidence": "occupied", "size": "cells"})


NAMES = {"(Intercept)": "(Intercept)", "year[2]": "period2", "year[3]": "period3", "year[4]": "period4"}


def test_cbpp_laplace_matches_glmer(cbpp, reference):
    r = TrendModel(cbpp_frame(cbpp), "frequency", year_effect="factor", site_effect=False).fit(
        profile=False, indices=True)
    ref = reference["cbpp"]
    # lme4 1.1-31, glmer(cbind(incidence, size - incidence) ~ period + (1 | herd), binomial), Laplace,
    # default settings: it stops about 2e-4 short in the intercept, so 1e-3 here; SEs 2e-2
    # (glmer's finite-difference Hessian puts period2's SE 1.1 % from glmmTMB's exact one)
    for ours, theirs in NAMES.items():
        assert r.params[ours] == pytest.approx(ref["fixef"][theirs], abs=1e-3)
        assert r.bse[ours] == pytest.approx(ref["se"][theirs], rel=2e-2)
    assert r.random_sd["station"] == pytest.approx(ref["sd"]["herd"], rel=2e-3)
    assert r.loglik == pytest.approx(ref["loglik"], abs=1e-3)
    # glmmTMB 1.1.5, the same model (reference_year_fits.R): fixed effects within 1e-4,
    # SEs and SD within 1e-3 relative
    tmb = json.loads((Path(__file__).resolve().parents[1] / "fixtures" / "trend" / "reference_year_values.json")
                     .read_text())["cbpp_factor_tmb"]
    for ours, theirs in NAMES.items():
        assert r.params[ours] == pytest.approx(tmb["fixef"][theirs], abs=1e-4)
        assert r.bse[ours] == pytest.approx(tmb["se"][theirs], rel=1e-3)
    assert r.random_sd["station"] == pytest.approx(tmb["sd"]["herd"], rel=1e-3)
    assert r.loglik == pytest.approx(tmb["loglik"], abs=1e-4)
    # our maximum is at least as high as glmer's (a maximiser must not stop short of it)
    assert r.loglik >= ref["loglik"] - 1e-6
    # published output of that example (lme4 reference manual, ?cbpp / ?glmer; from memory):
    # (Intercept) -1.3983, period2 -0.9919, period3 -1.1282, period4 -1.5797,
    # herd variance 0.4123 (SD 0.6421), logLik -92.0, AIC 194.1
    published = {"(Intercept)": -1.3983, "year[2]": -0.9919, "year[3]": -1.1282, "year[4]": -1.5797}
    for k, v in published.items():
        assert r.params[k] == pytest.approx(v, abs=1e-3)
    assert r.random_sd["station"] ** 2 == pytest.approx(0.4123, abs=1e-3)
    assert r.aic == pytest.approx(194.1, abs=0.05)
    # the yearly indices are exp(period effects) relative to period 1
    idx = r.indices.set_index("year")["index"]
    assert idx[4] == pytest.approx(np.exp(tmb["fixef"]["period4"]), rel=1e-4)


def test_cbpp_agq_matches_glmer_nagq7(cbpp, reference):
    d = cbpp_frame(cbpp)
    r = TrendModel(d, "frequency", year_effect="factor", site_effect=False, method="agq", n_agq=7).fit(
        profile=False, indices=True)
    ref = reference["cbpp_agq7"]
    # lme4 1.1-31, same model with nAGQ = 7
    for ours, theirs in NAMES.items():
        assert r.params[ours] == pytest.approx(ref["fixef"][theirs], abs=1e-4)
        assert r.bse[ours] == pytest.approx(ref["se"][theirs], rel=1e-2)
    assert r.random_sd["station"] == pytest.approx(ref["sd"]["herd"], rel=1e-3)
    # glmer's nAGQ > 1 log-likelihood is relative to the saturated binomial model
    k, n = d["occupied"].to_numpy(float), d["cells"].to_numpy(float)
    sat = float(np.sum(gammaln(n + 1) - gammaln(k + 1) - gammaln(n - k + 1) + xlogy(k, k / n)
                       + xlogy(n - k, (n - k) / n)))
    assert r.loglik - sat == pytest.approx(ref["loglik"], abs=1e-3)
