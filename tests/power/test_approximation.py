"""Gerrodette's (1987) approximation, checked against independent computations.

Gerrodette, T. (1987). A power analysis for detecting trends. Ecology 68:1364-1372.
The inequalities implemented are written from memory (`from memory`); no worked value from the
paper could be had with certainty, so each is checked against an independent computation
stated beside it: the regression slope's standard error from first principles with numpy
(sum of squares and mean yearly variance), a Monte-Carlo z test of simulated lognormal
estimates, and the exact noncentral-t power of scipy.stats.nct.
"""

import math

import numpy as np
import pytest
from scipy import stats

from monitor.errors import DesignError
from monitor.power import (
    Design,
    Scenario,
    VarianceComponents,
    approximate_detectable_change,
    approximate_power,
    gerrodette_exponential_power,
    gerrodette_linear_power,
    variance_factor,
)

CASES = [(-0.05, 10, 0.2), (0.03, 15, 0.35), (-0.1, 6, 0.1), (0.12, 8, 0.5)]


@pytest.mark.parametrize("rate,n,cv", CASES)
@pytest.mark.parametrize("model,power_k", [("constant", 0.0), ("poisson", -0.5), ("sd", -1.0)])
def test_variance_factor_is_mean_yearly_variance(rate, n, cv, model, power_k):
    # independent computation: A_i = A_1 (1 + r (i-1)), CV_i = CV_1 (A_i/A_1)^k, sigma_i = CV_i A_i;
    # f = mean(sigma_i^2) / sigma_1^2, summed directly with numpy
    a = 1 + rate * np.arange(n)
    sigma2 = (cv * a**power_k * a) ** 2
    assert variance_factor(rate, n, model) == pytest.approx(sigma2.mean() / cv**2, rel=1e-12)


@pytest.mark.parametrize("rate,n,cv", CASES)
@pytest.mark.parametrize("side", ["two-sided", "decline", "rise"])
def test_linear_power_matches_regression_from_first_principles(rate, n, cv, side):
    # independent computation: slope b = r A_1 (A_1 = 100), se(b) = sigma_bar / sqrt(S_xx) with
    # S_xx = sum (i - mean i)^2 and sigma_bar^2 the mean yearly variance; z test, one tail as in the paper
    a1 = 100.0
    i = np.arange(1, n + 1)
    sxx = np.sum((i - i.mean()) ** 2)
    sigma_bar = math.sqrt(np.mean((cv * a1 * (1 + rate * (i - 1))) ** 2))
    z = (rate * a1) / (sigma_bar / math.sqrt(sxx))
    if side == "two-sided":
        expected = stats.norm.cdf(abs(z) - stats.norm.isf(0.025))
    elif side == "decline":
        expected = stats.norm.cdf(-z - stats.norm.isf(0.05))
    else:
        expected = stats.norm.cdf(z - stats.norm.isf(0.05))
    assert gerrodette_linear_power(rate, n, cv, 0.05, side, "constant") == pytest.approx(expected, rel=1e-10)


def test_linear_power_solves_the_inequality_with_equality():
    # Gerrodette (1987) inequality r^2 n(n-1)(n+1) >= 12 CV^2 f (z_a + z_b)^2 (from memory): at the
    # returned power z_b = Phi^-1(power) the two sides are equal
    rate, n, cv = -0.04, 12, 0.25
    power = gerrodette_linear_power(rate, n, cv, 0.1, "two-sided", "poisson")
    zb = stats.norm.ppf(power)
    lhs = rate**2 * n * (n - 1) * (n + 1)
    rhs = 12 * cv**2 * (1 + rate * (n - 1) / 2) * (stats.norm.isf(0.05) + zb) ** 2
    assert lhs == pytest.approx(rhs, rel=1e-10)


def test_exponential_power_agrees_with_monte_carlo_z_test():
    # independent computation: simulate lognormal yearly estimates with CV 0.3 around A_1 (1+r)^(i-1),
    # regress ln(estimate) on i, z test with the known log-scale variance ln(1 + CV^2)
    rng = np.random.default_rng(20240611)
    rate, n, cv, reps = -0.06, 10, 0.3, 40_000
    s2 = math.log1p(cv**2)
    i = np.arange(n)
    mean_log = np.log(50.0) + i * math.log1p(rate) - s2 / 2
    logs = mean_log + rng.normal(0, math.sqrt(s2), size=(reps, n))
    ic = i - i.mean()
    slopes = logs @ ic / (ic @ ic)
    z = slopes / math.sqrt(s2 / (ic @ ic))
    mc_power = np.mean(z < -stats.norm.isf(0.05))
    approx = gerrodette_exponential_power(rate, n, cv, 0.05, "decline")
    se = math.sqrt(mc_power * (1 - mc_power) / reps)
    assert abs(approx - mc_power) < 4 * se


