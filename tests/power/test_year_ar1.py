"""Power with AR(1) year effects: the simulation, the slope variance of the approximation, the wiring.

References
----------
- Stationary AR(1), w_t = rho w_(t-1) + sqrt(1 - rho^2) z_t: var(w_t) = 1, corr(w_t, w_t') = rho^|t - t'|;
  the lag-1 sample autocorrelation of n values has SE about sqrt((1 - rho^2) / n) (Bartlett's
  formula), and the sample variance an SE of about s^2 sqrt(2 (1 + rho^2) / ((1 - rho^2) n))
  (Box & Jenkins 1976, Time Series Analysis, chapters 2-3; from memory).
- Least squares under a known error covariance Sigma: var(b) = (X'X)^-1 X' Sigma X (X'X)^-1 (any
  linear-models text, e.g. Neter et al. 1996, from memory); with Sigma = s^2 I it is Urquhart,
  Paulsen & Larsen's (1998, Ecol. Appl. 8:246-257) [s_year^2 + s_e^2 / m] / sum (t - tbar)^2.
- Noncentral t power: scipy.stats.nct (scipy 1.17).
- Fitted AR(1) correlation: glmmTMB 1.1.5 on tests/fixtures/trend/glmm_year_data.csv
  (tests/fixtures/trend/reference_year_values.json, key negbin_year_ar1).
Monte-Carlo limits allow 4 SE (common practice).  Invented parameters only.
"""

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from monitor import columns as col
from monitor import measures
from monitor.cli.main import main
from monitor.errors import DesignError
from monitor.power import (
    Design,
    Scenario,
    VarianceComponents,
    approximate_power,
    components_from_trend,
    index_variance,
    simulate_dataset,
    simulate_power,
    slope_variance,
)
from monitor.power.model import ar1_series

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures" / "trend"


def lognormal(year_sd: float, residual_sd: float, rho: float, **kw) -> VarianceComponents:
    return VarianceComponents.from_mean("lognormal", 10.0, residual_sd=residual_sd, year_sd=year_sd, year_rho=rho,
                                        **kw)


def ls_slope_variance(sigma: np.ndarray) -> float:
    """[(X'X)^-1 X' Sigma X (X'X)^-1]_11 with X = [1, t], written out with numpy's matrices."""
    n = sigma.shape[0]
    X = np.column_stack([np.ones(n), np.arange(n, dtype=float)])
    A = np.linalg.solve(X.T @ X, X.T)
    return float((A @ sigma @ A.T)[1, 1])


def test_ar1_series_has_unit_variance_and_the_stated_correlation():
    z = np.random.default_rng(4).normal(size=20000)
    assert ar1_series(z, 0.0) is not None and np.array_equal(ar1_series(z, 0.0), z)   # independent years unchanged
    w = ar1_series(z, 0.6)
    n = w.size
    r1 = float(np.corrcoef(w[:-1], w[1:])[0, 1])
    r2 = float(np.corrcoef(w[:-2], w[2:])[0, 1])
    assert r1 == pytest.approx(0.6, abs=4 * math.sqrt((1 - 0.36) / n))
    assert r2 == pytest.approx(0.36, abs=4 * math.sqrt((1 + 0.36) / n))
    assert np.var(w) == pytest.approx(1.0, abs=4 * math.sqrt(2 * 1.36 / (0.64 * n)))


def test_simulated_ar1_year_effects_are_shared_and_autocorrelated():
    components = lognormal(0.3, 1e-6, 0.5, stations_per_site=1000)
    data = simulate_dataset(components, Design(3, 3000), Scenario(0.0), np.random.default_rng(8))
    y = np.log(data[measures.get(components.measure).columns[0]])  # the measure the family writes
    by_year = y.groupby(data[col.YEAR])
    assert float(by_year.std().max()) < 1e-4            # one value a year shared by every station
    w = by_year.mean().to_numpy()
    w = w - w.mean()
    n = w.size
    assert float(np.corrcoef(w[:-1], w[1:])[0, 1]) == pytest.approx(0.5, abs=4 * math.sqrt(0.75 / n))
    assert float(np.std(w, ddof=1)) == pytest.approx(0.3, abs=4 * 0.3 * math.sqrt((1 + 0.25) / (2 * 0.75 * n)))


