"""Plain-language sentences are generated from the numbers and change when the fit changes."""

from __future__ import annotations

import math

import pytest

from monitor import columns as C
from monitor.report.wording import (
    MethodChange,
    TrendNumbers,
    caveat_sentences,
    interval_phrase,
    percent,
    period_phrase,
    rate_with_interval,
    share_words,
    trend_sentence,
)


def numbers(rate, lower, upper, first=2015, last=2025, call=C.CALL_DECLINING, margin=0.01):
    # period change compounds the annual rate over last - first years (monitor.trend.TrendResult.period_change)
    return TrendNumbers(rate, lower, upper, (1 + rate) ** (last - first) - 1, first, last, call, margin)


def test_the_headline_sentence_of_a_decline():
    # The report's own headline form ("... fell by about 4% a year since 2015 (95% CI 1% to 7% a
    # year); over the ... years that is a fall of about a third ..."); 1 - 0.96**10 = 0.335 (arithmetic).
    text = trend_sentence("Herba exempla", C.MEASURE_COUNT, numbers(-0.04, -0.07, -0.01))
    assert text.startswith("Numbers of Herba exempla fell by about 4% a year since 2015 (95% CI 1% to 7% a year)")
    assert "over the 10 years to 2025 that is a fall of about a third" in text


def test_direction_follows_the_fit():
    down = trend_sentence("X", C.MEASURE_COUNT, numbers(-0.04, -0.07, -0.01))
    up = trend_sentence("X", C.MEASURE_COUNT, numbers(0.04, 0.01, 0.07, call=C.CALL_RISING))
    assert "fell" in down and "rose" not in down
    assert "rose by about 4% a year" in up and "fell" not in up
    # 1.04**10 - 1 = 0.480: "about half" (within 3 points of 1/2)
    assert "a rise of about half" in up


def test_interval_figures_follow_the_fit():
    narrow = trend_sentence("X", C.MEASURE_COUNT, numbers(-0.04, -0.05, -0.03))
    wide = trend_sentence("X", C.MEASURE_COUNT, numbers(-0.04, -0.09, -0.02))
    assert "(95% CI 3% to 5% a year)" in narrow
    assert "(95% CI 2% to 9% a year)" in wide


def test_period_follows_the_series():
    long = trend_sentence("X", C.MEASURE_COUNT, numbers(-0.04, -0.07, -0.01, first=2015, last=2025))
    short = trend_sentence("X", C.MEASURE_COUNT, numbers(-0.04, -0.07, -0.01, first=2020, last=2025))
    assert "since 2015" in long and "over the 10 years to 2025" in long
    assert "since 2020" in short and "over the 5 years to 2025" in short
    # 1 - 0.96**5 = 0.185: "about a fifth" (within 3 points of 1/5)
    assert "a fall of about a fifth" in short


def test_stable_and_unclear_wording():
    stable = trend_sentence("X", C.MEASURE_COVER, numbers(0.002, -0.006, 0.009, call=C.CALL_STABLE))
    assert stable.startswith("Cover of X changed little since 2015")
    assert "a fall of 0.6% to a rise of 0.9% a year" in stable
    assert "±1% a year" in stable  # the margin used is stated
    unclear = trend_sentence("X", C.MEASURE_COUNT, numbers(-0.02, -0.08, 0.04, call=C.CALL_UNCLEAR))
    assert "cannot yet say which way" in unclear
    assert "from a fall of 8% to a rise of 4% a year" in unclear


@pytest.mark.parametrize(
    "share, words",
    [
        (1 - 0.96**10, "a third"),   # 0.335
        (0.25, "a quarter"),
        (0.5, "half"),
        (0.66, "two thirds"),
        (0.05, "5%"),               # small changes stay in percent
        (0.45, "45%"),              # no everyday fraction within 3 points
    ],
)
def test_share_words(share, words):
    # Everyday fraction words (common practice in plain-language writing); tolerance 3 points by design.
    assert share_words(share) == words


def test_period_phrase_for_large_rises():
    assert period_phrase(1.0, 2015) == "roughly a doubling"
    assert period_phrase(math.expm1(math.log(3.05)), 2015) == "roughly a tripling"
    assert period_phrase(4.2, 2015) == "a rise to about 5.2 times the 2015 level"


def test_percent_and_table_forms():
    assert percent(-0.041) == "4%"
    assert percent(0.004) == "0.4%"
    assert percent(0.0001) == "less than 0.1%"
    # Design notes' table form: "-4.1 % a year (95 % CI -6.8 to -1.3)", with a typographic minus
    assert rate_with_interval(-0.041, -0.068, -0.013) == "\u22124.1% a year (95% CI \u22126.8 to \u22121.3)"
    assert interval_phrase(-0.08, 0.04) == "a fall of 8% to a rise of 4% a year"


def test_caveats_apply_only_when_they_should():
    none = caveat_sentences(40, 11, 2015, 2025, observation_sd=0.2)
    assert none == []
    few = caveat_sentences(6, 4, 2022, 2025)
    assert any("only 6 stations" in c for c in few)
    assert any("only 4 seasons" in c for c in few)
    over = caveat_sentences(40, 11, 2015, 2025, observation_sd=0.9)
    assert any("more than chance alone" in c for c in over)
    nb = caveat_sentences(40, 11, 2015, 2025, family="negbin", dispersion=1.2)
    assert any("more than chance alone" in c for c in nb)
    changes = [MethodChange(2019, "protocol", "new grid"), MethodChange(2010, "protocol"),
               MethodChange(2021, "observer")]
    text = caveat_sentences(40, 11, 2015, 2025, method_changes=changes)
    assert any("method changed in 2019 (new grid)" in c for c in text)
    assert not any("2010" in c for c in text)  # before the series: irrelevant
    assert any("observers changed in 2021" in c for c in text)
    diag = caveat_sentences(40, 11, 2015, 2025, diagnostics=[("variance_at_bound", "Site variance is zero", "warning"),
                                                              ("info_only", "Fitted quickly", "info")],
                            converged=False)
    assert any("provisional" in c for c in diag)
    assert "Site variance is zero." in diag and not any("quickly" in c for c in diag)
