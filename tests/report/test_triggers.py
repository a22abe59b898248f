"""Management triggers: closed-form checks of the decline and upper-bound rules."""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest

from monitor.errors import InputError
from monitor.report.triggers import Z95, Trigger, evaluate_trigger, evaluate_triggers


def trend(rate, lower=None, upper=None, first=2015, last=2025, slope_se=0.01):
    slope = math.log1p(rate)
    lower = math.expm1(slope - Z95 * slope_se) if lower is None else lower
    upper = math.expm1(slope + Z95 * slope_se) if upper is None else upper
    return SimpleNamespace(annual_change=SimpleNamespace(estimate=rate, lower=lower, upper=upper),
                           years=(first, last), n_years=last - first + 1, slope=slope, slope_se=slope_se)


def decline(threshold, years=10):
    return Trigger("SP", "count", "keep it", "decline", threshold, "act", years=years)


def test_decline_fires_when_compound_decline_exceeds_threshold():
    # 1 - 0.96**10 = 0.3352 (compound arithmetic) > 0.30
    out = evaluate_trigger(decline(0.30), trend(-0.04))
    assert out.fired and out.years_to_threshold == 0
    assert out.observed == pytest.approx(1 - 0.96**10, rel=1e-12)
    assert out.window_years == 10


def test_decline_not_reached_at_this_rate():
    # 1 - 0.96**10 = 0.335 < 0.40; the rate that fires it is 0.6**(1/10) - 1 = -0.0498
    out = evaluate_trigger(decline(0.40), trend(-0.04))
    assert not out.fired
    assert out.rate_to_fire == pytest.approx(0.6 ** 0.1 - 1, rel=1e-12)
    assert out.years_to_threshold is None
    assert "slower than" in out.status


def test_decline_approaching_in_a_short_series():
    # 5 years observed at -6 %/yr: 1 - 0.94**5 = 0.266 < 0.40; the cumulative decline reaches 40 % after
    # log(0.6)/log(0.94) = 8.256 years, i.e. 3.256 more years, inside the 10-year window.
    out = evaluate_trigger(decline(0.40), trend(-0.06, first=2020, last=2025))
    assert not out.fired
    assert out.window_years == 5
    assert out.years_to_threshold == pytest.approx(math.log(0.6) / math.log(0.94) - 5, rel=1e-12)
    assert "in about 3 more years" in out.status


def test_rising_species_never_approaches_a_decline():
    out = evaluate_trigger(decline(0.2), trend(0.03))
    assert not out.fired and out.years_to_threshold is None


def test_upper_bound_trigger_fires_on_the_interval():
    t = Trigger("SP", "count", "no established decline", "upper_bound_below", 0.0, "survey")
    assert evaluate_trigger(t, trend(-0.04, -0.07, -0.01)).fired
    assert not evaluate_trigger(t, trend(-0.04, -0.07, 0.01)).fired


def test_upper_bound_years_to_threshold_matches_slope_variance_of_equally_spaced_years():
    # Var(slope) is proportional to 1 / sum((t - mean t)^2) for yearly visits (Draper & Smith 1998, ch. 1);
    # the sum is computed here with numpy, not with the module's closed form m(m^2-1)/12.
    t = Trigger("SP", "count", "no established decline", "upper_bound_below", 0.0, "survey")
    result = trend(-0.01, slope_se=0.012, first=2019, last=2025)  # n = 7 years; upper bound above 0 now
    out = evaluate_trigger(t, result)
    assert not out.fired and out.years_to_threshold is not None

    def upper_after(k):
        n = result.n_years
        ss_now = np.sum((np.arange(n) - (n - 1) / 2) ** 2)
        ss_then = np.sum((np.arange(n + k) - (n + k - 1) / 2) ** 2)
        return result.slope + Z95 * result.slope_se * math.sqrt(ss_now / ss_then)

    k = int(out.years_to_threshold)
    assert upper_after(k) < 0 <= upper_after(k - 1)


def test_fired_triggers_come_first():
    results = {("A", "count"): trend(-0.01), ("B", "count"): trend(-0.06), ("C", "count"): trend(-0.045)}
    triggers = [Trigger(sp, "count", "o", "decline", 0.3, "r", years=10) for sp in "ABC"]
    ordered = evaluate_triggers(triggers, results)
    # B: 1-0.94**10=0.46 fired; C: 1-0.955**10=0.37 fired; A: 0.096 not fired
    assert [o.trigger.species for o in ordered][:2] == ["B", "C"]
    assert [o.fired for o in ordered] == [True, True, False]


def test_missing_trend_is_not_evaluable():
    out = evaluate_triggers([decline(0.3)], {})[0]
    assert not out.evaluable and not out.fired


@pytest.mark.parametrize("kwargs", [dict(kind="sideways", threshold=0.3, years=10),
                                    dict(kind="decline", threshold=30, years=10),
                                    dict(kind="decline", threshold=0.3, years=None)])
def test_bad_trigger_is_an_input_error(kwargs):
    with pytest.raises(InputError):
        Trigger("SP", "count", "o", response="r", **kwargs)