def test_year_rho_must_be_a_correlation():
    for bad in (1.0, -1.0, 1.5, float("nan")):
        with pytest.raises(DesignError, match="year_rho"):
            lognormal(0.2, 0.5, bad)


def test_slope_variance_is_urquharts_when_years_are_independent():
    components = VarianceComponents.from_mean("lognormal", 10.0, residual_sd=0.5, year_sd=0.2, site_year_sd=0.3,
                                              station_sd=0.4, stations_per_site=10)
    design = Design(40, 10, n_sites=4)
    sxx = 10 * (10**2 - 1) / 12
    assert slope_variance(components, design) == pytest.approx((0.2**2 + 0.3**2 / 4 + 0.5**2 / 40) / sxx, rel=1e-12)
    assert slope_variance(components, design) == pytest.approx(index_variance(components, design) / sxx, rel=1e-12)


@pytest.mark.parametrize("rho", [0.5, -0.4])
def test_slope_variance_with_ar1_year_effects_is_the_least_squares_sandwich(rho):
    components = lognormal(0.25, 0.6, rho, station_sd=0.3)
    design = Design(20, 12)
    t = np.arange(12)
    sigma = 0.25**2 * rho ** np.abs(np.subtract.outer(t, t)) + 0.6**2 / 20 * np.eye(12)
    assert slope_variance(components, design) == pytest.approx(ls_slope_variance(sigma), rel=1e-10)
    # unlimited stations: the year effects alone
    assert slope_variance(components, design, unlimited_stations=True) == pytest.approx(
        ls_slope_variance(0.25**2 * rho ** np.abs(np.subtract.outer(t, t))), rel=1e-10)
    # consecutive years alike (rho > 0) look like a trend: a larger variance than independent years
    independent = slope_variance(lognormal(0.25, 0.6, 0.0, station_sd=0.3), design)
    assert (slope_variance(components, design) > independent) == (rho > 0)


def test_approximate_power_with_ar1_is_the_noncentral_t_of_that_variance():
    components = lognormal(0.2, 0.5, 0.5)
    scenario = Scenario.from_change(-0.3, 10, side="decline")
    design = Design(30, 12)
    se = math.sqrt(slope_variance(components, design))
    q = stats.t.isf(0.05, 10)
    approx = approximate_power(components, design, scenario)
    assert approx.df == 10 and "AR(1)" in approx.label
    assert approx.power == pytest.approx(float(stats.nct.cdf(-q, 10, scenario.slope / se)), rel=1e-9)
    se_limit = math.sqrt(slope_variance(components, design, unlimited_stations=True))
    assert approx.ceiling == pytest.approx(float(stats.nct.cdf(-q, 10, scenario.slope / se_limit)), rel=1e-9)
    assert approx.power < approximate_power(lognormal(0.2, 0.5, 0.0), design, scenario).power


def test_simulated_least_squares_slope_has_the_sandwich_variance():
    # the yearly-means fitter is the least-squares slope of the yearly means: over 1000 simulated data
    # sets its variance is c' Sigma c (sample variance SE about V sqrt(2 / (R - 1)) = 4.5 %)
    components = lognormal(0.25, 0.5, 0.6, station_sd=0.3, stations_per_site=1000)
    design = Design(10, 12)
    scenario = Scenario(-0.03, side="decline")
    result = simulate_power(components, design, scenario, rng=np.random.default_rng(12), n_replicates=1000,
                            fitter="yearly-means", approximation=False)
    slopes = result.replicates["slope"].to_numpy(float)
    v = slope_variance(components, design)
    assert np.var(slopes, ddof=1) == pytest.approx(v, rel=4 * math.sqrt(2 / 999))
    assert slopes.mean() == pytest.approx(scenario.slope, abs=4 * math.sqrt(v / 1000))
    # independent years would claim a variance far outside that window
    assert slope_variance(lognormal(0.25, 0.5, 0.0, station_sd=0.3), design) < v * (1 - 8 * math.sqrt(2 / 999))


