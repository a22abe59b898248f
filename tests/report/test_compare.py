"""Comparison with last year's report, read from its JSON."""

from __future__ import annotations

import json

import numpy as np
from report_testdata import fit_trend, simulate_programme

from monitor import columns as C
from monitor.report import build_report_context, compare_with_previous


def _summary(call, last=2024, family="poisson", margin=0.01, est=-0.02):
    return {"species": "SP1", "measure": "count", "call": call, "years": [2015, last], "n_obs": 100,
            "family": family, "margin": margin,
            "annual_change": {"estimate": est, "lower": est - 0.02, "upper": est + 0.02}}


def test_reasons_new_year_and_corrections():
    previous = {"season": 2024, "summary": [_summary("unclear")]}
    current = [_summary("declining", last=2025, est=-0.04)]
    (change,) = compare_with_previous(current, previous, corrections={"SP1": 3})
    assert change.changed and change.previous_call == "unclear" and change.current_call == "declining"
    assert "new data for 2025" in change.reasons
    assert "3 corrected records since last year" in change.reasons


def test_unchanged_call_and_model_or_margin_changes():
    previous = {"summary": [_summary("stable", family="poisson", margin=0.01)]}
    current = [_summary("stable", family="negbin", margin=0.02)]
    (change,) = compare_with_previous(current, previous)
    assert not change.changed
    assert any("model changed from poisson to negbin" in r for r in change.reasons)
    assert any("margin that matters changed from 1% to 2%" in r for r in change.reasons)


def test_new_and_dropped_species_and_order():
    previous = {"summary": [_summary("stable"), dict(_summary("rising"), species="OLD")]}
    current = [_summary("stable", last=2025), dict(_summary("declining"), species="NEW")]
    changes = compare_with_previous(current, previous)
    assert [c.changed for c in changes] == [True, True, False]  # changed first
    assert {c.species for c in changes if c.changed} == {"NEW", "OLD"}


def test_previous_report_json_from_a_real_context():
    # Last year's report is the JSON this package wrote; adding a season is the reason given.
    counts, stations, sites = simulate_programme(np.random.default_rng(3), annual_change=-0.05)
    last_year = counts[counts[C.YEAR] <= 2024]
    before = build_report_context({"name": "P"}, 2024, {("SP1", "count"): fit_trend(last_year)})
    previous = json.loads(json.dumps(before.to_dict()))
    now = build_report_context({"name": "P"}, 2025, {("SP1", "count"): fit_trend(counts)}, previous=previous,
                               corrections={"SP1": 2})
    (change,) = now.comparison
    assert change.reasons[:2] == ("new data for 2025", "2 corrected records since last year")
    assert "Compared with the report for 2024" in now.comparison_note
