"""Simulation check (slow): 95 % Wald intervals of the annual change cover the truth.

For each family, 400 data sets are simulated from known parameters (seeded numpy
Generator) and fitted with the fast path the power analysis uses; the share of
intervals that contain the true annual change exp(b1) - 1 must lie in 93-97 %.

    PYTHONPATH=. python -m pytest tests/trend/test_trend_coverage.py -m slow -s
"""

import numpy as np
import pandas as pd
import pytest
from scipy.special import expit

from monitor.trend import TrendModel

N_REP = 400
TRUE_SLOPE = -0.04


def simulate(family: str, rng: np.random.Generator) -> tuple[pd.DataFrame, str, dict]:
    n_site, per_site, years = 6, 5, np.arange(2010, 2020)
    n_st = n_site * per_site
    st = np.repeat(np.arange(n_st), len(years))
    yr = np.tile(years, n_st)
    site = st // per_site
    keep = rng.random(len(st)) > 0.1          # some visits missed
    st, yr, site = st[keep], yr[keep], site[keep]
    t = yr - 2014.5
    eta = TRUE_SLOPE * t + rng.normal(0, 0.5, n_st)[st] + rng.normal(0, 0.3, n_site)[site]
    d = pd.DataFrame({"station": st, "site": site, "year": yr})
    kw = {}
    if family == "poisson":
        d["count"] = rng.poisson(np.exp(1.2 + eta))
        measure = "count"
    elif family == "poisson-lognormal":
        d["count"] = rng.poisson(np.exp(1.2 + eta + rng.normal(0, 0.4, len(d))))
        measure = "count"
    elif family == "negbin":
        mu = np.exp(1.2 + eta)
        d["count"] = rng.negative_binomial(3.0, 3.0 / (3.0 + mu))
        measure = "count"
    elif family == "binomial":
        d["cells"] = 20
        d["occupied"] = rng.binomial(20, expit(-0.5 + eta))
        measure = "frequency"
    else:  # logit-normal; cover_adjust tiny so the analysed response is the plain logit
        d["cover_pct"] = 100 * expit(-1.0 + eta + rng.normal(0, 0.5, len(d)))
        measure = "cover"
        kw = {"cover_adjust": 1e-9}
    return d, measure, kw


def coverage(family: str, n_rep: int = N_REP, seed: int = 1) -> float:
    rng = np.random.default_rng(seed)
    truth = np.expm1(TRUE_SLOPE)
    hit = 0
    for _ in range(n_rep):
        d, measure, kw = simulate(family, rng)
        # the truth has no year effect: the model without one (the year-effect study is separate)
        r = TrendModel(d, measure, family=family, year_random="none", **kw).fit(profile=False, indices=False)
        hit += r.annual_change.lower <= truth <= r.annual_change.upper
    return hit / n_rep


@pytest.mark.slow
@pytest.mark.parametrize("family", ["poisson", "poisson-lognormal", "negbin", "binomial", "logit-normal"])
def test_wald_interval_coverage(family):
    cov = coverage(family)
    print(f"\n{family}: coverage of the 95 % interval for the annual change = {100 * cov:.1f} % ({N_REP} replicates)")
    assert 0.93 <= cov <= 0.97
