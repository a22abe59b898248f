"""Geometric mean of a positive measure (shoot height) with its back-transformed t interval."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.stats.weightstats import DescrStatsW

from monitor.errors import EstimationError
from monitor.estimate import estimate_geometric_mean, season_estimates

HEIGHTS = np.array([12.0, 8.5, 20.0, 15.0, 9.0, 30.0, 11.0])   # invented shoot heights [cm]


def test_matches_the_t_interval_of_the_logs():
    est = estimate_geometric_mean(HEIGHTS, confidence=0.9)
    logs = DescrStatsW(np.log(HEIGHTS))   # statsmodels 0.14 DescrStatsW.tconfint_mean
    lower, upper = logs.tconfint_mean(alpha=0.1)
    assert est.geometric_mean == pytest.approx(math.exp(logs.mean), rel=1e-12)
    assert (est.lower, est.upper) == pytest.approx((math.exp(lower), math.exp(upper)), rel=1e-12)
    assert est.geometric_mean == pytest.approx(stats.gmean(HEIGHTS), rel=1e-12)   # scipy.stats.gmean
    assert est.df == 6 and est.n == 7


def test_interval_covers_the_median_of_a_lognormal_at_its_level():
    """Seeded simulation: 2,000 samples of 8 from a lognormal with median 20 cm; a 95 % interval covers the
    median in 95 % of them (binomial SE 0.5 %; the test allows four SEs)."""
    rng = np.random.default_rng(11)
    samples = np.exp(np.log(20.0) + 0.5 * rng.standard_normal((2000, 8)))
    covered = [(e.lower <= 20.0 <= e.upper) for e in map(estimate_geometric_mean, samples)]
    assert abs(np.mean(covered) - 0.95) < 4 * math.sqrt(0.95 * 0.05 / 2000)


@pytest.mark.parametrize("bad", [[10.0, 0.0, 5.0], [10.0, -3.0], [10.0, float("nan")]])
def test_refuses_values_not_above_zero(bad):
    with pytest.raises(EstimationError, match="above 0"):
        estimate_geometric_mean(bad)


def test_season_table_uses_it_for_shoot_height():
    obs = pd.DataFrame({"station": [f"Q{i}" for i in range(7)], "species": "SP", "height_cm": HEIGHTS})
    stations = pd.DataFrame({"station": obs["station"], "site": "A", "quadrat_area_m2": 1.0})
    table = season_estimates(obs, stations, pd.DataFrame({"site": ["A"], "area_m2": [1000.0]}), "shoot_height")
    row = table.iloc[0]
    est = estimate_geometric_mean(HEIGHTS)
    assert (row["estimate"], row["lower"], row["upper"]) == pytest.approx((est.geometric_mean, est.lower, est.upper))
    assert row["unit"] == "cm (geometric mean)"
