"""Coverage and false calls of the trend interval when years fluctuate together (a simulation study).

Truth (invented, seeded): log (or logit) mean = b0 + b1 t + u_station + v_site + w_year (+ e), with
u ~ N(0, 0.5^2), v ~ N(0, 0.3^2), w ~ N(0, sd_year^2) shared by every station in a year, and the
family's own noise: poisson; poisson-lognormal (e ~ N(0, 0.3^2)); negbin (NB2 size 3); binomial
(20 cells, no extra variation); logit-normal cover (residual SD 0.5, values strictly inside 0-100 %).
Stations sit 5 to a site (40 stations) or 10 to a site (400 stations); every station every year.

Each data set is fitted as `monitor trend` fits it (full maximum likelihood, year effect by the
default rule, t reference with between-year df, Wald interval; `profile=False` for speed) and we count

* coverage: the 95 % interval of the annual change contains the truth;
* false calls: the call is "rising" or "declining" although the truth has no trend (b1 = 0).

Both come from the same no-trend replicates (true b1 = 0): the interval then covers the truth
exactly when it does not exclude zero.  A second truth with b1 = -0.03 can be run with --slope.

    nice -n 10 python tests/trend/simulate_coverage.py --replicates 400 --out coverage.csv
    python tests/trend/simulate_coverage.py --families negbin --sd-year 0.2 --years 12 \
        --stations 40 --replicates 50

The table printed (and written to --out) has one row per cell with its replicate count and
Monte-Carlo standard errors.  References: Piepho & Ogutu (2002) JABES 7:350-360; Urquhart,
Paulsen & Larsen (1998) Ecol. Appl. 8:246-257.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.special import expit

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from monitor.trend import TrendModel  # noqa: E402

FAMILIES = ("poisson", "poisson-lognormal", "negbin", "binomial", "logit-normal")
SD_YEAR = (0.1, 0.2, 0.3)
N_YEARS = (10, 12, 25)
N_STATIONS = (40, 400)
MEASURE = {"poisson": "count", "poisson-lognormal": "count", "negbin": "count", "binomial": "frequency",
           "logit-normal": "cover"}


def simulate(family: str, sd_year: float, n_years: int, n_stations: int, slope: float,
             rng: np.random.Generator) -> pd.DataFrame:
    """One data set from the truth in the module notes."""
    per_site = 5 if n_stations <= 100 else 10
    years = np.arange(2000, 2000 + n_years)
    st = np.repeat(np.arange(n_stations), n_years)
    yr = np.tile(years, n_stations)
    site = st // per_site
    t = yr - years.mean()
    eta = (slope * t + rng.normal(0, 0.5, n_stations)[st] + rng.normal(0, 0.3, site.max() + 1)[site]
           + rng.normal(0, sd_year, n_years)[yr - years[0]])
    d = pd.DataFrame({"station": st, "site": site, "year": yr})
    if family == "poisson":
        d["count"] = rng.poisson(np.exp(1.2 + eta))
    elif family == "poisson-lognormal":
        d["count"] = rng.poisson(np.exp(1.2 + eta + rng.normal(0, 0.3, len(d))))
    elif family == "negbin":
        mu = np.exp(1.2 + eta)
        d["count"] = rng.negative_binomial(3.0, 3.0 / (3.0 + mu))
    elif family == "binomial":
        d["cells"] = 20
        d["occupied"] = rng.binomial(20, expit(-0.5 + eta))
    else:
        d["cover_pct"] = 100 * expit(-1.0 + eta + rng.normal(0, 0.5, len(d)))
    return d


def one_replicate(family, sd_year, n_years, n_stations, slope, rng) -> dict:
    d = simulate(family, sd_year, n_years, n_stations, slope, rng)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        r = TrendModel(d, MEASURE[family], family=family).fit(profile=False, indices=False, fast=False)
    truth = math.expm1(slope)
    ac = r.annual_change
    return {"covered": ac.lower <= truth <= ac.upper, "call": r.call, "slope_df": r.slope_df,
            "year_sd": r.random_sd.get("year", float("nan")), "converged": r.converged}


def run_cell(family, sd_year, n_years, n_stations, replicates, seed, slope=0.0) -> dict:
    """Replicates of one cell; a seed per cell so that cells can be rerun alone."""
    cell_seed = [seed, FAMILIES.index(family), int(round(sd_year * 100)), n_years, n_stations]
    rng = np.random.default_rng(cell_seed)
    t0 = time.perf_counter()
    rows = [one_replicate(family, sd_year, n_years, n_stations, slope, rng) for _ in range(replicates)]
    cov = float(np.mean([r["covered"] for r in rows]))
    false = float(np.mean([r["call"] in ("rising", "declining") for r in rows])) if slope == 0 else float("nan")
    return {"family": family, "sd_year": sd_year, "n_years": n_years, "n_stations": n_stations,
            "slope": slope, "replicates": replicates, "coverage": cov,
            "coverage_mc_se": math.sqrt(max(cov * (1 - cov), 0.95 * 0.05) / replicates),
            "false_calls": false,
            "false_calls_mc_se": math.sqrt(max(false * (1 - false), 0.05 * 0.95) / replicates) if slope == 0 else float("nan"),
            "median_year_sd": float(np.nanmedian([r["year_sd"] for r in rows])),
            "not_converged": int(sum(not r["converged"] for r in rows)),
            "seconds_per_fit": (time.perf_counter() - t0) / replicates}


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--replicates", type=int, default=400)
    p.add_argument("--families", nargs="*", default=list(FAMILIES), choices=FAMILIES)
    p.add_argument("--sd-year", nargs="*", type=float, default=list(SD_YEAR))
    p.add_argument("--years", nargs="*", type=int, default=list(N_YEARS))
    p.add_argument("--stations", nargs="*", type=int, default=list(N_STATIONS))
    p.add_argument("--slope", type=float, default=0.0, help="true slope on the link scale (default 0: no trend)")
    p.add_argument("--seed", type=int, default=20261202)
    p.add_argument("--out", type=Path, default=None, help="CSV to append each finished cell to")
    a = p.parse_args(argv)
    for n_st in a.stations:
        for n_y in a.years:
            for sd in a.sd_year:
                for fam in a.families:
                    row = run_cell(fam, sd, n_y, n_st, a.replicates, a.seed, a.slope)
                    line = pd.DataFrame([row])
                    if a.out is not None:
                        line.to_csv(a.out, mode="a", header=not a.out.exists(), index=False)
                    print(line.to_string(index=False, header=True, float_format=lambda v: f"{v:.3f}"), flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
