"""False calls of the trend interval with AR(1) year effects, the engine fitting an AR(1) year effect (not a test).

Truth (invented, seeded): log mean = 1.2 + u_station + v_site + w_year, no trend, u ~ N(0, 0.5^2),
v ~ N(0, 0.3^2), w an AR(1) series over the years (SD --sd-year, correlation --rho), Poisson counts
with an observation-level effect (SD 0.3); 5 stations a site.  Each data set is fitted as
`monitor trend --year-effect ar1` fits it (full ML, indices off) and we count the 95 % intervals
that exclude no change: with the year-level correction (what the tool reports) and with the plain
ML t interval (slope SE x t quantile on the between-year df) beside it.

    PYTHONPATH=. python tests/benchmarks/ar1_false_calls.py --replicates 400 --rho 0.4 --years 15
"""

from __future__ import annotations

import argparse
import math
import time
import warnings

import numpy as np
import pandas as pd
from scipy.stats import t as t_dist

from monitor.trend import TrendModel


def simulate(rng, n_st, n_years, sd_year, rho):
    st = np.repeat(np.arange(n_st), n_years)
    yi = np.tile(np.arange(n_years), n_st)
    site = st // 5
    w = np.empty(n_years)
    w[0] = rng.normal(0, sd_year)
    for g in range(1, n_years):
        w[g] = rho * w[g - 1] + rng.normal(0, sd_year * math.sqrt(1 - rho * rho))
    eta = 1.2 + rng.normal(0, 0.5, n_st)[st] + rng.normal(0, 0.3, site.max() + 1)[site] + w[yi]
    d = pd.DataFrame({"station": st, "site": site, "year": 2000 + yi})
    d["count"] = rng.poisson(np.exp(eta + rng.normal(0, 0.3, len(d))))
    return d


def main() -> None:
    p = argparse.ArgumentParser()
    p.add_argument("--replicates", type=int, default=400)
    p.add_argument("--stations", type=int, default=40)
    p.add_argument("--years", type=int, default=15)
    p.add_argument("--sd-year", type=float, default=0.25)
    p.add_argument("--rho", type=float, default=0.4)
    p.add_argument("--seed", type=int, default=20261202)
    a = p.parse_args()
    rng = np.random.default_rng([a.seed, int(100 * a.rho), a.years])
    corrected = plain = calls = 0
    factors = []
    t0 = time.perf_counter()
    for _ in range(a.replicates):
        d = simulate(rng, a.stations, a.years, a.sd_year, a.rho)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            r = TrendModel(d, "count", family="poisson-lognormal", year_random="ar1").fit(
                profile=False, indices=False, fast=False)
        corrected += not (r.annual_change.lower <= 0 <= r.annual_change.upper)
        plain += abs(r.slope) / r.slope_se > t_dist.ppf(0.975, r.slope_df)
        calls += r.call in ("rising", "declining")
        factors.append(r.se_scale)
    n = a.replicates
    se = math.sqrt(0.05 * 0.95 / n)
    print(f"AR(1) rho {a.rho}, year SD {a.sd_year}, {a.stations} stations x {a.years} years, {n} trend-free "
          f"series ({(time.perf_counter() - t0) / n:.2f} s a fit)")
    print(f"  interval excludes no change: reported {corrected / n:.3f}, plain ML t {plain / n:.3f} "
          f"(target 0.05, Monte-Carlo SE {se:.3f}); rising/declining calls {calls / n:.3f}; "
          f"median SE factor {np.median(factors):.2f}")


if __name__ == "__main__":
    main()
