"""Every default of the margin of change that matters, and the trend minimums, come from monitor/settings.py.

A default written as a literal in two modules will one day disagree with itself (it did: 0.01 in the
trend and power stages, 0.02 in the programme record and the CLI).
"""

from __future__ import annotations

import inspect
import re

from monitor import settings
from tests.conftest import REPO_ROOT


def _default(function, name):
    return inspect.signature(function).parameters[name].default


def test_every_margin_default_is_the_one_setting():
    from monitor.db import models
    from monitor.power import Scenario, detectable_change
    from monitor.services import power, trend
    from monitor.trend import DEFAULT_MARGIN, TrendModel

    expected = settings.DEFAULT_CHANGE_MARGIN
    assert DEFAULT_MARGIN == expected
    assert _default(TrendModel.__init__, "margin") == expected
    assert Scenario(annual_change=-0.05).margin == expected
    assert _default(detectable_change, "margin") == expected
    assert _default(power.power_study, "margin") == expected
    assert _default(trend.fit_table, "margin") == expected
    assert models.Programme.model_fields["change_margin"].default == expected


def test_a_programme_setting_overrides_the_default():
    assert settings.change_margin(None) == settings.DEFAULT_CHANGE_MARGIN
    assert settings.change_margin(float("nan")) == settings.DEFAULT_CHANGE_MARGIN
    assert settings.change_margin(0.05) == 0.05


def test_no_module_spells_a_margin_or_trend_minimum_literal():
    # a margin literal beside the word margin, or a five-year / ten-station literal in a comparison,
    # anywhere in the package but the settings module itself
    margin = re.compile(r"margin[^\n]{0,40}?\b0\.0[12]\b|\b0\.0[12]\b[^\n]{0,20}margin", re.IGNORECASE)
    minimum = re.compile(r"n_years\s*[<>]=?\s*5\b|n_st(ations)?\s*[<>]=?\s*10\b")
    offenders = []
    for path in (REPO_ROOT / "monitor").rglob("*.py"):
        if path.name == "settings.py" and path.parent.name == "monitor":
            continue
        for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
            if margin.search(line) or minimum.search(line):
                offenders.append(f"{path.relative_to(REPO_ROOT)}:{number}: {line.strip()}")
    assert offenders == []


def test_trend_minimums_are_the_settings():
    from monitor.design import MIN_STATIONS as DESIGN_MIN_STATIONS
    from monitor.trend import MIN_STATIONS, MIN_YEARS

    assert MIN_YEARS == settings.MIN_TREND_YEARS
    assert MIN_STATIONS == settings.MIN_TREND_STATIONS == DESIGN_MIN_STATIONS
