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


# --- every registered family through every stage ----------------------------------------------------------
#: a first-year level on the data scale for the simulation below (invented, for simulation only);
#: a new family needs a line here
LEVEL = {"poisson": 6.0, "poisson-lognormal": 6.0, "negbin": 6.0, "binomial": 0.4, "logit-normal": 0.2,
         "lognormal": 20.0}
TRUE_CHANGE = -0.08   # a year


def _measure_of(name: str) -> str:
    from monitor import measures

    served = [code for code, m in measures.REGISTRY.items() if name in m.families]
    assert served, f"no measure of the registry is fitted with family {name!r}"
    return served[0]


def test_every_measure_names_registered_families_that_serve_it():
    from monitor import measures

    for code, m in measures.REGISTRY.items():
        assert m.family in m.families, code
        for name in m.families:
            assert family(name).serves(code), (code, name)
    assert set(NAMES) == {name for m in measures.REGISTRY.values() for name in m.families}


@pytest.mark.parametrize("name", NAMES)
def test_every_family_through_simulation_fit_power_and_wording(name):
    from monitor.power import approximate_power, components_from_trend
    from monitor.report.wording import caveat_sentences

    fam = family(name)
    measure = _measure_of(name)
    # power: the family simulates the measure's columns
    extra = {fam.dispersion_field: (4.0 if fam.dispersion_field == "theta" else 0.3)} if fam.has_dispersion else {}
    if fam.observation_effect == "always":
        extra["observation_sd"] = 0.2
    if fam.has_trials:
        extra["trials"] = 1 if measure == C.MEASURE_PRESENCE else 25
    components = VarianceComponents.from_mean(name, LEVEL[name], station_sd=0.4, year_sd=0.05, measure=measure,
                                              **extra)
    design = Design(n_stations=40, n_years=8)
    data = simulate_dataset(components, design, Scenario(TRUE_CHANGE), np.random.default_rng(2026))
    for column in C.MEASURE_COLUMNS[measure]:
        assert column in data.columns
    assert fam.check_values(data[C.MEASURE_COLUMNS[measure][0]].to_numpy(float)) is None
    # trend: the engine fits the family to it and recovers the change (a 4-SE limit)
    result = TrendModel(data, measure, family=name, site_effect=False).fit(profile=False, indices=True, fast=False)
    assert result.family == name and result.change_scale == fam.change_scale and result.converged
    assert abs(result.slope - math.log1p(TRUE_CHANGE)) < 4 * result.slope_se * result.se_scale
    assert (result.dispersion is None) == (not fam.has_dispersion)
    if fam.has_dispersion:
        assert fam.dispersion_name in result.summary()
    assert result.trend_line is not None and np.all(np.isfinite(result.trend_line["fit"]))
    # power: the fit's components carry the family and its dispersion back; the approximation runs
    back = components_from_trend(result, data=data)
    assert back.family == name and back.measure == measure
    if fam.has_dispersion:
        assert getattr(back, fam.dispersion_field) == pytest.approx(result.dispersion)
    assert 0 < approximate_power(back, design, Scenario(TRUE_CHANGE)).power <= 1
    # report: the family's description and sentences
    assert describe(name) == fam.description
    caveats = caveat_sentences(40, 8, 2001, 2008, family=name, dispersion=result.dispersion)
    assert (fam.rate_note in caveats) if fam.rate_note else all(isinstance(c, str) for c in caveats)


def test_the_command_line_offers_every_family():
    from click.testing import CliRunner

    from monitor.cli.main import cli

    for command in (["trend", "--help"], ["power", "--help"]):
        out = CliRunner().invoke(cli, command, terminal_width=400).output
        for name in NAMES:
            assert name in out, (command, name)
