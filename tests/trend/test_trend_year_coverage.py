"""Simulation check (slow): with a shared year effect in the truth, the 95 % interval of the annual
change covers the truth and the call is rarely "rising" or "declining" when nothing changes.

A representative subset of the study in tests/trend/simulate_coverage.py (which writes the full
table; see DEVELOPERS.md for the figures): year SD 0.2, 12 years, 40 stations, the count family
most used (negbin) and k-of-n frequencies, 400 replicates each, no true trend.  The window is
93-97 % widened by 3 Monte-Carlo standard errors, and false calls at most 5 % + 3 MC SE.

    PYTHONPATH=. python -m pytest tests/trend/test_trend_year_coverage.py -m slow -s
"""

import math

import pytest

from tests.trend.simulate_coverage import run_cell

REPLICATES = 400


@pytest.mark.slow
@pytest.mark.parametrize("family", ["negbin", "binomial"])
def test_year_effect_interval_coverage_and_false_calls(family):
    row = run_cell(family, 0.2, 12, 40, REPLICATES, seed=11)
    mc = math.sqrt(0.95 * 0.05 / REPLICATES)
    print(f"\n{family}: coverage {100 * row['coverage']:.1f} %, false calls {100 * row['false_calls']:.1f} % "
          f"({REPLICATES} replicates)")
    assert 0.93 - 3 * mc <= row["coverage"] <= 0.97 + 3 * mc
    assert row["false_calls"] <= 0.05 + 3 * mc
