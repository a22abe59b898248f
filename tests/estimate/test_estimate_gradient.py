"""Abundance along a gradient: Spearman's rho and the GLM slope."""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.discrete.discrete_model import NegativeBinomial

from monitor import columns as C
from monitor.errors import EstimationError
from monitor.estimate import estimate_gradient


def transect(rng, slope=-0.02, n=40, years=(2024,), intercept=2.0, overdispersion=None):
    rows = []
    for year in years:
        distance = np.linspace(0, 200, n)
        mu = np.exp(intercept + slope * distance)
        if overdispersion is None:
            counts = rng.poisson(mu)
        else:   # NB2 with alpha = overdispersion, as a gamma-Poisson mixture
            counts = rng.poisson(rng.gamma(1 / overdispersion, mu * overdispersion))
        rows.append(pd.DataFrame({C.DISTANCE: distance, C.COUNT: counts, C.YEAR: year}))
    return pd.concat(rows, ignore_index=True)


def test_spearman_matches_scipy_and_the_no_ties_closed_form():
    x = np.array([3.0, 7.0, 1.0, 9.0, 4.0, 12.0, 15.0, 8.0])
    y = np.array([2, 5, 0, 11, 3, 8, 13, 7])
    r = estimate_gradient(pd.DataFrame({"moisture": x, C.COUNT: y}), covariate="moisture", season=None)
    fit = r.fits[0]
    ref = stats.spearmanr(x, y)                            # scipy.stats 1.17
    assert fit.spearman_rho == pytest.approx(ref.statistic, rel=1e-12)
    assert fit.spearman_p == pytest.approx(ref.pvalue, rel=1e-12)
    # Spearman (1904): rho = 1 - 6 sum d^2 / (n (n^2 - 1)) with no ties
    d = stats.rankdata(x) - stats.rankdata(y)
    assert fit.spearman_rho == pytest.approx(1 - 6 * np.sum(d**2) / (8 * 63), rel=1e-12)


def test_poisson_slope_matches_statsmodels_glm():
    rng = np.random.default_rng(2)
    data = transect(rng)
    r = estimate_gradient(data)
    fit = r.fits[0]
    # statsmodels 0.15 GLM(Poisson), Wald interval
    ref = sm.GLM(data[C.COUNT], sm.add_constant(data[C.DISTANCE]), family=sm.families.Poisson()).fit()
    assert fit.slope == pytest.approx(ref.params.iloc[1], rel=1e-8)
    assert fit.slope_se == pytest.approx(ref.bse.iloc[1], rel=1e-6)
    lo, hi = ref.conf_int(0.05).iloc[1]
    assert (fit.slope_lower, fit.slope_upper) == pytest.approx((lo, hi), rel=1e-6)
    assert fit.rate_ratio == pytest.approx(np.exp(fit.slope))
    assert fit.family == "poisson" and fit.nb_alpha is None and fit.season == 2024


def test_poisson_slope_closed_form_for_two_groups():
    # McCullagh & Nelder (1989): with a 0/1 covariate the Poisson MLE slope is log(ybar1 / ybar0)
    # and its standard error sqrt(1/sum y1 + 1/sum y0)
    y0 = np.array([7, 9, 4, 6, 8])
    y1 = np.array([3, 2, 5, 1, 2])
    data = pd.DataFrame({"shade": [0.0] * 5 + [1.0] * 5, C.COUNT: np.concatenate([y0, y1])})
    fit = estimate_gradient(data, covariate="shade", season=None).fits[0]
    assert fit.slope == pytest.approx(np.log(y1.mean() / y0.mean()), rel=1e-8)
    assert fit.slope_se == pytest.approx(np.sqrt(1 / y1.sum() + 1 / y0.sum()), rel=1e-6)


