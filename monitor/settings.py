"""Programme defaults, each written once (a leaf module: imports nothing from the project).

Every module that needs one of these reads it from here; a programme's own setting, where one
exists, overrides the default through :func:`change_margin`.

``DEFAULT_CHANGE_MARGIN``
    The margin of change that matters [fraction per year]: a trend whose whole 95 % interval lies
    inside (-margin, +margin) is called stable (Dixon & Pechmann 2005).  0.02 (2 % a year, about
    18 % over ten years) is what the programme record, the set-up loader, ``programme.json`` and
    ``monitor trend --table`` documented and applied; the stage functions' own fallback of 0.01 was
    the odd one out and is gone.  A programme sets its own in ``programme.json`` (``change_margin``).
    The value is a convention of the trade (common practice), not a published constant.
``GENERALISE_M``
    The grid cell [m] to whose centre a station is moved wherever its position leaves the database
    while a species flagged sensitive has been recorded there (exports, report maps, field sheets for
    crews outside the programme).  A programme sets its own in ``settings.generalise_m``; exports take
    ``--generalise-m``.  1 km is a common practice for sensitive plant records, not a published constant.
``FIELD_PACKS_OUTSIDE``
    The programme setting (``settings.field_packs_for_outside_crews``, true or false) that makes
    field packs generalise sensitive stations too, for crews from outside the programme.
``MIN_TREND_YEARS``, ``MIN_TREND_STATIONS``
    Below these a trend call is "unclear" by rule, and fewer stations than this are warned about
    when stations are placed (common practice minimums).
``MIN_YEAR_EFFECT_YEARS``
    From this many years with data the trend engine fits a year random effect by default (with an
    intercept and a slope at the year level, 5 years leave 3 df for the year-to-year variance);
    the power study's approximation follows the same rule.

References
----------
Dixon, P. M. & Pechmann, J. H. K. (2005) A statistical test to show negligible trend.
  Ecology 86(7), 1751-1756.
"""

from __future__ import annotations

import math

DEFAULT_CHANGE_MARGIN = 0.02  # fraction per year; common practice
GENERALISE_M = 1000.0         # m; common practice
FIELD_PACKS_OUTSIDE = "field_packs_for_outside_crews"
MIN_TREND_YEARS = 5           # common practice minimum for a trend call
MIN_TREND_STATIONS = 10       # common practice minimum for a trend call and for a placement
MIN_YEAR_EFFECT_YEARS = 5     # a year random effect is fitted by default from this many years with data


def change_margin(programme_value: float | None = None) -> float:
    """The margin of change that matters: the programme's own setting where it has one, else the default."""
    if programme_value is None or (isinstance(programme_value, float) and math.isnan(programme_value)):
        return DEFAULT_CHANGE_MARGIN
    return float(programme_value)


__all__ = ["DEFAULT_CHANGE_MARGIN", "FIELD_PACKS_OUTSIDE", "GENERALISE_M", "MIN_TREND_STATIONS", "MIN_TREND_YEARS",
           "MIN_YEAR_EFFECT_YEARS", "change_margin"]