def test_design_approximation_close_to_exact_t_power_without_random_effects():
    # independent computation: exact power of the OLS t test of log values on year (scipy.stats.nct),
    # log y = b0 + beta t + e, e ~ N(0, 0.6^2), 12 stations x 8 years, all independent
    sigma, stations, years = 0.6, 12, 8
    components = VarianceComponents.from_mean("lognormal", 10.0, residual_sd=sigma)
    scenario = Scenario.from_change(-0.3, 10, alpha=0.05, side="two-sided")
    approx = approximate_power(components, Design(stations, years), scenario)
    sxx = stations * years * (years**2 - 1) / 12
    df = stations * years - 2
    nc = scenario.slope * math.sqrt(sxx) / sigma
    tc = stats.t.isf(0.025, df)
    exact = stats.nct.sf(tc, df, nc) + stats.nct.cdf(-tc, df, nc)
    # z instead of t and one tail only: within 0.02 at 94 degrees of freedom
    assert approx.power == pytest.approx(exact, abs=0.02)
    assert approx.visits_per_year == pytest.approx(stations)


def test_rotating_panels_and_missed_visits_lower_the_approximate_power():
    components = VarianceComponents.from_mean("poisson-lognormal", 4.0, station_sd=0.8, site_sd=0.3,
                                              observation_sd=0.3)
    scenario = Scenario.from_change(-0.4, 10)
    every = approximate_power(components, Design(40, 10), scenario).power
    rotating = approximate_power(components, Design(40, 10, revisit="[1-3]"), scenario).power
    missed = approximate_power(components, Design(40, 10, missed_share=0.3), scenario)
    assert rotating < every
    assert missed.power < every
    assert missed.visits_per_year == pytest.approx(28.0)


def test_detectable_change_has_the_closed_form_without_random_effects():
    # Gerrodette's exponential inequality solved for the rate (from memory):
    # |ln(1+r)| = (z_a + z_b) sqrt(12 s^2 / (N (N^2-1))), s^2 = residual variance / visits per year
    sigma, stations, years = 0.5, 20, 10
    components = VarianceComponents.from_mean("lognormal", 10.0, residual_sd=sigma)
    rate = approximate_detectable_change(components, Design(stations, years), alpha=0.05, side="decline", power=0.8)
    s = sigma / math.sqrt(stations)
    slope = (stats.norm.isf(0.05) + stats.norm.ppf(0.8)) * math.sqrt(12 * s**2 / (years * (years**2 - 1)))
    assert rate == pytest.approx(math.expm1(-slope), rel=1e-8)


def test_approximation_refuses_too_few_surveys():
    with pytest.raises(DesignError):
        gerrodette_linear_power(-0.1, 2, 0.2)
    with pytest.raises(DesignError):
        gerrodette_exponential_power(-0.1, 5, 0.0)


def test_larger_quadrats_help_only_when_variance_falls_with_area():
    # SD proportional to area^-b (user-supplied b): with b = 0 and a Poisson-lognormal whose
    # Poisson part is negligible, quadrat size cannot change the yearly index variance
    components = VarianceComponents(family="poisson-lognormal", intercept=math.log(500.0), station_sd=0.6,
                                    observation_sd=0.4, quadrat_area=1.0)
    scenario = Scenario.from_change(-0.3, 10)
    small = approximate_power(components, Design(15, 6, quadrat_area=1.0), scenario)
    flat = approximate_power(components, Design(15, 6, quadrat_area=4.0, area_exponent=0.0), scenario)
    scaled = approximate_power(components, Design(15, 6, quadrat_area=4.0, area_exponent=0.5), scenario)
    assert flat.power == pytest.approx(small.power, abs=0.01)
    # b = 0.5, area x4: observation SD halves, 0.4 -> 0.2 (Poisson part ~ 1/500 and 1/2000 added)
    assert scaled.sd_per_visit == pytest.approx(math.sqrt(0.2**2 + 1 / 2000), rel=0.02)
    assert scaled.power > small.power