def test_components_from_an_ar1_trend_carry_its_correlation():
    from monitor.trend import TrendModel

    data = pd.read_csv(FIXTURES / "glmm_year_data.csv").drop(columns="count").rename(columns={"count_nb": "count"})
    result = TrendModel(data, "count", family="negbin", year_random="ar1").fit(profile=False, indices=False,
                                                                                fast=False)
    ref = json.loads((FIXTURES / "reference_year_values.json").read_text())["negbin_year_ar1"]
    components = components_from_trend(result)
    # glmmTMB 1.1.5 ar1(fyear + 0 | one): rho 0.155
    assert components.year_rho == pytest.approx(ref["rho"], rel=1e-3)
    assert components.year_sd == pytest.approx(ref["sd"]["one"], rel=1e-3)
    iid = TrendModel(data, "count", family="negbin").fit(profile=False, indices=False)
    assert components_from_trend(iid).year_rho == 0.0
    # the AR(1) fit widens its interval for the uncertainty of the correlation (monitor/trend/year_level.py)
    # and says so; the iid fit does not
    assert "ar1_interval_widened" in {d.code for d in result.diagnostics}
    assert "ar1_interval_widened" not in {d.code for d in iid.diagnostics}
    assert result.se_scale > 1.0 and "AR(1)" in result.df_method
    # ... and the reported interval is the widened one: slope +/- t(df) x factor x ML SE (scipy.stats.t)
    from scipy.stats import t as t_dist

    half = t_dist.ppf(0.975, result.slope_df) * result.se_scale * result.slope_se
    assert result.annual_change.upper == pytest.approx(math.expm1(result.slope + half), rel=1e-12)
    assert result.annual_change.lower == pytest.approx(math.expm1(result.slope - half), rel=1e-12)


def test_power_command_takes_the_year_correlation(capsys):
    args = ["power", "--mean", "5", "--station-sd", "0.5", "--obs-sd", "0.3", "--sd-year", "0.2", "--year-rho", "0.5",
            "--change", "-0.5", "--over", "10", "--stations", "10", "--years", "8", "--replicates", "4", "--seed", "3",
            "--no-search", "--json"]
    assert main(args) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["components"]["year_rho"] == 0.5
    assert "AR(1)" in out["results"][0]["approximation"]
    bad = args[:args.index("--year-rho") + 1] + ["1.2"] + args[args.index("--year-rho") + 2:]
    assert main(bad) == 2
    assert "--year-rho" in capsys.readouterr().err


# --- the power study as users run it: the trend engine fitting the AR(1) year effect -------------

def _engine_ar1_case():
    # counts near 5000 and a small observation SD: the yearly means carry the AR(1) year effects
    return (VarianceComponents(family="poisson-lognormal", intercept=math.log(5000.0), station_sd=0.5,
                               observation_sd=0.02, year_sd=0.25, year_rho=0.4, stations_per_site=1000),
            Design(15, 15))


@pytest.mark.slow
def test_engine_slopes_with_ar1_year_effects_have_the_sandwich_variance():
    # The power study's simulated slopes, fitted by the engine with its AR(1) year effect (as the
    # programme's analysis fits them), vary as the approximation says: the least-squares sandwich
    # c' Sigma c (for a straight line GLS gains little over least squares).  The sample SD of 400
    # slopes has an SE of about 1 / sqrt(2 * 400) = 3.5 % of the SD.  (Whether the engine's own
    # standard errors match that spread is another matter: see DEVELOPERS.md, power with AR(1).)
    components, design = _engine_ar1_case()
    scenario = Scenario.from_change(-0.3, 10, side="decline")
    result = simulate_power(components, design, scenario, rng=np.random.default_rng(31), n_replicates=400,
                            n_workers=1)
    assert result.n_failed <= 4
    slopes = result.replicates.loc[~result.replicates["failed"], "slope"].to_numpy(float)
    sd = math.sqrt(slope_variance(components, design))
    assert float(np.std(slopes, ddof=1)) == pytest.approx(sd, rel=4 / math.sqrt(2 * len(slopes)))
    assert float(np.mean(slopes)) == pytest.approx(scenario.slope, abs=4 * sd / math.sqrt(len(slopes)))
