"""Management triggers: thresholds set in advance, evaluated against a trend.

A programme states, before the data come in, for each species an objective, a
threshold and the response agreed if the threshold is crossed.  Two kinds of
threshold are supported:

``"decline"``
    A decline of more than ``threshold`` (a fraction, 0.30 = 30 %) over
    ``years`` years.  With a log-linear trend of annual change ``r`` the decline
    over ``w`` years is ``1 - (1 + r) ** w``; the trigger looks at the last
    ``w = min(years, last - first)`` years of the series and fires when that
    decline exceeds the threshold.  It approaches at the current rate when the
    cumulative decline would pass the threshold within ``years`` years, i.e. at
    ``t* = log(1 - threshold) / log(1 + r) <= years``; years to threshold is
    ``t* - w``.  The rate that would fire it is ``(1 - threshold) ** (1/years) - 1``.

``"upper_bound_below"``
    The upper 95 % bound of the annual change is below ``threshold`` (fraction
    per year; 0 means "a decline is established", -0.02 "a decline of at least
    2 % a year is established").  Years to threshold assume the estimate stays
    where it is and the standard error of the slope shrinks as it does for
    equally spaced yearly visits, ``se_k = se * sqrt(S(n) / S(n + k))`` with
    ``S(m) = m (m^2 - 1) / 12``, the sum of squared deviations of ``m``
    consecutive years (Draper & Smith 1998, ch. 1, variance of a regression
    slope).  This ignores year-to-year variance that does not shrink and so is
    optimistic; the report says "about".

References
----------
Draper, N. R. and Smith, H. (1998). Applied Regression Analysis, 3rd ed. Wiley.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from monitor.errors import InputError
from monitor.report.wording import percent
from monitor.settings import TRIGGER_KINDS as TRIGGER_KINDS  # the one list (monitor/settings.py)
from monitor.settings import TriggerSetting, trigger_problem

Z95 = 1.959963984540054  # scipy.stats.norm.ppf(0.975)


@dataclass(frozen=True)
class Trigger(TriggerSetting):
    """A management trigger agreed in advance.

    The fields are the settings loader's (:class:`monitor.settings.TriggerSetting`): one definition.

    Attributes
    ----------
    species, measure : str
        What it watches.
    objective : str
        The management objective in the programme's words.
    kind : str
        ``"decline"`` or ``"upper_bound_below"`` (see module docstring).
    threshold : float
        ``"decline"``: share lost [fraction, 0-1]; ``"upper_bound_below"``:
        annual change [fraction per year].
    response : str
        The response agreed in advance.
    years : int, optional
        ``"decline"`` only: the number of years the decline is counted over.
    """

    def __post_init__(self) -> None:
        wrong = trigger_problem(self.kind, self.threshold, self.years)  # the settings loader's rule
        if wrong:
            value = getattr(self, wrong[0])
            raise InputError(f"trigger {wrong[0]}: got {value!r}; expected {wrong[1]}")

    def describe(self) -> str:
        """The threshold in words."""
        if self.kind == "decline":
            return f"a decline of more than {percent(self.threshold)} over {self.years} years"
        sign = "a decline" if self.threshold <= 0 else "a change"
        if self.threshold == 0:
            return "the upper 95% bound of the annual change below zero (a decline established)"
        return (
            f"the upper 95% bound of the annual change below {'−' if self.threshold < 0 else '+'}"
            f"{percent(self.threshold)} a year ({sign} established)"
        )


@dataclass(frozen=True)
class TriggerOutcome:
    """A trigger evaluated against a trend.

    Attributes
    ----------
    trigger : Trigger
    fired : bool
    evaluable : bool
        False when there is no trend to evaluate against.
    observed : float | None
        ``"decline"``: the decline over the window at the current rate [fraction];
        ``"upper_bound_below"``: the current upper bound [fraction per year].
    window_years : int | None
        Years the decline was counted over (``"decline"`` only).
    years_to_threshold : float | None
        0 when fired; the years at the current rate until it would fire; None when the
        current rate does not lead there.
    rate_to_fire : float | None
        ``"decline"``: the annual change that would fire it [fraction per year].
    status : str
        One plain sentence saying why: how far the trend is from the threshold, in the terms of the
        rule (the decline over the window, or the interval's upper bound).  The state itself (fired,
        not fired, approaching) is ``state_label``, so a page never says "Fired. Fired:".
    """

    trigger: Trigger
    fired: bool
    evaluable: bool
    observed: float | None
    window_years: int | None
    years_to_threshold: float | None
    rate_to_fire: float | None
    status: str

    @property
    def state_label(self) -> str:
        """"Fired", "Not fired, approaching", "Not fired" or "Not evaluated"."""
        if not self.evaluable:
            return "Not evaluated"
        if self.fired:
            return "Fired"
        return "Not fired, approaching" if self.years_to_threshold is not None else "Not fired"

    def to_dict(self) -> dict:
        t = self.trigger
        return {
            "species": t.species,
            "measure": t.measure,
            "objective": t.objective,
            "kind": t.kind,
            "threshold": t.threshold,
            "years": t.years,
            "response": t.response,
            "fired": self.fired,
            "evaluable": self.evaluable,
            "observed": self.observed,
            "window_years": self.window_years,
            "years_to_threshold": self.years_to_threshold,
            "rate_to_fire": self.rate_to_fire,
            "status": self.status,
            "state": self.state_label,
        }


def _interval(obj) -> tuple[float, float, float]:
    if obj is None:
        raise TypeError("missing interval")
    if isinstance(obj, Mapping):
        return float(obj["estimate"]), float(obj["lower"]), float(obj["upper"])
    if isinstance(obj, tuple | list):
        return float(obj[0]), float(obj[1]), float(obj[2])
    return float(obj.estimate), float(obj.lower), float(obj.upper)


def _sum_sq(m: float) -> float:
    return m * (m * m - 1.0) / 12.0


def evaluate_trigger(trigger: Trigger, result) -> TriggerOutcome:
    """Evaluate one trigger against a trend result.

    Parameters
    ----------
    trigger : Trigger
    result : TrendResult-like or None
        Needs ``annual_change`` (estimate, lower, upper; fraction per year),
        ``years`` (first, last), and for ``"upper_bound_below"`` also ``slope``,
        ``slope_se`` [log scale per year] and ``n_years``.

    Returns
    -------
    TriggerOutcome

    Notes
    -----
    See the module docstring for the formulas.  The decline is taken from the
    fitted log-linear rate, not from two single years, so one odd season does
    not fire a trigger by itself.
    """
    if result is None:
        return TriggerOutcome(trigger, False, False, None, None, None, None,
                              "There is no trend for this species and measure to evaluate it against.")
    rate, lower, upper = _interval(result.annual_change)
    first, last = (int(y) for y in result.years)
    if trigger.kind == "decline":
        n = int(trigger.years)
        window = max(1, min(n, last - first))
        decline = 1.0 - (1.0 + rate) ** window
        rate_to_fire = (1.0 - trigger.threshold) ** (1.0 / n) - 1.0
        fired = decline > trigger.threshold
        years_to = None
        if fired:
            years_to = 0.0
            status = (
                f"At the current fall of {percent(rate)} a year, the decline over the last "
                f"{window} years is about {percent(decline)}, more than the {percent(trigger.threshold)} allowed."
            )
        elif rate < 0:
            t_star = math.log(1.0 - trigger.threshold) / math.log(1.0 + rate)
            if t_star <= n:
                years_to = max(0.0, t_star - window)
                status = (
                    f"At the current fall of {percent(rate)} a year the decline "
                    f"would pass {percent(trigger.threshold)} in about {years_to:.0f} more "
                    f"year{'s' if round(years_to) != 1 else ''}."
                )
            else:
                status = (
                    f"The current fall of {percent(rate)} a year is slower than the "
                    f"{percent(rate_to_fire)} a year that would fire it."
                )
        else:
            status = "The estimate is not falling."
        return TriggerOutcome(trigger, fired, True, decline, window, years_to, rate_to_fire, status)

    # upper_bound_below
    fired = upper < trigger.threshold
    threshold_link = math.log1p(trigger.threshold)
    years_to = None
    if fired:
        years_to = 0.0
        status = (
            f"The upper 95% bound of the annual change is {_signed(upper)} a year, "
            f"below the {_signed(trigger.threshold)} a year set: even the least steep change the data allow "
            f"is {'a fall' if trigger.threshold <= 0 else 'below the threshold'}."
        )
    elif rate < trigger.threshold and getattr(result, "slope_se", None) is not None:
        slope = float(result.slope)
        se = float(result.slope_se)
        n = int(result.n_years)
        z = Z95  # Wald bound, as the engine reports annual_change
        for k in range(1, 201):
            if slope + z * se * math.sqrt(_sum_sq(n) / _sum_sq(n + k)) < threshold_link:
                years_to = float(k)
                break
        if years_to is not None:
            status = (
                f"The upper 95% bound of the annual change is {_signed(upper)} a year, not yet below the "
                f"{_signed(trigger.threshold)} a year set; if the estimate holds, about {years_to:.0f} more "
                f"year{'s' if years_to != 1 else ''} of data would bring it below."
            )
        else:
            status = (f"The upper 95% bound of the annual change is {_signed(upper)} a year, not below the "
                      f"{_signed(trigger.threshold)} a year set.")
    else:
        status = (
            f"The upper 95% bound of the annual change is {_signed(upper)} a year, not below the "
            f"{_signed(trigger.threshold)} a year set (the estimate itself is {_signed(rate)} a year)."
        )
    return TriggerOutcome(trigger, fired, True, upper, None, years_to, None, status)


def _signed(fraction: float) -> str:
    if fraction == 0:
        return "0%"
    return ("−" if fraction < 0 else "+") + percent(fraction)


def evaluate_triggers(triggers: Iterable[Trigger], results: Mapping[tuple[str, str], object]) -> list[TriggerOutcome]:
    """Evaluate every trigger against ``results[(species, measure)]``; fired ones first.

    Within fired and not-fired groups the order is: soonest to fire first, then
    the order given.
    """
    outcomes = [evaluate_trigger(t, results.get((t.species, t.measure))) for t in triggers]
    order = {id(o): i for i, o in enumerate(outcomes)}
    return sorted(
        outcomes,
        key=lambda o: (
            not o.fired,
            o.years_to_threshold if o.years_to_threshold is not None else math.inf,
            order[id(o)],
        ),
    )
