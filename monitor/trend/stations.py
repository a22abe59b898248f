"""Each station's own annual change, for the report's map.

Per station a GLM of its own series, fitted for all stations at once (Newton's method
on 2 x 2 systems, vectorised with np.bincount):

count                        log E[y_t] = a + b t              (Poisson)
frequency/pin_hits/presence  logit p_t = a + b t,  k ~ Bin(n, p)
cover                        z_t = a + b t + e_t               (least squares on the adjusted logit)
lengths (> 0)                log y_t = a + b t + e_t           (least squares on the log)

The model follows the measure's kind in the registry (monitor/measures.py).

annual_change = exp(b) - 1.  NaN for a station with fewer than 3 years with data, and
where the estimate does not exist (all counts zero, all cells empty or all full).

References
----------
McCullagh, P. & Nelder, J. A. (1989) Generalized Linear Models, 2nd ed. Chapman & Hall.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.errors import InputError

MIN_YEARS_STATION = 3


def station_changes(data: pd.DataFrame, measure: str) -> pd.DataFrame:
    """Annual change of every station from a GLM of its own series.

    Parameters
    ----------
    data : DataFrame
        Long table with ``station``, ``year`` and the measure's value columns.
    measure : str
        A measure code of the registry (monitor/measures.py).

    Returns
    -------
    DataFrame
        Columns station, annual_change [fraction per year, NaN when not estimable], n_years.

    Notes
    -----
    Poisson / binomial: Newton's method per station on l(a, b) = sum_t l(y_t | a + b t);
    cover: ordinary least squares on log((p + e)/(1 - p + e)), e as in monitor.trend.model.logit_cover.
    """
    from .model import logit_cover

    if measure not in measures.REGISTRY:
        raise InputError(f"unknown measure {measure!r}; expected one of {', '.join(C.MEASURES)}")
    entry = measures.REGISTRY[measure]
    cols = entry.columns
    missing = [c for c in (C.STATION, C.YEAR, *cols) if c not in data.columns]
    if missing:
        raise InputError(f"station changes need column(s) {', '.join(missing)}")
    d = data.dropna(subset=[C.STATION, C.YEAR, *cols])
    codes, stations = pd.factorize(d[C.STATION])
    ns = len(stations)
    yr = d[C.YEAR].to_numpy(float)
    # distinct years per station, from the distinct (station, year) pairs: O(n log n), not one pass per station
    n_years = (np.bincount(np.unique(np.column_stack([codes, yr]), axis=0)[:, 0].astype(np.int64), minlength=ns)
               if ns else np.zeros(0, int))
    # centre time per station for a well-conditioned 2 x 2 system
    cnt = np.bincount(codes, minlength=ns)
    tbar = np.bincount(codes, weights=yr, minlength=ns) / np.maximum(cnt, 1)
    t = yr - tbar[codes]
    b = np.full(ns, np.nan)
    if entry.kind in (measures.KIND_PERCENT, measures.KIND_POSITIVE):
        if entry.kind == measures.KIND_PERCENT:
            z, _ = logit_cover(d[entry.value_column].to_numpy(float))
        else:
            z = np.log(d[entry.value_column].to_numpy(float))
        sxx = np.bincount(codes, weights=t * t, minlength=ns)
        sxy = np.bincount(codes, weights=t * z, minlength=ns)
        with np.errstate(invalid="ignore", divide="ignore"):
            b = sxy / sxx
    else:
        k = d[entry.value_column].to_numpy(float)
        if entry.kind == measures.KIND_COUNT:
            n = None
        elif entry.kind == measures.KIND_BINARY:
            n = np.ones_like(k)
        else:
            n = d[entry.trials_column].to_numpy(float)
        ksum = np.bincount(codes, weights=k, minlength=ns)
        estimable = ksum > 0
        if n is not None:
            estimable &= ksum < np.bincount(codes, weights=n, minlength=ns)
        if n is None:
            a = np.log(np.maximum(ksum, 0.5) / np.maximum(cnt, 1))
        else:
            pbar = np.clip(ksum / np.bincount(codes, weights=n, minlength=ns), 0.01, 0.99)
            a = np.log(pbar / (1 - pbar))
        b = np.zeros(ns)
        ok = np.zeros(ns, bool)
        for _ in range(100):
            eta = np.clip(a[codes] + b[codes] * t, -30, 30)
            if n is None:
                mu = np.exp(eta)
                r, w = k - mu, mu
            else:
                p = 1 / (1 + np.exp(-eta))
                r, w = k - n * p, n * p * (1 - p)
            g0 = np.bincount(codes, weights=r, minlength=ns)
            g1 = np.bincount(codes, weights=r * t, minlength=ns)
            h00 = np.bincount(codes, weights=w, minlength=ns) + 1e-12
            h01 = np.bincount(codes, weights=w * t, minlength=ns)
            h11 = np.bincount(codes, weights=w * t * t, minlength=ns) + 1e-12
            det = h00 * h11 - h01 ** 2
            da = (h11 * g0 - h01 * g1) / det
            db = (h00 * g1 - h01 * g0) / det
            step = np.maximum(np.abs(da), np.abs(db))
            scale = np.minimum(1.0, 2.0 / np.maximum(step, 1e-300))  # damped Newton: at most 2 per step
            a += scale * da
            b += scale * db
            ok = step < 1e-8
            if np.all(ok | ~estimable):
                break
        b = np.where(estimable & ok & (np.abs(b) < 10), b, np.nan)
    b = np.where(n_years >= MIN_YEARS_STATION, b, np.nan)
    return pd.DataFrame({C.STATION: stations, "annual_change": np.expm1(b), "n_years": n_years.astype(int)})
