"""The year-level AR(1) correction (monitor/trend/year_level.py) against nlme::gls and by simulation."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import minimize_scalar
from scipy.stats import t as t_dist

from monitor.trend.year_level import _profile, year_level_ar1

REF = json.loads((Path(__file__).parents[1] / "fixtures" / "trend" / "reference_year_level.json").read_text())


@pytest.mark.parametrize("series", ["whole", "first15"])
@pytest.mark.parametrize("reml", [True, False])
def test_profile_likelihood_matches_nlme_gls_with_ar1_errors(series, reml):
    # R 4.2.2, nlme 3.1-162: gls(level ~ t, correlation = corAR1(form = ~ year), method = "REML" / "ML")
    # on R's LakeHuron series (tests/fixtures/trend/reference_year_level.R).  With no sampling
    # variance (V = 0) our year-level model is that model: the same maximum, slope and SE.
    data = REF["data"][series]
    ref = REF["fits"][f"{series}_{'reml' if reml else 'ml'}"]
    yr = np.array(data["year"], float)
    a = np.array(data["level"], float)
    t = yr - (yr.min() + yr.max()) / 2
    X = np.column_stack([np.ones(len(t)), t])
    lag = np.abs(np.subtract.outer(t, t))
    V = np.zeros((len(t), len(t)))
    best = minimize_scalar(lambda r: -_profile(a, X, V, lag, r, reml)[0], bounds=(-0.99, 0.99), method="bounded",
                           options={"xatol": 1e-9})
    ll, slope, var, log_sd = _profile(a, X, V, lag, float(best.x), reml)
    assert best.x == pytest.approx(ref["rho"], abs=2e-4)
    assert math.exp(log_sd) == pytest.approx(ref["sigma"], rel=2e-4)
    assert slope == pytest.approx(ref["slope"], abs=1e-5)
    # nlme's ML covariance scales sigma^2 by N / (N - p) (the ratio of these SEs is exactly that)
    n_adj = 1.0 if reml else math.sqrt((len(t) - 2) / len(t))
    assert math.sqrt(var) == pytest.approx(ref["se"] * n_adj, rel=5e-4)


def test_correction_is_at_least_the_reml_widening_and_grows_when_the_correlation_is_poorly_known():
    # nlme (reference above): on LakeHuron's first 15 years the correlation is poorly known (ML 0.40,
    # REML 0.71); on all 98 years it is pinned down (ML 0.78, REML 0.82).  The integrated SE is at
    # least nlme's REML SE (it adds the uncertainty of rho), and the year-level ML plug-in is nlme's
    # ML fit; the short series needs the larger factor.
    out = {}
    for name in ("first15", "whole"):
        d = REF["data"][name]
        yr = np.array(d["year"], float)
        t = yr - (yr.min() + yr.max()) / 2
        out[name] = r = year_level_ar1(t, np.array(d["level"], float), np.zeros((len(t), len(t))))
        assert r.rho_ml == pytest.approx(REF["fits"][f"{name}_ml"]["rho"], abs=1e-3)
        assert r.se_ml == pytest.approx(REF["fits"][f"{name}_ml"]["se"] * math.sqrt((len(t) - 2) / len(t)), rel=2e-3)
        assert r.se_integrated >= 0.99 * REF["fits"][f"{name}_reml"]["se"]
        assert r.factor == pytest.approx(r.se_integrated / r.se_ml)
    assert out["first15"].factor > out["whole"].factor > 1.0


def test_too_few_years_are_refused():
    with pytest.raises(ValueError, match="at least 4"):
        year_level_ar1(np.arange(3.0), np.zeros(3), np.zeros((3, 3)))


@pytest.mark.slow
def test_false_calls_at_the_year_level_are_near_or_below_five_percent():
    # simulation (invented truth): 15 years, AR(1) rho 0.4, year SD 0.25, within-year SD 0.05, no trend;
    # the ML plug-in t interval excludes zero far too often (about 16 %); the corrected one must not
    # exceed 5 % by more than 3 Monte-Carlo SE over 200 series
    rng = np.random.default_rng(20261202)
    G, rho, sd, s, n = 15, 0.4, 0.25, 0.05, 200
    t = np.arange(G) - (G - 1) / 2
    V = np.eye(G) * s * s
    q = t_dist.ppf(0.975, G - 2)
    plug = corrected = 0
    for _ in range(n):
        w = np.empty(G)
        w[0] = rng.normal(0, sd)
        for g in range(1, G):
            w[g] = rho * w[g - 1] + rng.normal(0, sd * math.sqrt(1 - rho * rho))
        a = w + rng.normal(0, s, G)
        r = year_level_ar1(t, a, V)
        X = np.column_stack([np.ones(G), t])
        _, b1, var, _ = _profile(a, X, V, np.abs(np.subtract.outer(t, t)), r.rho_ml, False)
        plug += abs(b1) / math.sqrt(var) > q
        corrected += abs(b1) / (math.sqrt(var) * r.factor) > q
    assert plug / n > 0.08
    assert corrected / n <= 0.05 + 3 * math.sqrt(0.05 * 0.95 / n)
