"""Longer seeded simulations (run with -m slow)."""

import numpy as np
import pandas as pd
import pytest

from monitor import columns as C
from monitor.estimate import estimate_density_stratified, pooled_proportion


@pytest.mark.slow
def test_stratified_interval_coverage_with_unequal_strata():
    # seeded simulation: two strata of a finite grid of quadrat positions, very different
    # densities and sample sizes; the Satterthwaite t interval should cover ~95 %
    rng = np.random.default_rng(5161)
    wet = rng.poisson(np.exp(2.5 + rng.normal(0, 0.4, 400)))
    dry = rng.poisson(np.exp(0.3 + rng.normal(0, 0.9, 1600)))
    truth = wet.sum() + dry.sum()
    strata = pd.DataFrame({C.STRATUM: ["wet", "dry"], C.AREA: [400.0, 1600.0]})
    reps, hits = 4000, 0
    for _ in range(reps):
        q = pd.DataFrame({
            C.STRATUM: ["wet"] * 10 + ["dry"] * 30,
            C.COUNT: np.concatenate([rng.choice(wet, 10, replace=False), rng.choice(dry, 30, replace=False)]),
        })
        r = estimate_density_stratified(q, strata, quadrat_area_m2=1.0)
        hits += r.total_lower <= truth <= r.total_upper
    assert 0.925 <= hits / reps <= 0.97


@pytest.mark.slow
def test_pooled_proportion_coverage_with_unequal_frames():
    # seeded simulation: frames of 5 to 25 cells, cluster correlation 0.25
    rng = np.random.default_rng(1998)
    truth, reps, ours = 0.2, 4000, 0
    for _ in range(reps):
        cells = rng.integers(5, 26, 25)
        occupied = rng.binomial(cells, rng.beta(0.6, 2.4, 25))
        r = pooled_proportion(occupied, cells, measure=C.MEASURE_FREQUENCY)
        ours += r.lower <= truth <= r.upper
    assert 0.92 <= ours / reps <= 0.975
