"""classify_call: the equivalence logic of Dixon & Pechmann (2005, Ecology 86:1751-1756)."""

import pytest

from monitor.errors import InputError
from monitor.trend import classify_call


@pytest.mark.parametrize(
    "lower,upper,call",
    [
        (0.012, 0.05, "rising"),        # whole interval above zero
        (-0.08, -0.02, "declining"),    # whole interval below zero
        (-0.006, 0.008, "stable"),      # whole interval inside +-1 %: equivalence
        (-0.03, 0.04, "unclear"),       # includes 0 and changes beyond the margin: NOT stable
        (-0.005, 0.02, "unclear"),      # not significant, upper end beyond the margin
        (0.002, 0.008, "stable"),       # detectable but smaller than the margin
        (-0.009, -0.001, "stable"),
        (0.005, 0.03, "rising"),        # significant, partly beyond the margin
    ],
)
def test_equivalence_logic(lower, upper, call):
    # Dixon & Pechmann (2005): a non-significant trend is not evidence of stability;
    # stability needs the interval inside the margin of negligible change
    got, reason = classify_call(lower, upper, 0.01, n_stations=30, n_years=10)
    assert got == call
    assert reason


def test_not_significant_is_never_stable():
    # Dixon & Pechmann (2005): a wide interval around zero is "unclear"
    for half in (0.011, 0.05, 0.5):
        assert classify_call(-half, half, 0.01, 50, 20)[0] == "unclear"


@pytest.mark.parametrize("n_stations,n_years,word", [(9, 10, "station"), (30, 4, "year"), (3, 2, "station")])
def test_minimum_data_gives_unclear_with_reason(n_stations, n_years, word):
    # common practice minimums: 10 stations and 5 years with data
    call, reason = classify_call(-0.2, -0.1, 0.01, n_stations, n_years)
    assert call == "unclear"
    assert word in reason


def test_margin_is_used_and_must_be_positive():
    assert classify_call(-0.015, 0.015, 0.02, 20, 10)[0] == "stable"
    assert classify_call(-0.015, 0.015, 0.01, 20, 10)[0] == "unclear"
    with pytest.raises(InputError):
        classify_call(-0.01, 0.01, 0.0, 20, 10)
