"""Our GLMM fits against R's lme4 and glmmTMB on the same invented data.

Reference values: tests/fixtures/trend/reference_values.json, written by
tests/fixtures/trend/reference_fits.R with R 4.2.2, lme4 1.1-31, glmmTMB 1.1.5
(the versions are recorded in the file and checked below).
Tolerances: fixed effects within 1e-4 absolute; random-effect SDs and dispersion within
1e-3 relative; standard errors within 1e-3 relative of glmmTMB and lmer, within 1e-2 of
glmer (whose Hessian is by finite differences); log-likelihood within 1e-3.
"""

import json
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from monitor.trend import TrendModel

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures" / "trend"


def close_fixef(ours, ref):
    return abs(ours - ref) <= 1e-4


def check(result, ref, sd_map, names=None, se_rel=1e-2):
    names = names or {"(Intercept)": "(Intercept)", "year": "t"}
    for ours_name, ref_name in names.items():
        assert close_fixef(result.params[ours_name], ref["fixef"][ref_name]), (ours_name, result.params[ours_name])
        assert result.bse[ours_name] == pytest.approx(ref["se"][ref_name], rel=se_rel), ours_name
    for ours_name, ref_name in sd_map.items():
        assert result.random_sd[ours_name] == pytest.approx(ref["sd"][ref_name], rel=1e-3), ours_name
    assert result.loglik == pytest.approx(ref["loglik"], abs=1e-3)


def test_fixture_versions(reference):
    # the fixture must say which software produced it
    assert reference["versions"]["lme4"] == "1.1.31"
    assert reference["versions"]["glmmTMB"] == "1.1.5"
    assert reference["versions"]["R"].startswith("R version 4.2.2")


def test_poisson_matches_glmer(glmm_data, reference):
    # lme4 1.1-31 glmer(count ~ t + (1|site) + (1|station), poisson), Laplace
    r = TrendModel(glmm_data, "count", family="poisson", year_random="none").fit(profile=True, indices=False)
    check(r, reference["poisson"], {"station": "station", "site": "site"})
    # lme4 1.1-31 confint(m, parm = "t", method = "profile")
    lo, hi = np.log1p(r.annual_change_profile.lower), np.log1p(r.annual_change_profile.upper)
    assert lo == pytest.approx(reference["poisson"]["profile_t"][0], abs=2e-4)
    assert hi == pytest.approx(reference["poisson"]["profile_t"][1], abs=2e-4)


def test_poisson_lognormal_matches_glmer_and_glmmtmb(glmm_data, reference):
    r = TrendModel(glmm_data, "count", family="poisson-lognormal", year_random="none").fit(profile=False, indices=False, fast=False)
    # lme4 1.1-31 glmer(count ~ t + (1|site) + (1|station) + (1|obs_id), poisson); glmer's
    # finite-difference Hessian puts the slope's SE 1.0 % below glmmTMB's exact one (which
    # ours matches to 1e-3 below), so its SEs get 2e-2 here
    check(r, reference["poisson_lognormal"], {"station": "station", "site": "site", "observation": "obs_id"},
          se_rel=2e-2)
    # glmmTMB 1.1.5, same model, family = poisson
    check(r, reference["poisson_lognormal_glmmTMB"], {"station": "station", "site": "site", "observation": "obs_id"},
          se_rel=1e-3)


def test_negbin_matches_glmmtmb(glmm_data, reference):
    d = glmm_data.drop(columns="count").rename(columns={"count_nb": "count"})
    r = TrendModel(d, "count", family="negbin", year_random="none").fit(profile=False, indices=False, fast=False)
    ref = reference["negbin"]
    # glmmTMB 1.1.5 glmmTMB(count_nb ~ t + (1|site) + (1|station), family = nbinom2)
    check(r, ref, {"station": "station", "site": "site"}, se_rel=1e-3)
    assert r.dispersion == pytest.approx(ref["theta"], rel=1e-3)  # sigma(m): the NB2 size


def test_binomial_matches_glmer(glmm_data, reference):
    r = TrendModel(glmm_data, "frequency", year_random="none").fit(profile=False, indices=False, fast=False)
    # lme4 1.1-31 glmer(cbind(occupied, cells - occupied) ~ t + (1|site) + (1|station), binomial)
    check(r, reference["binomial"], {"station": "station", "site": "site"})


@pytest.mark.parametrize("reml,key", [(False, "cover_ml"), (True, "cover_reml")])
def test_cover_matches_lmer(glmm_data, reference, reml, key):
    r = TrendModel(glmm_data, "cover", reml=reml, year_random="none").fit(profile=not reml, indices=False)
    ref = reference[key]
    # lme4 1.1-31 lmer(logit_cover ~ t + (1|site) + (1|station), REML = reml), with the
    # cover adjustment computed independently in R (eps = smallest non-zero p and 1 - p)
    assert r.cover_eps == pytest.approx(reference["cover_eps"], rel=1e-12)
    check(r, ref, {"station": "station", "site": "site"}, se_rel=1e-3)
    assert r.dispersion == pytest.approx(ref["sigma"], rel=1e-3)  # sigma(m)
    if not reml:
        # lme4 1.1-31 confint(m, parm = "t", method = "profile")
        lo, hi = np.log1p(r.annual_change_profile.lower), np.log1p(r.annual_change_profile.upper)
        assert lo == pytest.approx(ref["profile_t"][0], abs=2e-4)
        assert hi == pytest.approx(ref["profile_t"][1], abs=2e-4)


