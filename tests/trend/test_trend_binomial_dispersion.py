"""Binomial fits with and without an observation-level effect: the Pearson statistic the
overdispersion diagnostic reads, at several dispersion ratios (simulated, seeded data).

The engine's Pearson statistic itself is checked against lme4's residuals(type = "pearson")
in test_trend_year_reference.py; here: does it move with the overdispersion as it should?
Reference: the exact dispersion ratio of the simulated truth, mean over observations of
Var k_i / (n m_i (1 - m_i)) with m_i = E p_i, Var k_i = n E[p_i (1 - p_i)] + n^2 Var p_i
(the law of total variance; Williams 1982, Appl. Statist. 31:144-148), the expectations
over the observation effect by Gauss-Hermite quadrature (numpy.polynomial.hermite_e).
The fitted (conditional) ratio divides by n - parameters, not counting the effective number
of fitted random effects, so it runs about 10 % low; the window allows for that.
"""

import numpy as np
import pandas as pd
import pytest
from scipy.special import expit

from monitor.trend.families import Binomial
from monitor.trend.glmm import GlmmSpec, fit_glmm, year_terms

N_TRIALS = 20


def simulate(sd_obs, seed=11, n_station=40, n_year=12):
    rng = np.random.default_rng(seed)
    st = np.repeat(np.arange(n_station), n_year)
    yi = np.tile(np.arange(n_year), n_station)
    t = yi - (n_year - 1) / 2
    eta = -0.3 + 0.03 * t + rng.normal(0, 0.5, n_station)[st] + rng.normal(0, 0.2, n_year)[yi]
    p = expit(eta + rng.normal(0, 1, len(st)) * sd_obs)
    k = rng.binomial(N_TRIALS, p)
    return pd.DataFrame({"st": st, "yi": yi, "t": t, "k": k, "p": expit(eta)})


def fit(d, olre):
    spec = GlmmSpec(family=Binomial(d["k"].to_numpy(float), np.full(len(d), float(N_TRIALS))),
                    X=np.c_[np.ones(len(d)), d["t"]], x_names=["(Intercept)", "t"], station=d["st"].to_numpy(),
                    n_station=int(d["st"].max()) + 1, terms=year_terms(d["yi"].to_numpy(), int(d["yi"].max()) + 1),
                    olre=olre)
    return fit_glmm(spec)


def oracle_ratio(d, sd_obs):
    x, w = np.polynomial.hermite_e.hermegauss(40)
    w = w / w.sum()
    P = expit(np.log(d["p"] / (1 - d["p"])).to_numpy()[:, None] + sd_obs * x[None, :])
    m = P @ w
    var = N_TRIALS * (P * (1 - P)) @ w + N_TRIALS ** 2 * ((P - m[:, None]) ** 2) @ w
    return float(np.mean(var / (N_TRIALS * m * (1 - m))))


@pytest.mark.parametrize("sd_obs", [0.0, 0.3, 0.6, 1.0])
def test_pearson_ratio_follows_the_overdispersion(sd_obs):
    fitted, truth = [], []
    for seed in (11, 12, 13):
        d = simulate(sd_obs, seed)
        f = fit(d, olre=False)
        fitted.append(f.pearson_chi2 / f.resid_df)
        truth.append(oracle_ratio(d, sd_obs))
    assert 0.8 * np.mean(truth) < np.mean(fitted) < 1.05 * np.mean(truth)
    # the model with the observation-level effect recovers its SD (binomial with (1|obs), as glmer)
    g = fit(d, olre=True)
    assert g.converged
    assert g.sd["observation"] == pytest.approx(sd_obs, abs=0.12)
    if sd_obs >= 0.3:
        # and it widens the slope's interval where the data need it
        assert np.sqrt(g.vcov[1, 1]) > np.sqrt(f.vcov[1, 1])
