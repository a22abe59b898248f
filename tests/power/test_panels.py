"""Revisit designs in McDonald's (2003) notation.

Source for the notation: McDonald, T. L. (2003). Review of environmental monitoring methods:
survey designs. Environmental Monitoring and Assessment 85:277-292 ([1-0] every year; [1-3] one
year on, three off, four panels; split panels joined by commas).
"""

import numpy as np
import pytest

from monitor.errors import DesignError
from monitor.power import parse_revisit


def test_every_year_design_visits_all_stations_every_year():
    due = parse_revisit("[1-0]").visit_matrix(7, 5)
    assert due.all()
    assert parse_revisit("[1-0]").every_year


def test_one_on_three_off_has_four_panels_each_seen_once_in_four_years():
    design = parse_revisit("[1-3]")
    due = design.visit_matrix(8, 8)
    # McDonald (2003): [1-3] -> each station visited once every 4 years, a quarter of stations each year
    assert (due.sum(axis=0) == 2).all()
    assert (due.sum(axis=1) == 2).all()
    for row in due:
        years = np.flatnonzero(row)
        assert years[1] - years[0] == 4
    assert not design.every_year
    assert design.visited_share(8) == pytest.approx(0.25)


def test_two_on_three_off_visits_two_consecutive_years():
    due = parse_revisit("[2-3]").visit_matrix(5, 10)
    cycle = np.tile([1, 1, 0, 0, 0], 2).astype(bool)  # two years on, three off
    shifts = set()
    for row in due:
        matches = [k for k in range(5) if (row == np.roll(cycle, k)).all()]
        assert len(matches) == 1
        shifts.add(matches[0])
    assert shifts == set(range(5))  # five panels, started one year apart
    assert (due.sum(axis=0) == 2).all()


def test_split_panel_keeps_an_every_year_group():
    design = parse_revisit("[1-0,1-3]")
    due = design.visit_matrix(8, 8)
    always = due.all(axis=1)
    assert always.sum() == 4
    assert (due[~always].sum(axis=1) == 2).all()
    # expected share: half every year, half a quarter of the years
    assert design.visited_share(8) == pytest.approx(0.5 + 0.5 * 0.25)
    assert due.mean() == pytest.approx(0.625)


def test_split_panel_shares():
    due = parse_revisit("[1-0,1-3]", shares=(0.25, 0.75)).visit_matrix(8, 4)
    assert due.all(axis=1).sum() == 2


@pytest.mark.parametrize("bad", ["1-0", "[1-]", "[0-3]", "[1-n]", "[a-b]", "[]"])
def test_bad_notation_is_a_design_error(bad):
    with pytest.raises(DesignError):
        parse_revisit(bad)