def test_year_factor_matches_glmer(glmm_data, reference):
    ref = reference["poisson_factor"]
    r = TrendModel(glmm_data, "count", family="poisson", year_random="none", year_effect="factor").fit(profile=False, indices=True)
    names = {"(Intercept)": "(Intercept)"}
    names.update({f"year[{y}]": f"fyear{y}" for y in range(2012, 2019)})
    # lme4 1.1-31 glmer(count ~ factor(year) + (1|site) + (1|station), poisson)
    check(r, ref, {"station": "station", "site": "site"}, names)
    idx = r.indices.set_index("year")["index"]
    for y in range(2012, 2019):
        assert idx[y] == pytest.approx(np.exp(ref["fixef"][f"fyear{y}"]), rel=1e-4)
    assert idx[2011] == 1.0


def test_crossed_observer_matches_glmer(glmm_data, reference):
    d = glmm_data.drop(columns="count").rename(columns={"count_b": "count"})
    r = TrendModel(d, "count", family="poisson", year_random="none", observer_effect=True).fit(profile=False, indices=False, fast=False)
    # lme4 1.1-31 glmer(count_b ~ t + (1|site) + (1|station) + (1|observer), poisson)
    check(r, reference["poisson_observer"], {"station": "station", "site": "site", "observer": "observer"})


def test_site_slope_matches_glmer(glmm_data, reference):
    d = glmm_data.drop(columns="count").rename(columns={"count_b": "count"})
    r = TrendModel(d, "count", family="poisson", year_random="none", site_slope=True).fit(profile=False, indices=False, fast=False)
    # lme4 1.1-31 glmer(count_b ~ t + (1|station) + (1|site) + (0 + t|site), poisson)
    check(r, reference["poisson_site_slope"], {"station": "station", "site": "site", "site_slope": "site.1:t"})


def test_agq_matches_glmer_nagq7(glmm_data, reference):
    ref = reference["poisson_station_agq7"]
    r = TrendModel(glmm_data, "count", family="poisson", year_random="none", site_effect=False, method="agq", n_agq=7).fit(
        profile=False, indices=False, fast=False)
    # lme4 1.1-31 glmer(count ~ t + (1|station), poisson, nAGQ = 7).  With nAGQ > 1 glmer
    # builds its log-likelihood from deviance residuals, i.e. relative to the saturated
    # model, so ours is compared after subtracting the saturated Poisson log-likelihood
    # sum(y log y - y - log y!).
    from scipy.special import gammaln, xlogy

    names = {"(Intercept)": "(Intercept)", "year": "t"}
    for o, rn in names.items():
        assert close_fixef(r.params[o], ref["fixef"][rn])
        assert r.bse[o] == pytest.approx(ref["se"][rn], rel=1e-2)
    assert r.random_sd["station"] == pytest.approx(ref["sd"]["station"], rel=1e-3)
    y = glmm_data["count"].to_numpy(float)
    saturated = float(np.sum(xlogy(y, y) - y - gammaln(y + 1)))
    assert r.loglik - saturated == pytest.approx(ref["loglik"], abs=1e-3)
    # and AGQ differs from the Laplace fit on the same model (lme4 1.1-31, nAGQ = 1)
    lap = reference["poisson_station_laplace"]
    assert abs(ref["sd"]["station"] - lap["sd"]["station"]) > 5e-4
    r1 = TrendModel(glmm_data, "count", family="poisson", year_random="none", site_effect=False).fit(profile=False, indices=False, fast=False)
    check(r1, lap, {"station": "station"})


@pytest.mark.slow
@pytest.mark.skipif(shutil.which("Rscript") is None, reason="needs R with lme4 and glmmTMB")
def test_live_r_reproduces_fixture(tmp_path):
    # rerun the committed R script on a copy of the fixture directory and compare
    for name in ("glmm_data.csv", "reference_fits.R"):
        shutil.copy(FIXTURES / name, tmp_path / name)
    subprocess.run(["Rscript", str(tmp_path / "reference_fits.R")], check=True, capture_output=True, timeout=300)
    live = json.loads((tmp_path / "reference_values.json").read_text())
    committed = json.loads((FIXTURES / "reference_values.json").read_text())
    for key in ("poisson", "poisson_lognormal", "binomial", "cover_ml", "cover_reml"):
        assert live[key]["loglik"] == pytest.approx(committed[key]["loglik"], abs=1e-6)
        for name, v in committed[key]["fixef"].items():
            assert live[key]["fixef"][name] == pytest.approx(v, abs=1e-6)


def test_many_fixed_effects_search_matches_glmer(glmm_data, reference, monkeypatch):
    # force the block-wise stage 2 used for many fixed effects (a long year factor)
    import monitor.trend.glmm as engine

    monkeypatch.setattr(engine, "NEWTON_MAX_DIM", 4)
    ref = reference["poisson_factor"]
    r = TrendModel(glmm_data, "count", family="poisson", year_random="none", year_effect="factor").fit(profile=False, indices=True)
    names = {"(Intercept)": "(Intercept)"}
    names.update({f"year[{y}]": f"fyear{y}" for y in range(2012, 2019)})
    # lme4 1.1-31 glmer(count ~ factor(year) + (1|site) + (1|station), poisson); the standard
    # errors here are conditional, (X' V^-1 X)^-1, within 2 % of glmer's Hessian-based ones
    check(r, ref, {"station": "station", "site": "site"}, names, se_rel=0.02)
    assert "conditional_se" in {d.code for d in r.diagnostics}
