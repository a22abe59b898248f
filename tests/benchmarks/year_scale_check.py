"""The engine's t statistic of the slope beside the exact t of the regression of yearly means.

    PYTHONPATH=. python tests/benchmarks/year_scale_check.py [--datasets 80]

Poisson-lognormal counts near 5000 (station noise all but gone), year SD 0.25, station SD 0.5,
20 stations x 10 years, a 40 % fall over 10 years (invented, seeded).  The least-squares t test of
the 10 yearly mean log counts on year is exact (t on 8 df).  Prints the median (5-95 %) of the
ratio engine t / exact t for the engine's factor on the ML standard error (monitor.trend.model.
_ml_year_scale, sqrt((G - 1 + k) / (G - 2))) and for the plain sqrt(G / (G - 2)), and the median k.
"""

from __future__ import annotations

import argparse
import math
import warnings

import numpy as np

from monitor.power import Design, Scenario, VarianceComponents, simulate_dataset
from monitor.trend import TrendModel


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--datasets", type=int, default=80)
    args = parser.parse_args()
    components = VarianceComponents(family="poisson-lognormal", intercept=math.log(5000.0), station_sd=0.5,
                                    observation_sd=0.02, year_sd=0.25, stations_per_site=1000)
    scenario = Scenario.from_change(-0.4, 10, side="decline")
    rng = np.random.default_rng(5)
    rows = []
    for _ in range(args.datasets):
        d = simulate_dataset(components, Design(20, 10), scenario, rng)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            r = TrendModel(d, "count", family="poisson-lognormal", site_effect=False).fit(profile=False,
                                                                                        indices=False)
        means = np.log(d["count"]).groupby(d["year"]).mean()
        x = means.index.to_numpy(float)
        x = x - x.mean()
        y = means.to_numpy()
        b = x @ (y - y.mean()) / (x @ x)
        resid = y - y.mean() - b * x
        t_exact = b / math.sqrt(resid @ resid / (len(y) - 2) / (x @ x))
        G = r.n_years
        kappa = (r.se_scale ** 2) * (G - 2) - (G - 1)
        rows.append((r.slope / (r.slope_se * r.se_scale) / t_exact,
                     r.slope / (r.slope_se * math.sqrt(G / (G - 2))) / t_exact, kappa))
    a = np.array(rows)
    for label, col in (("engine factor sqrt((G - 1 + k) / (G - 2))", 0), ("plain sqrt(G / (G - 2))", 1)):
        lo, hi = np.percentile(a[:, col], [5, 95])
        print(f"{label:44s} engine t / exact t: median {np.median(a[:, col]):.4f} (5-95 %: {lo:.3f}-{hi:.3f})")
    print(f"median k {np.median(a[:, 2]):.3f} over {len(a)} data sets")


if __name__ == "__main__":
    main()
