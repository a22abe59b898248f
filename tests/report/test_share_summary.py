"""A share's row in the summary table leads with the change of the share itself, in percentage points
with its interval, checked against R; the odds rate follows and is labelled as odds.

Outside reference: lme4 1.1-31 on its real cbpp data (Lesnoff et al. 2004), the population-averaged
share first and last period of the fitted line and their difference with its 95 % interval, from
tests/fixtures/trend/natural_scale.R -> natural_scale.json (R 4.2.2, the share from R's integrate over
the herd effect).  Tolerances are those of tests/trend/test_trend_natural_scale.py (glmer's and our
standard errors agree to about 1 %).
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import pandas as pd
import pytest

from monitor import columns as C
from monitor.report import build_report_context
from monitor.report.render import render_html
from monitor.trend import TrendModel

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures" / "trend"
NUMBER = re.compile(r"[\u2212+-]?\d+(?:\.\d+)?")


def _numbers(text: str) -> list[float]:
    return [float(t.replace("\u2212", "-")) for t in NUMBER.findall(text)]


@pytest.fixture(scope="module")
def cbpp_context():
    cbpp = pd.read_csv(FIXTURES / "cbpp.csv").rename(
        columns={"herd": "station", "period": "year", "incidence": "occupied", "size": "cells"})
    # 4 periods: below the year-effect rule, so the model is glmer's cbind(incidence, size - incidence) ~ t + (1|herd)
    fit = TrendModel(cbpp, C.MEASURE_FREQUENCY, observation_effect=False).fit(profile=False, indices=True)
    return build_report_context({"name": "cbpp (lme4)"}, 4, {("CBPP", C.MEASURE_FREQUENCY): fit},
                                species_names={"CBPP": "cbpp incidence"})


@pytest.fixture(scope="module")
def reference():
    return json.loads((FIXTURES / "natural_scale.json").read_text())["linear"]


def test_share_row_leads_with_percentage_points_against_lme4(cbpp_context, reference):
    row = cbpp_context.summary[0]
    estimate, lower, upper = reference["difference"]  # lme4: about -15.4 points (-22.2 to -8.6)
    assert row.texts.period_estimate_text.endswith("percentage points")
    assert _numbers(row.texts.period_estimate_text) == [pytest.approx(estimate, abs=0.5)]  # printed to whole points
    ci = _numbers(row.texts.period_ci_text.replace("95% CI", ""))
    assert ci[0] == pytest.approx(lower, abs=0.02 * abs(estimate) + 0.5)
    assert ci[1] == pytest.approx(upper, abs=0.02 * abs(estimate) + 0.05)
    assert "odds" not in row.texts.period_estimate_text
    # the share first and last period on the fitted line (lme4 via integrate: 20.3 % -> 4.9 %)
    first, last = _numbers(row.texts.period_text.split(":")[0])
    assert first == pytest.approx(reference["first"][0], abs=0.5)
    assert last == pytest.approx(reference["last"][0], abs=0.05)
    # the odds rate is shown second and labelled as odds (exp(t) - 1 = -43 % a year, lme4 fixef)
    assert row.texts.annual_estimate_text.endswith("a year in the odds")
    odds_rate = 100 * (math.exp(reference["fixef"]["t"]) - 1)
    assert _numbers(row.texts.annual_estimate_text)[0] == pytest.approx(odds_rate, abs=0.15)
    # the JSON carries the share change in percentage points beside the odds-scale changes
    shown = row.to_dict()["share_change_points"]
    assert shown["estimate"] == pytest.approx(estimate, abs=0.03)
    # the call line above the species' section leads with the share as well
    assert row.texts.call_line.startswith("share ") and row.texts.call_line.index("percentage points") < row.texts.call_line.index("odds")


def test_share_row_is_read_in_that_order_on_the_page(cbpp_context):
    html = render_html(cbpp_context, {f.key: "data:," for s in cbpp_context.species for f in s.figures})
    table = html[html.index('<table class="summary-table'):]
    table = table[:table.index("</table>")]
    cells = table[table.index("<tbody>"):]
    assert cells.index("percentage points") < cells.index("a year in the odds")
    head = table[:table.index("</thead>")]
    assert head.index("Change over the period") < head.index("Annual change")


def test_count_rows_keep_percent_changes():
    # a count trend is a change in the mean count itself (no odds): its row says percent, no points
    import numpy as np

    from tests.report.report_testdata import demo_inputs

    context = build_report_context(**demo_inputs(np.random.default_rng(3), 2, with_extras=False))
    for row in context.summary:
        assert row.measure == C.MEASURE_COUNT
        assert "percentage points" not in row.texts.period_estimate_text and "odds" not in row.texts.annual_estimate_text
        assert row.texts.period_estimate_text.endswith("%") and row.share_change is None
        # the period cell is the change over the period the trend engine gives (exp(b (last - first)) - 1)
        assert _numbers(row.texts.period_estimate_text)[0] == pytest.approx(100 * row.period_change.estimate, abs=0.5)
