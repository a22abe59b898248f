"""Due and overdue stations, season windows narrowed by species windows, effort."""

import datetime as dt

import pandas as pd
import pytest

from monitor.design import PanelDesign
from monitor.errors import DesignError
from monitor.schedule import EffortSettings, SeasonWindow, due_stations, station_window

# invented programme: six stations, species codes ANEMNE and CALLUV
STATIONS = pd.DataFrame({
    "station": ["A1", "A2", "B1", "B2", "C1", "C2"],
    "site": ["N", "N", "N", "S", "S", "S"],
    "x": [0.0, 10, 20, 1000, 1010, 1020],
    "y": [0.0, 0, 0, 0, 0, 0],
    "panel": ["1-0", "1-0", "1-3/1", "1-3/2", "1-3/3", "1-3/4"],
})
DESIGN = PanelDesign.parse("[1-0,1-3]", 2024)
TARGETS = [("ANEMNE", "count"), ("CALLUV", "cover")]


def test_window_may_wrap_the_new_year():
    w = SeasonWindow((12, 1), (2, 28))
    assert w.wraps and not SeasonWindow((5, 1), (7, 31)).wraps
    # season 2027 runs from 1 December 2027 to 28 February 2028; 2028 is a leap year, the end stays 28 Feb
    assert w.dates(2027) == (dt.date(2027, 12, 1), dt.date(2028, 2, 28))
    # a date belongs to the season in which it started
    assert w.season_of(dt.date(2028, 1, 15)) == 2027 and w.season_of(dt.date(2027, 12, 31)) == 2027
    assert w.season_of(dt.date(2028, 3, 1)) == 2028 and w.season_of(dt.date(2028, 2, 28)) == 2027
    # a station set out in March can first be visited the coming December; one set out in January the same season
    assert w.first_season_after(dt.date(2027, 3, 10)) == 2027
    assert w.first_season_after(dt.date(2028, 1, 10)) == 2027
    assert SeasonWindow((5, 1), (7, 31)).first_season_after(dt.date(2027, 8, 1)) == 2028
    with pytest.raises(DesignError):
        SeasonWindow.parse("06-31", "07-10")


def test_species_windows_inside_a_season_across_the_new_year():
    w = SeasonWindow((12, 1), (2, 28))
    sp = {"ANEMNE": SeasonWindow((1, 5), (2, 10)), "CALLUV": SeasonWindow((11, 20), (1, 20))}
    # ANEMNE flowers in January: the occurrence in the season's second calendar year is used
    assert station_window(2027, w, ["ANEMNE"], sp) == (dt.date(2028, 1, 5), dt.date(2028, 2, 10))
    # CALLUV's own window wraps too: 1 December to 20 January
    assert station_window(2027, w, ["CALLUV"], sp) == (dt.date(2027, 12, 1), dt.date(2028, 1, 20))
    assert station_window(2027, w, ["ANEMNE", "CALLUV"], sp) == (dt.date(2028, 1, 5), dt.date(2028, 1, 20))


def test_species_window_narrows_programme_window():
    w = SeasonWindow((5, 1), (7, 31))
    sp = {"ANEMNE": SeasonWindow((4, 1), (6, 15)), "CALLUV": SeasonWindow((5, 20), (9, 1))}
    assert station_window(2026, w, ["ANEMNE", "CALLUV"], sp) == (dt.date(2026, 5, 20), dt.date(2026, 6, 15))
    assert station_window(2026, w, ["OTHER"], sp) == (dt.date(2026, 5, 1), dt.date(2026, 7, 31))


def test_due_by_panel_rule():
    # 2026 is the third year of a design starting 2024: always panel plus rotating panel 3
    due = due_stations(STATIONS, 2026, design=DESIGN, window=SeasonWindow((5, 1), (7, 31)), targets=TARGETS)
    assert sorted(due.station) == ["A1", "A2", "C1"]
    assert (due.overdue_years == 0).all()


def test_overdue_most_overdue_first_and_cleared_by_a_later_visit():
    history = pd.DataFrame({
        "station": ["A1", "A2", "B1", "B2", "A1", "A2", "B2"],
        "year": [2024, 2024, 2024, 2025, 2025, 2025, 2025],
        "status": ["done", "missed", "inaccessible", "missed", "done", "missed", "done"],
    })
    due = due_stations(STATIONS, 2026, design=DESIGN, window=SeasonWindow((5, 1), (7, 31)), targets=TARGETS,
                       history=history)
    # B1 (panel 1-3/1, due 2024) missed in 2024 -> 2 years overdue; A2 missed 2024 and 2025 -> 2;
    # B2 missed then done in 2025 -> not overdue and not due in 2026
    assert list(due.station[:2]) == ["A2", "B1"]
    assert due.set_index("station").loc[["A2", "B1"], "overdue_years"].tolist() == [2, 2]
    assert "B2" not in set(due.station)
    assert due.set_index("station").loc["A1", "overdue_years"] == 0


def test_due_round_with_no_record_counts_as_missed():
    # a round was held in 2024 (there are records) and B1 was due but has no record
    history = pd.DataFrame({"station": ["A1", "A2"], "year": [2024, 2024], "status": ["done", "done"]})
    due = due_stations(STATIONS, 2025, design=DESIGN, window=SeasonWindow((5, 1), (7, 31)), targets=TARGETS,
                       history=history)
    assert due.set_index("station").loc["B1", "missed_year"] == 2024


def test_effort_minutes():
    eff = EffortSettings(setup_min=12, minutes_per_measure={"count": 9, "cover": 4})
    due = due_stations(STATIONS, 2024, design=None, window=SeasonWindow((5, 1), (7, 31)), targets=TARGETS,
                       effort=eff)
    assert (due.effort_min == 12 + 9 + 4).all()
    with pytest.raises(DesignError, match="no minutes"):
        due_stations(STATIONS, 2024, design=None, window=SeasonWindow((5, 1), (7, 31)),
                     targets=[("X", "frequency")], effort=eff)


def test_disjoint_species_window_is_an_error():
    with pytest.raises(DesignError, match="do not overlap"):
        due_stations(STATIONS, 2024, design=None, window=SeasonWindow((5, 1), (5, 31)), targets=TARGETS,
                     species_windows={"ANEMNE": SeasonWindow((7, 1), (7, 31))})
