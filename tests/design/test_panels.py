"""Revisit designs in McDonald (2003) notation and panels spread across the reserve."""

import numpy as np
import pandas as pd
import pytest
from shapely.geometry import box

from monitor.design import (
    PanelDesign,
    RevisitPattern,
    assign_panels,
    balanced_acceptance,
    due_table,
    format_revisit,
    parse_revisit,
    radical_inverse,
    simple_random,
)
from monitor.errors import DesignError


@pytest.mark.parametrize(
    "text, expected",
    [
        ("[1-0]", (RevisitPattern(1, 0),)),
        ("[1-3]", (RevisitPattern(1, 3),)),
        ("[1-0,1-3]", (RevisitPattern(1, 0), RevisitPattern(1, 3))),
        ("[(1-0),(1-3)]", (RevisitPattern(1, 0), RevisitPattern(1, 3))),
        (" [2-3] ", (RevisitPattern(2, 3),)),
    ],
)
def test_parse_notation(text, expected):
    # McDonald (2003) Environ Monit Assess 85:277-292: [v-r] = visit v years, rest r years
    # (split designs joined; bracket style from memory)
    assert parse_revisit(text) == expected
    assert parse_revisit(format_revisit(expected)) == expected


@pytest.mark.parametrize("bad", ["", "[1]", "[a-b]", "[1-0,1-0]", "[1-inf]", "[0-3]"])
def test_bad_notation(bad):
    with pytest.raises(DesignError):
        parse_revisit(bad)


def test_always_panel_every_year():
    # [1-0]: every member visited every year (McDonald 2003)
    d = PanelDesign.parse("[1-0]", 2025)
    assert d.panel_table(range(2025, 2035)).to_numpy().all()
    assert not d.is_due("1-0", 2024)


def test_rotating_1_3_visits_each_panel_every_fourth_year():
    # [1-3]: four panels, each visited one year in four, one panel a year (McDonald 2003)
    d = PanelDesign.parse("[1-3]", 2025)
    t = d.panel_table(range(2025, 2037))
    assert len(t) == 4
    assert (t.sum(axis=0) == 1).all()
    assert [y for y in t.columns if t.loc["1-3/1", y]] == [2025, 2029, 2033]
    assert [y for y in t.columns if t.loc["1-3/3", y]] == [2027, 2031, 2035]


def test_2_3_visits_two_consecutive_years_in_five():
    # [2-3]: visited 2 consecutive years then rested 3 (McDonald 2003); 5 panels, 2 a year
    d = PanelDesign.parse("[2-3]", 2030)
    t = d.panel_table(range(2030, 2040))
    assert (t.sum(axis=0) == 2).all()
    assert [y for y in t.columns if t.loc["2-3/1", y]] == [2030, 2031, 2035, 2036]


def test_split_design_due_counts():
    d = PanelDesign.parse("[1-0,1-3]", 2025)
    stations = balanced_acceptance(box(0, 0, 800, 600), 50, 7).stations
    a = assign_panels(stations, d)
    assert a.panel.value_counts().to_dict() == {"1-0": 10, "1-3/1": 10, "1-3/2": 10, "1-3/3": 10, "1-3/4": 10}
    due = due_table(a, d, 2025, 8)
    # each year: the 10 always-stations plus one rotating panel of 10
    assert (due.drop(columns="panel").sum(axis=0) == 20).all()
    # a rotating station is due twice in 8 years, an always station 8 times
    per_station = due.drop(columns="panel").sum(axis=1)
    assert set(per_station[a.set_index("station").panel == "1-0"]) == {8}
    assert set(per_station[a.set_index("station").panel != "1-0"]) == {2}


def test_every_second_halton_point_is_one_sided():
    # why panels take consecutive blocks of a BAS order rather than every k-th station:
    # phi_2(2m) = phi_2(m) / 2 < 1/2 (radical-inverse definition, Halton 1960)
    m = np.arange(1, 500)
    assert (radical_inverse(2 * m, 2) < 0.5).all()


def _quadrant_counts(df, w, h):
    q = (df.x > w / 2).astype(int) * 2 + (df.y > h / 2).astype(int)
    return np.bincount(q, minlength=4)


@pytest.mark.parametrize("placer", ["balanced", "random"])
def test_each_panel_spread_across_the_reserve(placer):
    site = box(0, 0, 1000, 1000)
    if placer == "balanced":
        stations = balanced_acceptance(site, 80, 13).stations
    else:
        stations = simple_random(site, 80, 13).stations
    a = assign_panels(stations, PanelDesign.parse("[1-3]", 2025))
    for _, sub in a.groupby("panel"):
        assert len(sub) == 20
        counts = _quadrant_counts(sub, 1000, 1000)
        # 20 stations, 5 expected per quadrant: every quadrant holds at least 3
        assert counts.min() >= 3, counts


def test_assign_with_sizes_and_errors():
    d = PanelDesign.parse("[1-0,1-3]", 2025)
    stations = pd.DataFrame({"station": [f"S{i}" for i in range(12)], "x": np.arange(12.0), "y": 0.0})
    a = assign_panels(stations, d, {"1-0": 4, "1-3/1": 2, "1-3/2": 2, "1-3/3": 2, "1-3/4": 2})
    assert a.panel.value_counts()["1-0"] == 4
    with pytest.raises(DesignError, match="add to"):
        assign_panels(stations, d, {"1-0": 4})
    with pytest.raises(DesignError, match="not in revisit design"):
        assign_panels(stations, d, {"2-0": 12})