def test_area_offset_makes_the_intercept_a_log_density():
    y = np.array([4, 8, 3, 9, 2, 10])
    area = np.array([0.25, 0.5, 0.25, 0.5, 0.25, 0.5])
    x = np.array([0.0, 0.0, 10.0, 10.0, 20.0, 20.0])
    r = estimate_gradient(pd.DataFrame({C.DISTANCE: x, C.COUNT: y, C.QUADRAT_AREA: area}), season=None)
    ref = sm.GLM(y, sm.add_constant(x), family=sm.families.Poisson(), offset=np.log(area)).fit()  # statsmodels
    assert r.offset_area and r.fits[0].intercept == pytest.approx(ref.params[0], rel=1e-8)


def test_simulation_recovers_the_slope_with_nominal_coverage():
    # seeded simulation: 200 transects of 40 quadrats with a known slope of -0.02 per metre
    rng = np.random.default_rng(99)
    covered = 0
    estimates = []
    for _ in range(200):
        fit = estimate_gradient(transect(rng), season=None).fits[0]
        covered += fit.slope_lower <= -0.02 <= fit.slope_upper
        estimates.append(fit.slope)
    assert 0.91 <= covered / 200 <= 0.99
    assert np.mean(estimates) == pytest.approx(-0.02, abs=0.001)


def test_overdispersed_counts_warn_and_auto_switches_to_negative_binomial():
    rng = np.random.default_rng(17)
    data = transect(rng, n=120, overdispersion=0.8)
    poisson = estimate_gradient(data).fits[0]
    assert poisson.dispersion > 1.5
    assert any(d.code == "overdispersed" for d in poisson.diagnostics)
    auto = estimate_gradient(data, family="auto").fits[0]
    assert auto.family == "negative_binomial"
    # statsmodels 0.15 discrete NegativeBinomial (NB2) by maximum likelihood
    ref = NegativeBinomial(data[C.COUNT].to_numpy(), sm.add_constant(data[C.DISTANCE].to_numpy()),
                           loglike_method="nb2").fit(disp=0, maxiter=200)
    assert auto.slope == pytest.approx(ref.params[1], rel=1e-4)
    assert auto.nb_alpha == pytest.approx(ref.params[2], rel=1e-3)
    assert auto.slope_upper - auto.slope_lower > poisson.slope_upper - poisson.slope_lower


def test_one_fit_per_season():
    rng = np.random.default_rng(4)
    r = estimate_gradient(transect(rng, years=(2023, 2024, 2025)))
    assert [f.season for f in r.fits] == [2023, 2024, 2025]
    assert r.n == 120 and all(f.n == 40 for f in r.fits)
    assert len(r.to_frame()) == 3
    import json

    json.dumps(r.to_dict())


@pytest.mark.parametrize(
    ("data", "message"),
    [
        (pd.DataFrame({C.DISTANCE: [5.0] * 6, C.COUNT: [1, 2, 3, 4, 5, 6]}), "does not vary"),
        (pd.DataFrame({C.DISTANCE: [1.0, 2.0], C.COUNT: [1, 2]}), "at least 3"),
        (pd.DataFrame({C.DISTANCE: [1.0, 2.0, 3.0], C.COUNT: [1, -2, 3]}), "whole counts"),
        (pd.DataFrame({C.DISTANCE: [1.0, 2.0, 3.0], C.COUNT: [1.5, 2, 3]}), "whole counts"),
        (pd.DataFrame({C.DISTANCE: [1.0, 2.0, 3.0, 4.0], C.COUNT: [0, 0, 0, 0]}), "every quadrat"),
        (pd.DataFrame({C.DISTANCE: [1.0, None, 3.0], C.COUNT: [1, 2, 3]}), "missing"),
    ],
)
def test_gradient_bad_input(data, message):
    with pytest.raises(EstimationError, match=message):
        estimate_gradient(data, season=None)


def test_unknown_family_is_an_error():
    with pytest.raises(EstimationError, match="family"):
        estimate_gradient(pd.DataFrame({C.DISTANCE: [1.0, 2.0, 3.0], C.COUNT: [1, 2, 3]}), family="gamma")
