"""The power service: the searches, the ceiling, the progress it reports, and the JSON it gives.

Invented parameters; the numbers checked are the study's own bookkeeping and the approximation's
closed form (Urquhart, Paulsen & Larsen 1998; scipy.stats.nct), not a published table.
"""

from __future__ import annotations

import math

import pytest

from monitor.power import VarianceComponents
from monitor.services import power


@pytest.fixture(scope="module")
def study_and_calls():
    components = VarianceComponents.from_mean("poisson-lognormal", 8.0, station_sd=0.4, observation_sd=0.2,
                                              year_sd=0.3, stations_per_site=10)
    calls: list[tuple[int, int]] = []
    study = power.power_study(components, "values given", change=-0.3, over_years=10, stations=[10, 20],
                              years=[5, 6], replicates=4, seed=3, workers=1,
                              progress=lambda done, total: calls.append((done, total)))
    return study, calls


def test_progress_is_monotone_and_counts_the_searches(study_and_calls):
    study, calls = study_and_calls
    done = [d for d, _t in calls]
    assert done == sorted(done)
    assert calls[-1][0] == calls[-1][1]                 # ends at the total it announced
    first_total = calls[0][1]
    comparison = 4 * sum(n * y for n in (10, 20) for y in (5, 6))  # replicates x visits of the designs
    assert first_total > comparison                     # the searches are planned in from the start
    assert study.smallest is not None and study.years is not None


def test_the_ceiling_and_how_many_years_are_reported(study_and_calls):
    study, _calls = study_and_calls
    ceilings = study.ceilings()
    assert set(ceilings) == {5, 6}
    # year SD 0.3 over 5 or 6 years: no number of stations reaches 80 %
    assert all(c < study.target for c in ceilings.values())
    doc = study.to_dict()
    assert doc["power_ceiling_by_years"] == {"5": ceilings[5], "6": ceilings[6]}
    assert doc["components"]["year_sd"] == 0.3
    assert all(r["power_ceiling"] is not None and r["approximation"].startswith("approximation (Urquhart")
               for r in doc["results"])
    years = doc["years_needed"]
    assert years["vary"] == "n_years" and (years["value"] is None or years["value"] > 6)
    assert "one Monte-Carlo standard error" in doc["power_se_note"]
    assert math.isfinite(study.results[0].approximation.ceiling)
