"""Benchmark of the trend engine (not part of the test run).

1. An invented programme of 2,000 stations in 20 sites over 25 years (about 50,000
   visits), Poisson-lognormal counts with site and station intercepts.  Our maximum
   likelihood fits (Laplace) are timed beside statsmodels' PoissonBayesMixedGLM
   (variational Bayes, fit_vb) on the same data, in the same run; the ratios are
   printed.  fit_vb runs with fit_method="L-BFGS-B": with its default (BFGS) it stops at
   once on these data with a meaningless answer (slope about 0, SDs 1).  statsmodels gets site and station variance components only:
   with the observation-level component as well (one random effect per visit) fit_vb
   with its default BFGS held a dense matrix over every random effect's mean and SD and
   needed 16 GB of memory at 12,500 visits, and with L-BFGS-B it is slower still, so that
   comparison is not run.  Our
   Poisson-lognormal fit (with the observation-level effect) and our Poisson fit with
   exactly statsmodels' structure are both timed.
2. 50 species of a demo-sized programme (60 stations x 12 years): the whole-run time of
   the full fit (profile interval and yearly indices) and of the fast path.

    PYTHONPATH=. python tests/benchmarks/bench_trend.py [--quick]

--quick uses 500 stations (about 12,500 visits) for a faster look; --small-only runs
only part 2 (and the 60 x 10 fast-path timing).
"""

from __future__ import annotations

import sys
import time
import warnings

import numpy as np
import pandas as pd

from monitor.trend import TrendModel


def big_programme(rng: np.random.Generator, n_station=2000, n_site=20, n_year=25, visit_rate=1.0):
    st = np.repeat(np.arange(n_station), n_year)
    yr = np.tile(np.arange(2000, 2000 + n_year), n_station)
    site = st % n_site
    keep = rng.random(len(st)) < visit_rate
    st, yr, site = st[keep], yr[keep], site[keep]
    eta = (1.0 - 0.02 * (yr - 2012) + rng.normal(0, 0.6, n_station)[st] + rng.normal(0, 0.4, n_site)[site]
           + rng.normal(0, 0.3, len(st)))
    return pd.DataFrame({"station": st, "site": site, "year": yr, "count": rng.poisson(np.exp(eta))})


def time_ours(d: pd.DataFrame, family="poisson-lognormal", **fit_kw):
    t0, c0 = time.perf_counter(), time.process_time()
    r = TrendModel(d, "count", family=family).fit(**fit_kw)
    return (time.perf_counter() - t0, time.process_time() - c0), r


def time_statsmodels(d: pd.DataFrame):
    from statsmodels.genmod.bayes_mixed_glm import PoissonBayesMixedGLM

    d = d.assign(t=d["year"] - 2012.0)
    t0, c0 = time.perf_counter(), time.process_time()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m = PoissonBayesMixedGLM.from_formula(
            "count ~ t", {"site": "0 + C(site)", "station": "0 + C(station)"}, d)
        f = m.fit_vb(fit_method="L-BFGS-B")
    return (time.perf_counter() - t0, time.process_time() - c0), f


def main(quick: bool = False) -> None:
    rng = np.random.default_rng(20240601)
    n_station = 500 if quick else 2000
    d = big_programme(rng, n_station=n_station)
    print(f"programme: {len(d)} visits, {d.station.nunique()} stations, {d.site.nunique()} sites, "
          f"{d.year.nunique()} years")
    t_fast, r_fast = time_ours(d, profile=False, indices=False)
    t_ml, r_ml = time_ours(d, profile=False, indices=False, fast=False)
    t_po, r_po = time_ours(d, family="poisson", profile=False, indices=False, fast=False)
    print("times: wall s / CPU s")
    print(f"ours, fast path           : {t_fast[0]:8.2f} / {t_fast[1]:8.2f}  slope {r_fast.slope:+.5f} "
          f"(se {r_fast.slope_se:.5f}) SDs {', '.join(f'{k} {v:.3f}' for k, v in r_fast.random_sd.items())}")
    print(f"ours, Laplace ML + Hessian: {t_ml[0]:8.2f} / {t_ml[1]:8.2f}  slope {r_ml.slope:+.5f} "
          f"(se {r_ml.slope_se:.5f}) SDs {', '.join(f'{k} {v:.3f}' for k, v in r_ml.random_sd.items())} "
          f"loglik {r_ml.loglik:.2f}")
    print(f"ours, Poisson (site + station only), Laplace ML + Hessian: {t_po[0]:8.2f} / {t_po[1]:8.2f}  "
          f"slope {r_po.slope:+.5f} (se {r_po.slope_se:.5f})")
    t_sm, f_sm = time_statsmodels(d)
    k = list(f_sm.model.exog_names).index("t")
    sds = np.exp(f_sm.vcp_mean)
    print(f"statsmodels PoissonBayesMixedGLM.fit_vb: {t_sm[0]:8.2f} / {t_sm[1]:8.2f}  slope {f_sm.fe_mean[k]:+.5f} "
          f"(posterior sd {f_sm.fe_sd[k]:.5f}) SDs {', '.join(f'{n} {v:.3f}' for n, v in zip(f_sm.model.vcp_names, sds, strict=False))}")
    for lab, i in (("wall", 0), ("CPU", 1)):
        print(f"ratio statsmodels / ours ({lab}): Poisson-lognormal fast path {t_sm[i] / t_fast[i]:.1f}x, "
              f"Poisson-lognormal Laplace ML + Hessian {t_sm[i] / t_ml[i]:.1f}x, "
              f"Poisson same structure {t_sm[i] / t_po[i]:.1f}x")

    small_programmes()


def small_programmes() -> None:
    # the fast path the power analysis uses: 60 stations x 10 years, Poisson-lognormal
    ts = []
    for rep in range(20):
        ds = big_programme(np.random.default_rng(500 + rep), n_station=60, n_site=6, n_year=10)
        t_w, c0 = time.perf_counter(), time.process_time()
        TrendModel(ds, "count").fit(profile=False, indices=False)
        ts.append((time.perf_counter() - t_w, time.process_time() - c0))
    med = np.median(np.array(ts), axis=0)
    print(f"fast path, 60 stations x 10 years (median of 20 fits): {med[0]:.3f} s wall / {med[1]:.3f} s CPU")

    # 50 species of a demo-sized programme
    full = np.zeros(2)
    fast = np.zeros(2)
    for sp in range(50):
        rs = np.random.default_rng(1000 + sp)
        ds = big_programme(rs, n_station=60, n_site=6, n_year=12, visit_rate=0.9)
        t0, c0 = time.perf_counter(), time.process_time()
        TrendModel(ds, "count").fit(profile=True, indices=True)
        full += (time.perf_counter() - t0, time.process_time() - c0)
        t0, c0 = time.perf_counter(), time.process_time()
        TrendModel(ds, "count").fit(profile=False, indices=False)
        fast += (time.perf_counter() - t0, time.process_time() - c0)
    print(f"50 species, 60 stations x 12 years: full fits (profile + indices) {full[0]:.1f} s wall / "
          f"{full[1]:.1f} s CPU; fast path {fast[0]:.1f} s wall / {fast[1]:.1f} s CPU")


if __name__ == "__main__":
    if "--small-only" in sys.argv:
        small_programmes()
    else:
        main(quick="--quick" in sys.argv)
