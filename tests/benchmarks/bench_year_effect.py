"""Benchmark: the full ML fit with a year effect, ours beside glmmTMB's, in one run (not a test).

An invented programme of 2,000 stations in 20 sites over 25 years (about 50,000 visits),
NB2 counts (size 3) with site, station and year effects (SDs 0.4, 0.6, 0.2) and a
slope of -0.02 a year.  The same model is fitted by

* ours: ``TrendModel(d, "count", family="negbin", year_random="iid").fit(profile=False,
  indices=False, fast=False)`` (Laplace ML, Hessian standard errors), and the poisson-
  lognormal and binomial families likewise;
* glmmTMB: ``glmmTMB(count ~ t + (1|site) + (1|station) + (1|fyear), family = nbinom2)``
  (and the matching poisson + (1|obs) and binomial models), run by Rscript from here on
  the same data; glmmTMB's time is measured inside R around the fit alone (reading the
  data and starting R are left out), with one OpenMP/BLAS thread.

Prints the time ratio and the differences of the estimates.

    OPENBLAS_NUM_THREADS=1 PYTHONPATH=. python tests/benchmarks/bench_year_effect.py [--quick] [--families negbin,...]

--quick uses 500 stations.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.special import expit

from monitor.trend import TrendModel

R_SCRIPT = r"""
suppressPackageStartupMessages(library(glmmTMB)); library(jsonlite)
a <- commandArgs(trailingOnly = TRUE)
d <- read.csv(a[1]); d$site <- factor(d$site); d$station <- factor(paste(d$site, d$station))
d$fyear <- factor(d$year); d$t <- d$year - (min(d$year) + max(d$year)) / 2; d$obs <- factor(seq_len(nrow(d)))
fam <- a[2]
ctl <- glmmTMBControl(parallel = 1)
tm <- system.time({
  m <- if (fam == "negbin") {
    glmmTMB(count ~ t + (1 | site) + (1 | station) + (1 | fyear), d, family = nbinom2, control = ctl)
  } else if (fam == "poisson-lognormal") {
    glmmTMB(count ~ t + (1 | site) + (1 | station) + (1 | fyear) + (1 | obs), d, family = poisson, control = ctl)
  } else {
    glmmTMB(cbind(occupied, cells - occupied) ~ t + (1 | site) + (1 | station) + (1 | fyear), d,
            family = binomial, control = ctl)
  }
  s <- sqrt(diag(vcov(m)$cond))
})
vc <- VarCorr(m)$cond
out <- list(time = tm[["elapsed"]], cpu = tm[["user.self"]] + tm[["sys.self"]],
            slope = fixef(m)$cond[["t"]], se = s[["t"]], loglik = as.numeric(logLik(m)),
            sd = lapply(vc, function(v) attr(v, "stddev")[[1]]), sigma = sigma(m),
            version = as.character(packageVersion("glmmTMB")))
writeLines(toJSON(out, auto_unbox = TRUE, digits = NA), a[3])
"""
R_NAMES = {"site": "site", "station": "station", "year": "fyear", "observation": "obs"}


def programme(rng: np.random.Generator, n_station=2000, n_site=20, n_year=25) -> pd.DataFrame:
    st = np.repeat(np.arange(n_station), n_year)
    yi = np.tile(np.arange(n_year), n_station)
    site = st % n_site
    t = yi - (n_year - 1) / 2
    eta = (-0.02 * t + rng.normal(0, 0.6, n_station)[st] + rng.normal(0, 0.4, n_site)[site]
           + rng.normal(0, 0.2, n_year)[yi])
    mu = np.exp(1.0 + eta)
    d = pd.DataFrame({"station": st, "site": site, "year": 2000 + yi})
    d["count"] = rng.negative_binomial(3.0, 3.0 / (3.0 + mu))
    d["count_pln"] = rng.poisson(np.exp(1.0 + eta + rng.normal(0, 0.3, len(d))))
    d["cells"] = 20
    d["occupied"] = rng.binomial(20, expit(-0.5 + eta))
    return d


def ours(d: pd.DataFrame, family: str):
    if family == "poisson-lognormal":
        d = d.drop(columns="count").rename(columns={"count_pln": "count"})
    measure = "frequency" if family == "binomial" else "count"
    t0, c0 = time.perf_counter(), time.process_time()
    r = TrendModel(d, measure, family=family, year_random="iid").fit(profile=False, indices=False, fast=False)
    return time.perf_counter() - t0, time.process_time() - c0, r


def glmmtmb(d: pd.DataFrame, family: str, tmp: Path) -> dict:
    if family == "poisson-lognormal":
        d = d.drop(columns="count").rename(columns={"count_pln": "count"})
    data, script, out = tmp / "d.csv", tmp / "fit.R", tmp / "out.json"
    d.to_csv(data, index=False)
    script.write_text(R_SCRIPT)
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    subprocess.run(["Rscript", str(script), str(data), family, str(out)], check=True, env=env, timeout=3600)
    return json.loads(out.read_text())


def main() -> None:
    quick = "--quick" in sys.argv
    fams = ["negbin", "poisson-lognormal", "binomial"]
    if "--families" in sys.argv:
        fams = sys.argv[sys.argv.index("--families") + 1].split(",")
    d = programme(np.random.default_rng(20261202), n_station=500 if quick else 2000)
    print(f"programme: {len(d)} visits, {d.station.nunique()} stations, {d.site.nunique()} sites, "
          f"{d.year.nunique()} years")
    with tempfile.TemporaryDirectory() as tmp:
        for fam in fams:
            wall, cpu, r = ours(d, fam)
            ref = glmmtmb(d, fam, Path(tmp))
            print(f"\n{fam}: ours {wall:.1f} s wall ({cpu:.1f} s CPU), glmmTMB {ref['version']} {ref['time']:.1f} s "
                  f"wall ({ref['cpu']:.1f} s CPU): glmmTMB / ours = {ref['time'] / wall:.2f}x wall, "
                  f"{ref['cpu'] / cpu:.2f}x CPU; ours converged={r.converged}, estimator {r.estimator}")
            print(f"  slope  ours {r.slope:+.6f} glmmTMB {ref['slope']:+.6f}  diff {r.slope - ref['slope']:+.1e}")
            print(f"  SE     ours {r.slope_se:.6f} glmmTMB {ref['se']:.6f}  rel diff {r.slope_se / ref['se'] - 1:+.1e}")
            for k, v in r.random_sd.items():
                rv = ref["sd"][R_NAMES[k]]
                print(f"  SD {k:11s} ours {v:.5f} glmmTMB {rv:.5f}  rel diff {v / rv - 1:+.1e}")
            if fam == "negbin":
                print(f"  size   ours {r.dispersion:.5f} glmmTMB {ref['sigma']:.5f}  rel diff "
                      f"{r.dispersion / ref['sigma'] - 1:+.1e}")
            print(f"  loglik ours {r.loglik:.4f} glmmTMB {ref['loglik']:.4f}  diff {r.loglik - ref['loglik']:+.1e}")


if __name__ == "__main__":
    main()
