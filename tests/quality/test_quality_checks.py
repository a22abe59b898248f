"""monitor.quality checks.  Invented stations and observers; simulated data seeded explicitly."""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pandas as pd
import pytest
from scipy.stats import median_abs_deviation, wilcoxon

from monitor.io.programme import panel_due
from monitor.quality import (
    missing_covariates,
    observer_differences,
    observer_pairs,
    overdue_stations,
    quality_flags,
    station_jumps,
)


def _series(values, station="Q01", species="ANEMNE", measure="count", start=2010, observer="OB1"):
    return pd.DataFrame({"station": station, "species": species, "measure": measure,
                         "year": range(start, start + len(values)), "value": values, "observer": observer})


def test_jump_flag_matches_scipy_robust_z():
    values = [20, 22, 18, 25, 21, 19, 160, 23]
    flags = station_jumps(_series(values))
    assert list(flags["year"]) == [2016]
    # independent computation with scipy 1.x median_abs_deviation(scale="normal") (= 1.4826 * MAD)
    u = np.log1p(values)
    others = np.delete(u, 6)
    # with the documented floor on the scale, log(2)/2 (a doubling is at least two scale units)
    z = (u[6] - np.median(others)) / max(median_abs_deviation(others, scale="normal"), math.log(2) / 2)
    assert f"robust z = {z:+.1f}" in flags.loc[0, "detail"]
    assert z > 3.5  # Iglewicz & Hoaglin (1993) cut-off


def test_no_jump_in_a_noisy_but_stable_series():
    rng = np.random.default_rng(20240501)
    values = rng.poisson(30, size=12)
    assert station_jumps(_series(values)).empty


def test_zero_series_needs_more_than_one_plant_to_flag():
    assert station_jumps(_series([0, 0, 0, 0, 0, 1])).empty
    flags = station_jumps(_series([0, 0, 0, 0, 0, 40]))
    assert list(flags["year"]) == [2015]


def test_short_history_not_judged_and_presence_skipped():
    assert station_jumps(_series([5, 5, 5, 90])).empty
    assert station_jumps(_series([0, 0, 0, 0, 0, 1], measure="presence")).empty


def test_measure_columns_instead_of_value():
    table = _series([3, 4, 3, 5, 4, 25], measure="frequency").rename(columns={"value": "occupied"})
    table["cells"] = 25
    assert list(station_jumps(table)["year"]) == [2015]


def test_overdue_against_mcdonald_rules():
    # McDonald (2003) [1-3]: visited one year then rested three; start 2011 -> due 2011, 2015, 2019
    panels = pd.DataFrame({"panel": ["A", "B"], "visit_years": [1, 1], "rest_years": [0, 3],
                           "start_year": [None, 2011]})
    stations = pd.DataFrame({"station": ["Q01", "Q02", "Q03", "Q04", "Q05"], "panel": ["A", "B", "B", "A", "B"],
                             "retired": [None, None, None, dt.date(2019, 1, 1), None],
                             "established": [dt.date(2010, 5, 1)] * 5})
    visits = pd.DataFrame({"station": ["Q01", "Q01", "Q02", "Q03", "Q03", "Q04"],
                           "year": [2019, 2020, 2015, 2015, 2019, 2010],
                           "status": ["done", "done", "done", "done", "missed", "done"]})
    flags = overdue_stations(visits, stations, panels, current_year=2021)
    by_station = dict(zip(flags["station"], flags["year"], strict=True))
    # Q01 every year, visited 2020: 2021 in progress, not overdue.  Q02 visited 2015, due 2019: overdue.
    # Q03's 2019 visit was missed: overdue from 2019.  Q04 retired: never flagged.  Q05 never visited.
    assert by_station == {"Q02": 2019, "Q03": 2019, "Q05": 2011}
    assert [y for y in range(2011, 2021) if panel_due(1, 3, 2011, y)] == [2011, 2015, 2019]
    assert overdue_stations(visits, stations, panels, current_year=2020)["station"].tolist() == ["Q02", "Q03", "Q05"]
    assert "Q01" in overdue_stations(visits, stations, panels, current_year=2023)["station"].tolist()


def _observer_table(rng, bias):
    rows = []
    for s in range(20):
        base = rng.uniform(10, 80)
        for year in range(2012, 2020):
            truth = base * math.exp(rng.normal(0, 0.1))
            rows.append({"station": f"Q{s:02d}", "species": "ANEMNE", "measure": "count", "year": year,
                         "value": float(rng.poisson(truth)), "observer": "OB1"})
            if year in (2014, 2017):  # calibration visits by a second observer in the same season
                rows.append({"station": f"Q{s:02d}", "species": "ANEMNE", "measure": "count", "year": year,
                             "value": float(rng.poisson(truth * bias)), "observer": "OB2"})
    return pd.DataFrame(rows)


def test_observer_bias_detected_and_p_value_matches_scipy():
    rng = np.random.default_rng(7)
    table = _observer_table(rng, bias=1.5)
    flags = observer_differences(table)
    flagged = " ".join(flags["detail"])
    assert "observer OB2" in flagged and "higher" in flagged
    d = observer_pairs(table, "OB2")
    assert len(d) == 20  # one mean difference per station (2 calibration station-years each)
    # reference: scipy.stats.wilcoxon (two-sided signed-rank), computed here on the same pairs
    p = wilcoxon(d[d != 0]).pvalue
    assert f"p = {p:.2g}" in flagged


def test_unbiased_observer_not_flagged():
    # simulation check: with no bias, an alpha = 0.01 test should flag rarely (seeded)
    hits = 0
    for seed in range(10):
        table = _observer_table(np.random.default_rng(seed), bias=1.0)
        hits += int(not observer_differences(table).empty)
    assert hits <= 1


def test_missing_covariates():
    visits = pd.DataFrame({"station": ["Q01", "Q02", "Q03"], "date": [dt.date(2021, 5, 3)] * 3,
                           "status": ["done", "partial", "missed"]})
    covs = pd.DataFrame({"station": ["Q01"], "date": [dt.date(2021, 5, 3)], "name": ["soil_moisture"],
                         "unit": ["%"], "value": [30.0]})
    flags = missing_covariates(visits, covs, ["soil_moisture"])
    assert flags["station"].tolist() == ["Q02"] and flags["kind"].tolist() == ["covariate_missing"]


def test_quality_flags_combines():
    table = pd.concat([_series([20, 22, 18, 25, 21, 19, 160, 23]), _series([5, 6, 5, 6, 5, 6, 5, 6], station="Q02")])
    visits = pd.DataFrame({"station": ["Q01"], "date": [dt.date(2017, 5, 3)], "status": ["done"]})
    covs = pd.DataFrame(columns=["station", "date", "name", "unit", "value"])
    flags = quality_flags(table, visits=visits, covariates=covs, required_covariates=["light"])
    assert list(flags.columns) == ["kind", "station", "species", "year", "detail", "severity"]
    assert sorted(flags["kind"]) == ["covariate_missing", "jump"]
    empty = quality_flags(_series([5, 6, 5, 6, 5, 6]))
    assert empty.empty and list(empty.columns) == ["kind", "station", "species", "year", "detail", "severity"]


@pytest.mark.parametrize("values", [[1, 2], []])
def test_tiny_inputs(values):
    assert station_jumps(_series(values)).empty
