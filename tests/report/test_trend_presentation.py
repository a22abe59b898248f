"""The report shows trend numbers on the measure's own scale: share trends led by the share (the odds
rate labelled as odds), yearly estimates and the fitted line on one baseline in the figure.

The fits are the project's TrendModel on invented k-of-n data (seeded); the wording is checked
against the fit's own numbers, and the share change against lme4 in tests/trend/test_trend_natural_scale.py.
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from scipy.special import expit  # noqa: E402

from monitor import columns as C  # noqa: E402
from monitor.report import build_report_context  # noqa: E402
from monitor.report.render import draw_figure  # noqa: E402
from monitor.report.wording import LevelNumbers, level_sentence  # noqa: E402
from monitor.trend import TrendModel  # noqa: E402


@pytest.fixture(scope="module")
def share_fit():
    rng = np.random.default_rng(31)
    st = np.repeat(np.arange(30), 10)
    yr = np.tile(np.arange(2015, 2025), 30)
    p = expit(2.2 - 0.2 * (yr - 2019.5) + rng.normal(0, 0.4, 30)[st] + rng.normal(0, 0.1, 10)[yr - 2015])
    d = pd.DataFrame({"station": st, "site": st % 5, "year": yr, "cells": 25, "occupied": rng.binomial(25, p)})
    return TrendModel(d, "frequency").fit(profile=False, indices=True)


@pytest.fixture(scope="module")
def share_context(share_fit):
    return build_report_context({"name": "Invented reserve"}, 2024, {("SPX", C.MEASURE_FREQUENCY): share_fit},
                                species_names={"SPX": "Species x"})


def test_share_trend_is_said_as_a_share_and_the_rate_as_odds(share_fit, share_context):
    r = share_fit
    assert r.call == "declining" and r.change_scale == "odds"
    row = share_context.summary[0]
    assert "a year in the odds" in row.texts.annual_text and row.texts.annual_estimate_text.endswith("in the odds")
    para = share_context.species[0].paragraph
    lc = r.level_change
    # the share itself, first and last year of the fitted trend, and the change in percentage points
    assert f"from {lc.first.estimate:.0f}% in 2015 to {lc.last.estimate:.0f}% in 2024" in para
    assert "percentage points" in para and f"{abs(lc.difference.estimate):.0f}" in para
    assert "In the odds the estimate is a fall of about" in para
    # the old wording, a fall of the share by the odds rate, is gone
    assert f"fell by about {abs(r.annual_change.estimate) * 100:.0f}% a year" not in para


def test_figure_shows_yearly_estimates_and_line_on_the_measures_scale(share_fit, share_context):
    section = share_context.species[0]
    assert section.value_label == "% of cells occupied"
    ref = next(f for f in section.figures if f.kind == "indices")
    assert "% of cells occupied" in ref.caption
    fig = draw_figure(section, ref, share_context)
    try:
        ax = fig.axes[0]
        points = next(line for line in ax.lines if line.get_gid() == "indices")
        trend = next(line for line in ax.lines if line.get_gid() == "trend")
        np.testing.assert_allclose(points.get_ydata(), share_fit.yearly["estimate"].to_numpy())
        np.testing.assert_allclose(trend.get_ydata(), share_fit.trend_line["fit"].to_numpy())
        # one baseline: the points fall on both sides of the line
        above = points.get_ydata() > np.interp(points.get_xdata(), trend.get_xdata(), trend.get_ydata())
        assert 0 < above.sum() < len(above)
        assert ax.get_ylabel() == "% of cells occupied"
        assert not any(np.allclose(line.get_ydata(), 1.0) for line in ax.lines if line.get_gid() is None)
    finally:
        plt.close(fig)


def test_methods_name_the_year_effect(share_context):
    assert "random effect for each year" in share_context.methods.paragraphs[0]
    assert any("Piepho" in ref for ref in share_context.methods.references)


def test_level_sentence_for_counts():
    level = LevelNumbers("mean count per m²", 2015, 2024, 2.1, 1.4, -0.7, -1.0, -0.4)
    assert level_sentence(level) == ("On the fitted trend the mean count per m² went from 2.1 in 2015 to 1.4 in 2024: "
                                     "a change of \u22120.7 (95% CI \u22121 to \u22120.4).")
