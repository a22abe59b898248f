"""The registry of model families (monitor/families.py): immutable objects that serve many fits at once.

Checks against outside sources: the variance functions (McCullagh & Nelder 1989, table 2.1;
NB2 as Hilbe 2011), simulated responses against scipy.stats moments, and every family's words.
"""

import dataclasses
import math
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest

from monitor import columns as C
from monitor.families import NAMES, describe, families_for, family
from monitor.power import Design, Scenario, VarianceComponents, simulate_dataset
from monitor.trend import TrendModel
from monitor.trend.families import density


def test_the_names_the_measure_registry_refers_to():
    assert NAMES == ("poisson", "poisson-lognormal", "negbin", "binomial", "logit-normal", "lognormal")
    assert families_for(C.MEASURE_COUNT) == ("poisson", "poisson-lognormal", "negbin")
    assert families_for(C.MEASURE_COVER) == ("logit-normal",)
    assert families_for(C.MEASURE_PIN_HITS) == ("binomial",)


@pytest.mark.parametrize("name", NAMES)
def test_a_family_object_is_immutable_and_holds_no_data(name):
    fam = family(name)
    assert family(fam) is fam
    with pytest.raises(dataclasses.FrozenInstanceError):
        fam.dispersion_name = "changed"   # type: ignore[misc]
    assert not any(isinstance(v, np.ndarray) for v in vars(fam).values())
    assert describe(name) == fam.description and fam.description
    assert (fam.dispersion_name is None) == (fam.dispersion_field is None)


def test_variance_functions():
    # McCullagh & Nelder (1989) table 2.1: Poisson mu, binomial n p (1 - p), normal sigma^2;
    # NB2 mu + mu^2 / theta (Hilbe 2011)
    mu = np.array([0.5, 2.0, 10.0])
    assert family("poisson").variance(mu) == pytest.approx(mu)
    assert family("negbin").variance(mu, 2.0) == pytest.approx(mu + mu ** 2 / 2)
    assert family("binomial").variance(np.array([0.2]), trials=10) == pytest.approx([1.6])
    assert family("lognormal").variance(mu, 0.3) == pytest.approx([0.09] * 3)
    assert family("negbin").link.inverse(family("negbin").link(mu)) == pytest.approx(mu)
    assert family("binomial").link.inverse(family("binomial").link(np.array([0.1, 0.7]))) == pytest.approx([0.1, 0.7])


@pytest.mark.parametrize("name,kw,mean,var", [
    # scipy.stats: nbinom(n=theta, p=theta/(theta+mu)) has mean mu, variance mu + mu^2/theta;
    # lognorm(s=sigma, scale=exp(eta)) has mean exp(eta + sigma^2/2)
    ("negbin", {"dispersion": 2.0}, 4.0, 4.0 + 16.0 / 2.0),
    ("poisson", {}, 4.0, 4.0),
    ("lognormal", {"dispersion": 0.3}, 4.0 * math.exp(0.045), None),
])
def test_simulated_responses_have_the_family_moments(name, kw, mean, var):
    from scipy import stats

    if name == "negbin":
        ref = stats.nbinom(2.0, 2.0 / 6.0)
        assert (ref.mean(), ref.var()) == pytest.approx((mean, var))
    if name == "lognormal":
        assert stats.lognorm(0.3, scale=4.0).mean() == pytest.approx(mean)
    rng = np.random.default_rng(1)
    y = family(name).simulate(np.full(200_000, math.log(4.0)), rng, **kw)
    assert y.mean() == pytest.approx(mean, rel=0.01)
    if var is not None:
        assert y.var() == pytest.approx(var, rel=0.03)


def _negbin_data(theta: float, seed: int):
    """Invented counts for the fits below: NB2 with the given size (a simulation test)."""
    comps = VarianceComponents.from_mean("negbin", 6.0, station_sd=0.4, theta=theta)
    return simulate_dataset(comps, Design(n_stations=24, n_years=6), Scenario(-0.05), np.random.default_rng(seed))


def _fit(data):
    r = TrendModel(data, "count", family="negbin", year_random="none", site_effect=False).fit(
        profile=False, indices=False, fast=False)
    return r.slope, r.slope_se, r.dispersion, r.loglik


def test_one_family_object_serves_two_fits_at_once():
    # two negative binomial data sets with very different dispersions (NB2 size 1.5 and 40),
    # fitted at the same time in two threads, give exactly what each gives alone
    a, b = _negbin_data(1.5, 11), _negbin_data(40.0, 12)
    alone = [_fit(a), _fit(b)]
    assert alone[0][2] < 5 < alone[1][2]     # the fits' dispersions really differ
    with ThreadPoolExecutor(max_workers=2) as pool:
        together = list(pool.map(_fit, [a, b, a, b]))
    assert together == alone + alone
    # and the registry's object was not written to
    assert not hasattr(family("negbin"), "dispersion")


def test_densities_of_one_family_keep_their_own_dispersion_when_interleaved():
    fam = family("negbin")
    y1, y2 = np.array([0.0, 3.0, 7.0]), np.array([1.0, 1.0, 12.0])
    d1, d2 = density(fam, y1), density(fam, y2)
    eta = np.log(np.array([2.0, 3.0, 6.0]))
    d1.dispersion = 1.5
    first = d1.loglik(eta).copy()
    d2.dispersion = 40.0
    d2.loglik(eta)
    assert d1.loglik(eta) == pytest.approx(first, rel=0, abs=0)
    from scipy import stats   # scipy.stats.nbinom: NB2 size 1.5, mean mu

    mu = np.exp(eta)
    assert first == pytest.approx(stats.nbinom.logpmf(y1, 1.5, 1.5 / (1.5 + mu)), rel=1e-12)
