"""A relocated quadrat in the trend models: the new station continues the old one's series.

How the pair is treated (DEVELOPERS.md, "Relocated quadrats"): the stations of one relocation
chain carry the chain's first station in a ``lineage`` column and share ONE station effect.
The pair is therefore one station of the model, not two independent ones, and the slope is
still estimated from the within-chain change over the years.
"""

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor.design.lineage import lineage_keys
from monitor.trend import TrendModel

YEARS = np.arange(2011, 2023)
SLOPE = -0.06


def simulate(seed: int, n_lineages: int = 24, n_moved: int = 8, move_year: int = 2017) -> pd.DataFrame:
    """Poisson counts with a station effect per lineage (sd 0.6), an observation effect (sd 0.15) and a
    known slope; ``n_moved`` quadrats are moved in ``move_year`` and recorded under a new code from then on
    (the quadrat moved a few metres: same population level, common practice for a lost marker)."""
    rng = np.random.default_rng(seed)
    effect = rng.normal(0.0, 0.6, n_lineages)
    rows = []
    for j in range(n_lineages):
        for y in YEARS:
            code = f"Q{j:02d}"
            if j < n_moved and y >= move_year:
                code = f"Q{j:02d}M"
            eta = 2.0 + SLOPE * (y - YEARS.mean()) + effect[j] + rng.normal(0, 0.15)
            rows.append({C.STATION: code, C.SITE: f"S{j % 3}", C.YEAR: int(y), C.COUNT: int(rng.poisson(np.exp(eta)))})
    data = pd.DataFrame(rows)
    stations = pd.DataFrame({C.STATION: sorted(set(data[C.STATION]))})
    stations["replaced_by"] = [f"{c}M" if c.endswith(tuple("0123456789")) and f"{c}M" in set(stations[C.STATION])
                               else None for c in stations[C.STATION]]
    data[C.LINEAGE] = data[C.STATION].map(lineage_keys(stations))
    return data


def test_pair_is_one_station_and_slope_recovered():
    data = simulate(7)
    linked = TrendModel(data, "count", family="poisson-lognormal").fit(profile=False, indices=False)
    # 24 quadrats, 8 of them moved once: 24 stations in the model, not 32
    assert linked.n_stations == 24
    assert data[C.STATION].nunique() == 32
    # the known slope lies inside the 95 % Wald interval of the fitted one (seeded simulation)
    lo, hi = linked.slope - 1.96 * linked.slope_se, linked.slope + 1.96 * linked.slope_se
    assert lo < SLOPE < hi
    # without the lineage the pair counts as two independent stations
    separate = TrendModel(data.drop(columns=[C.LINEAGE]), "count", family="poisson-lognormal").fit(
        profile=False, indices=False)
    assert separate.n_stations == 32


def test_slope_unbiased_over_replicates():
    # 12 seeded replicates: mean slope within 2 Monte-Carlo SEs of the truth, and the intervals cover it
    # in at least 10 of 12 (nominal 95 %: 11.4 expected; P(<= 9 of 12) < 0.02 under binomial(12, 0.95))
    fits = [TrendModel(simulate(100 + k), "count", family="poisson-lognormal").fit(profile=False, indices=False)
            for k in range(12)]
    slopes = np.array([f.slope for f in fits])
    assert abs(slopes.mean() - SLOPE) < 2 * slopes.std(ddof=1) / np.sqrt(len(slopes)) + 1e-3
    covered = sum(f.slope - 1.96 * f.slope_se < SLOPE < f.slope + 1.96 * f.slope_se for f in fits)
    assert covered >= 10
    assert all(f.n_stations == 24 for f in fits)


def test_lineage_column_missing_values_fall_back_to_station():
    data = simulate(3)
    data.loc[data[C.STATION] == "Q20", C.LINEAGE] = None
    fit = TrendModel(data, "count", family="poisson-lognormal").fit(profile=False, indices=False)
    assert fit.n_stations == 24
