"""The call a manager reads: rising, declining, stable or unclear.

The judgement compares the interval of the annual change (fractions per year) with
zero and with a margin of change that matters, m (Dixon & Pechmann 2005):

* ``stable``    the whole interval lies inside (-m, +m): an equivalence judgement.  A
                slope that is merely not significant is never "stable".
* ``rising``    the whole interval lies above 0 (and not wholly inside the margin);
* ``declining`` the whole interval lies below 0 (and not wholly inside the margin);
* ``unclear``   otherwise, or with fewer than MIN_STATIONS stations or MIN_YEARS years
                with data (common practice minimums), with the reason stated.

An interval that excludes zero but lies wholly inside the margin is called ``stable``:
the change is detectable but smaller than the change that matters, and the reason
says so.  Given a 95 % interval, the equivalence test is a two one-sided tests
procedure at the 2.5 % level each (Schuirmann 1987), i.e. on the conservative side.

References
----------
Dixon, P. M. & Pechmann, J. H. K. (2005) A statistical test to show negligible trend.
  Ecology 86(7), 1751-1756.
Schuirmann, D. J. (1987) A comparison of the two one-sided tests procedure and the power
  approach for assessing the equivalence of average bioavailability.
  J. Pharmacokinetics and Biopharmaceutics 15, 657-680.
"""

from __future__ import annotations

import math

from monitor.columns import CALL_DECLINING, CALL_RISING, CALL_STABLE, CALL_UNCLEAR
from monitor.errors import InputError
from monitor.settings import DEFAULT_CHANGE_MARGIN as DEFAULT_MARGIN  # noqa: F401  (re-exported; one source: monitor/settings.py)
from monitor.settings import MIN_TREND_STATIONS as MIN_STATIONS
from monitor.settings import MIN_TREND_YEARS as MIN_YEARS


def _pct(x: float) -> str:
    return f"{100 * x:+.1f} %"


def classify_call(lower: float, upper: float, margin: float, n_stations: int, n_years: int) -> tuple[str, str]:
    """Classify a trend from the interval of its annual change.

    Parameters
    ----------
    lower, upper : float
        Interval of the annual change exp(slope) - 1 [fraction per year].
    margin : float
        Change that matters [fraction per year, > 0], e.g. 0.01 for 1 % a year.
    n_stations, n_years : int
        Stations and years with data behind the interval.

    Returns
    -------
    (call, reason) : tuple of str
        call is one of "rising", "declining", "stable", "unclear"; reason one plain sentence.

    Notes
    -----
    stable  if -margin < lower and upper < margin  (equivalence, Dixon & Pechmann 2005);
    rising  if lower > 0;  declining if upper < 0;  otherwise unclear.

    References
    ----------
    Dixon, P. M. & Pechmann, J. H. K. (2005) Ecology 86(7), 1751-1756.
    """
    if not (margin > 0 and math.isfinite(margin)):
        raise InputError(f"margin of change must be a positive fraction per year (got {margin!r})")
    short = []
    if n_stations < MIN_STATIONS:
        short.append(f"only {n_stations} station{'s' if n_stations != 1 else ''} (at least {MIN_STATIONS} needed)")
    if n_years < MIN_YEARS:
        short.append(f"only {n_years} year{'s' if n_years != 1 else ''} with data (at least {MIN_YEARS} needed)")
    if short:
        return CALL_UNCLEAR, "Too little data for a call: " + " and ".join(short) + "."
    if lower is None or upper is None or not (math.isfinite(lower) and math.isfinite(upper)):
        return CALL_UNCLEAR, "The interval of the annual change could not be computed."
    span = f"the 95 % interval ({_pct(lower)} to {_pct(upper)} a year)"
    m = f"{100 * margin:.1f} % a year"
    if -margin < lower and upper < margin:
        if lower > 0:
            return CALL_STABLE, (f"Stable: {span} lies within the margin of ±{m}; a small increase is detectable "
                                 "but smaller than the change that matters.")
        if upper < 0:
            return CALL_STABLE, (f"Stable: {span} lies within the margin of ±{m}; a small decline is detectable "
                                 "but smaller than the change that matters.")
        return CALL_STABLE, f"Stable: {span} lies within the margin of ±{m}."
    if lower > 0:
        return CALL_RISING, f"Rising: {span} lies above zero."
    if upper < 0:
        return CALL_DECLINING, f"Declining: {span} lies below zero."
    return CALL_UNCLEAR, (f"Unclear: {span} includes no change and also changes larger than the margin "
                          f"of ±{m}.")
