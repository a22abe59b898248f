"""Figures behind the power checks with year-to-year variation (run as a script; not a timed test).

    PYTHONPATH=. python tests/benchmarks/power_year_checks.py [--replicates 1000]

Prints (1) simulated power beside the exact noncentral t of the regression of yearly means
(scipy.stats.nct) as the station noise shrinks, with the reference fitter of yearly means and with
the trend engine as a power study runs it; (2) the type I error of the study with a year effect;
(3) with AR(1) year effects (rho 0.4, 15 stations x 15 years, the engine fitting an AR(1) year
effect): the spread of the fitted slopes beside the approximation's least-squares sandwich
sqrt(c' Sigma c), the engine's median standard error, the type I error and the power.
"""

from __future__ import annotations

import argparse
import math

import numpy as np
import scipy
from scipy import stats

from monitor.power import Design, Scenario, VarianceComponents, simulate_power, slope_variance


def exact(slope: float, sd: float, n_years: int, alpha: float = 0.05) -> float:
    df = n_years - 2
    ncp = slope * math.sqrt(n_years * (n_years**2 - 1) / 12) / sd
    return float(stats.nct.cdf(-stats.t.isf(alpha, df), df, ncp))


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--replicates", type=int, default=1000)
    parser.add_argument("--workers", type=int, default=1)
    parser.add_argument("--sections", type=int, nargs="*", default=[1, 2, 3], help="which of (1), (2), (3) to run")
    args = parser.parse_args()
    r_, w_ = args.replicates, args.workers
    print(f"scipy {scipy.__version__}; {r_} replicates a row; one-sided 5 % test of a 40 % fall over 10 years")
    scenario = Scenario.from_change(-0.4, 10, side="decline")
    if 1 in args.sections:
        section_exact(r_, w_, scenario)
    if 2 in args.sections:
        section_type_one(r_, w_)
    if 3 in args.sections:
        section_ar1(r_, w_)


def section_exact(r_: int, w_: int, scenario: Scenario) -> None:
    print("\n(1) simulated vs exact noncentral t (df = n_years - 2), year SD 0.25, 20 stations x 10 years")
    print("fitter        station noise SD  exact   approximation  simulated +/- MC SE   z")
    for fitter, family, noise in [("yearly-means", "lognormal", 0.5), ("yearly-means", "lognormal", 0.1),
                                  ("yearly-means", "lognormal", 0.001), ("trend", "poisson-lognormal", 0.3),
                                  ("trend", "poisson-lognormal", 0.02)]:
        if family == "lognormal":
            components = VarianceComponents.from_mean("lognormal", 10.0, residual_sd=noise, station_sd=0.5,
                                                      year_sd=0.25, stations_per_site=1000)
            var_visit = noise**2
        else:
            components = VarianceComponents(family=family, intercept=math.log(5000.0), station_sd=0.5,
                                            observation_sd=noise, year_sd=0.25, stations_per_site=1000)
            var_visit = noise**2 + 1 / 5000
        p_exact = exact(scenario.slope, math.sqrt(0.25**2 + var_visit / 20), 10)
        result = simulate_power(components, Design(20, 10), scenario, rng=np.random.default_rng(2024),
                                n_replicates=r_, n_workers=w_, fitter=fitter)
        se = math.sqrt(p_exact * (1 - p_exact) / result.n_fitted)
        print(f"{fitter:13s} {noise:16g}  {p_exact:.3f}   {result.approximation.power:.3f}          "
              f"{result.power:.3f} +/- {result.power_se:.3f}   {(result.power - p_exact) / se:+.2f}")


def section_type_one(r_: int, w_: int) -> None:
    print("\n(2) type I error, no change, two-sided 5 %: poisson-lognormal, 24 stations x 10 years, "
          "station SD 0.6, site SD 0.2, observation SD 0.3")
    print("year SD  fitter          rejections   share +/- MC SE")
    for year_sd, fitter in [(0.2, "trend"), (0.0, "trend"), (0.2, "trend-no-year")]:
        components = VarianceComponents.from_mean("poisson-lognormal", 4.0, station_sd=0.6, site_sd=0.2,
                                                  observation_sd=0.3, year_sd=year_sd, stations_per_site=8)
        n = r_ if fitter == "trend" else max(200, r_ // 5)
        result = simulate_power(components, Design(24, 10), Scenario(0.0, side="two-sided"),
                                rng=np.random.default_rng(6), n_replicates=n, n_workers=w_, fitter=fitter)
        k = int(round(result.power * result.n_fitted))
        print(f"{year_sd:7g}  {fitter:14s} {k:4d} / {result.n_fitted:<5d}  {result.power:.3f} +/- "
              f"{math.sqrt(0.05 * 0.95 / result.n_fitted):.3f} (failed {result.n_failed})")



def section_ar1(r_: int, w_: int) -> None:
    print("\n(3) AR(1) year effects, rho 0.4, year SD 0.25, 15 stations x 15 years, engine with an AR(1) year effect")
    components = VarianceComponents(family="poisson-lognormal", intercept=math.log(5000.0), station_sd=0.5,
                                    observation_sd=0.02, year_sd=0.25, year_rho=0.4, stations_per_site=1000)
    design = Design(15, 15)
    sandwich = math.sqrt(slope_variance(components, design))
    print("test                      rejections   share +/- MC SE   approximation   slope SD  sandwich  median SE")
    for label, scenario, seed in [("two-sided, no change", Scenario(0.0, side="two-sided"), 32),
                                  ("decline, -30 % / 10 y", Scenario.from_change(-0.3, 10, side="decline"), 31)]:
        result = simulate_power(components, design, scenario, rng=np.random.default_rng(seed), n_replicates=r_,
                                n_workers=w_)
        fitted = result.replicates[~result.replicates["failed"]]
        k = int(round(result.power * result.n_fitted))
        print(f"{label:25s} {k:4d} / {result.n_fitted:<5d}  {result.power:.3f} +/- {result.power_se:.3f}   "
              f"{result.approximation.power:.3f}           {fitted['slope'].std():.4f}    {sandwich:.4f}    "
              f"{fitted['slope_se'].median():.4f}")


if __name__ == "__main__":
    main()
