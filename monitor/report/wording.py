"""Plain-language wording generated from trend numbers.

Every sentence a land manager reads in the report is produced here, from the
numbers alone, by pure functions: the same numbers always give the same words,
and a change in the fit (direction, interval, period) changes the words.

Conventions
-----------
Rates arrive as fractions per year (``-0.04`` is a fall of 4 % a year), as the
trend engine reports them: ``annual_change = exp(slope) - 1`` and
``period_change = exp(slope * (last - first)) - 1``.  People read percent.
In prose, rates are rounded to whole percent (one decimal below 1 %); in
tables, to one decimal with the interval, e.g. ``-4.1 % a year (95 % CI -6.8
to -1.3)``.

Changes over a period are also put in everyday fractions ("a fall of about a
third") when one is close (within 3 percentage points), else in percent.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from monitor import columns as C
from monitor import measures
from monitor.families import FAMILIES
from monitor.settings import FEW_QUADRATS, MIN_TREND_STATIONS, MIN_TREND_YEARS

MINUS = "\u2212"  # typographic minus for tables

# Words for each measure (monitor/measures.py): the subject of a sentence ("Numbers of X fell ..."),
# and its name inside a sentence ("pin hits").
MEASURE_SUBJECT = {code: m.subject for code, m in measures.REGISTRY.items()}

MEASURE_LABEL = {code: m.label for code, m in measures.REGISTRY.items()}

CALL_LABEL = {
    C.CALL_RISING: "Rising",
    C.CALL_DECLINING: "Declining",
    C.CALL_STABLE: "Stable",
    C.CALL_UNCLEAR: "Unclear",
}

# Markers that carry the call without colour (shape and a word sit together in the table).
CALL_MARKER = {
    C.CALL_RISING: "\u25b2",     # ▲
    C.CALL_DECLINING: "\u25bc",  # ▼
    C.CALL_STABLE: "\u25cf",     # ●
    C.CALL_UNCLEAR: "?",
}

# Below these the trend engine calls a series "unclear" (monitor/trend/call.py:classify_call); the report says why.
FEW_STATIONS = MIN_TREND_STATIONS
SHORT_SERIES = MIN_TREND_YEARS
# An observation-level SD above this on the log scale (a typical visit-to-visit factor of
# exp(0.5) ~ 1.65 beyond Poisson noise) is worth telling a reader about.  Project convention.
OVERDISPERSION_SD = 0.5

_FRACTIONS: tuple[tuple[float, str], ...] = (
    (1 / 10, "a tenth"),
    (1 / 5, "a fifth"),
    (1 / 4, "a quarter"),
    (1 / 3, "a third"),
    (2 / 5, "two fifths"),
    (1 / 2, "half"),
    (3 / 5, "three fifths"),
    (2 / 3, "two thirds"),
    (3 / 4, "three quarters"),
    (4 / 5, "four fifths"),
    (9 / 10, "nine tenths"),
)
_FRACTION_TOLERANCE = 0.03


def measure_subject(measure: str, name: str) -> str:
    """Sentence subject for a measure, e.g. ``"Numbers of Carex exempla"``."""
    template = MEASURE_SUBJECT.get(measure, "{name} (" + str(measure) + ")")
    return template.format(name=name)


def percent(fraction: float) -> str:
    """Magnitude of a rate in prose: ``0.041 -> "4%"``, ``0.004 -> "0.4%"``.

    Whole percent from 1 % up, one decimal below, "less than 0.1%" when it rounds to zero.
    The sign is dropped: the sentence carries the direction.
    """
    value = abs(fraction) * 100.0
    if not math.isfinite(value):
        return "an unknown amount"
    if value >= 0.95:
        return f"{value:.0f}%"
    if value >= 0.05:
        return f"{value:.1f}%"
    return "less than 0.1%"


def signed_percent(fraction: float, decimals: int = 1) -> str:
    """Signed percent for tables with a typographic minus: ``-0.041 -> "−4.1%"``."""
    if fraction is None or not math.isfinite(fraction):
        return "n/a"
    value = fraction * 100.0
    text = f"{abs(value):.{decimals}f}"
    if float(text) == 0.0:
        return f"{text}%"
    return f"{MINUS if value < 0 else '+'}{text}%"


def rate_with_interval(estimate: float, lower: float, upper: float) -> str:
    """Table form of an annual rate: ``"−4.1% a year (95% CI −6.8 to −1.3)"``."""
    lo = signed_percent(lower).rstrip("%")
    hi = signed_percent(upper).rstrip("%")
    return f"{signed_percent(estimate)} a year (95% CI {lo} to {hi})"


def change_with_interval(estimate: float, lower: float, upper: float) -> str:
    """Table form of a change over a period: ``"−34% (95% CI −52 to −10)"``."""
    lo = signed_percent(lower, 0).rstrip("%")
    hi = signed_percent(upper, 0).rstrip("%")
    return f"{signed_percent(estimate, 0)} (95% CI {lo} to {hi})"


def share_words(share: float) -> str:
    """An everyday word for a share between 0 and 1 where one is close, else percent.

    ``0.335 -> "a third"``, ``0.47 -> "47%"``, ``0.05 -> "5%"``.
    """
    share = abs(share)
    if share < 0.08:
        return percent(share)
    if share > 0.95:
        return "almost all"
    best_value, best_word = min(_FRACTIONS, key=lambda item: abs(item[0] - share))
    if abs(best_value - share) <= _FRACTION_TOLERANCE:
        return best_word
    return f"{share * 100:.0f}%"


def period_phrase(change: float, first_year: int) -> str:
    """Noun phrase for a change over a period (fraction, ``-0.335`` = a fall of a third).

    Examples: ``"a fall of about a third"``, ``"a rise of about half"``,
    ``"roughly a doubling"``, ``"a rise to about 5.2 times the 2015 level"``.
    """
    if not math.isfinite(change):
        return "a change that cannot be estimated"
    if change < 0:
        return f"a fall of about {share_words(change)}"
    multiple = 1 + change
    for target, word in ((2, "doubling"), (3, "tripling"), (4, "quadrupling")):
        if abs(multiple - target) <= 0.15:
            return f"roughly a {word}"
    if change < 1:
        if change < 0.005:
            return "almost no change"
        return f"a rise of about {share_words(change)}"
    return f"a rise to about {multiple:.1f} times the {first_year} level"


def interval_phrase(lower: float, upper: float, per_year: bool = True) -> str:
    """The 95 % interval in words.

    Both below zero: ``"1% to 7% a year"`` (magnitudes, smaller first, read as falls);
    both above: ``"1% to 7% a year"``; spanning zero: ``"a fall of 8% to a rise of 4% a year"``.
    """
    unit = " a year" if per_year else ""
    if upper < 0:
        return f"{percent(upper)} to {percent(lower)}{unit}"
    if lower > 0:
        return f"{percent(lower)} to {percent(upper)}{unit}"
    return f"a fall of {percent(lower)} to a rise of {percent(upper)}{unit}"


def directed_interval_phrase(lower: float, upper: float) -> str:
    """The 95 % interval of an annual rate with its direction always stated.

    ``"a fall of 1% to 7% a year"``, ``"a rise of 1% to 7% a year"``,
    ``"a fall of 8% to a rise of 4% a year"``.
    """
    if upper < 0:
        return f"a fall of {percent(upper)} to {percent(lower)} a year"
    if lower > 0:
        return f"a rise of {percent(lower)} to {percent(upper)} a year"
    return f"a fall of {percent(lower)} to a rise of {percent(upper)} a year"


def _point_phrase(estimate: float) -> str:
    if estimate < 0:
        return f"a fall of about {percent(estimate)} a year"
    if estimate > 0:
        return f"a rise of about {percent(estimate)} a year"
    return "no change"


@dataclass(frozen=True)
class TrendNumbers:
    """The numbers a trend sentence is made from (fractions; years as calendar years)."""

    annual_estimate: float
    annual_lower: float
    annual_upper: float
    period_estimate: float
    first_year: int
    last_year: int
    call: str
    margin: float


def trend_sentence(name: str, measure: str, numbers: TrendNumbers) -> str:
    """One or two sentences saying which way a species is going and how sure we are.

    Parameters
    ----------
    name : str
        Species name as the reader knows it.
    measure : str
        One of ``monitor.columns.MEASURES``.
    numbers : TrendNumbers
        Annual change (fraction per year, with 95 % interval), the change over
        the whole period (fraction), first and last year, the call
        (rising/declining/stable/unclear) and the margin of change that matters
        (fraction per year).

    Returns
    -------
    str
        E.g. "Numbers of X fell by about 4% a year since 2015 (95% CI 1% to 7% a
        year); over the 10 years to 2025 that is a fall of about a third."

    Notes
    -----
    The direction word follows the call made by the trend engine from the
    interval against zero and against the margin (Dixon & Pechmann 2005); the
    figures follow the numbers.  The period is ``last - first`` years, the span
    over which ``period_change = exp(slope * (last - first)) - 1`` is computed.

    References
    ----------
    Dixon, P. M. and Pechmann, J. H. K. (2005). A statistical test to show
    negligible trend. Ecology 86(7), 1751-1756.
    """
    subject = measure_subject(measure, name)
    n = numbers
    span = n.last_year - n.first_year
    years_word = "year" if span == 1 else "years"
    over = f"over the {span} {years_word} to {n.last_year}"
    ci = interval_phrase(n.annual_lower, n.annual_upper)
    period = period_phrase(n.period_estimate, n.first_year)
    if n.call == C.CALL_DECLINING and n.annual_estimate < 0:
        return (
            f"{subject} fell by about {percent(n.annual_estimate)} a year since {n.first_year} "
            f"(95% CI {ci}); {over} that is {period}."
        )
    if n.call == C.CALL_RISING and n.annual_estimate > 0:
        return (
            f"{subject} rose by about {percent(n.annual_estimate)} a year since {n.first_year} "
            f"(95% CI {ci}); {over} that is {period}."
        )
    if n.call == C.CALL_STABLE:
        return (
            f"{subject} changed little since {n.first_year}: the estimate is "
            f"{_point_phrase(n.annual_estimate)} (95% CI "
            f"{directed_interval_phrase(n.annual_lower, n.annual_upper)}), within the "
            f"\u00b1{percent(n.margin)} a year that this programme treats as the smallest change that matters; "
            f"{over} that is {period}."
        )
    return (
        f"For {subject[0].lower() + subject[1:]} we cannot yet say which way the trend is going: since {n.first_year} "
        f"the estimate is {_point_phrase(n.annual_estimate)}, but the 95% CI runs from "
        f"{directed_interval_phrase(n.annual_lower, n.annual_upper)}; "
        f"{over} the estimate is {period}."
    )


@dataclass(frozen=True)
class MethodChange:
    """A change of method inside a series: ``kind`` is "protocol" or "observer"."""

    year: int
    kind: str
    description: str = ""


def caveat_sentences(
    n_stations: int,
    n_years: int,
    first_year: int,
    last_year: int,
    *,
    observation_sd: float | None = None,
    family: str | None = None,
    dispersion: float | None = None,
    method_changes: Iterable[MethodChange] = (),
    diagnostics: Sequence[tuple[str, str, str]] = (),
    converged: bool = True,
) -> list[str]:
    """Caveats that apply to one trend, each a plain sentence.

    Parameters
    ----------
    n_stations, n_years : int
        Stations and seasons behind the fit.
    first_year, last_year : int
        The series' span; method changes outside it are ignored.
    observation_sd : float, optional
        Observation-level random-effect SD [log scale]; above ``OVERDISPERSION_SD``
        the reader is told that counts vary more than chance alone gives.
    family, dispersion : optional
        The model family's name and fitted dispersion: where the family says the dispersion is
        strong (``ModelFamily.strongly_overdispersed``: a negative binomial size below 2) the
        reader is told so too, and the family's ``rate_note`` is added.
    method_changes : iterable of MethodChange
        Protocol or observer changes logged with the records.
    diagnostics : sequence of (code, message, severity)
        The fit's diagnostics; warnings are passed through in their own words,
        except the ones these caveats already cover.
    converged : bool
        False adds a sentence that the numbers are provisional.
    """
    out: list[str] = []
    covered: set[str] = set()
    if n_stations < FEW_STATIONS:
        out.append(
            f"The estimate rests on only {n_stations} station{'s' if n_stations != 1 else ''}, "
            f"fewer than the {FEW_STATIONS} needed to call a trend with confidence."
        )
        covered.update({"few_stations"})
    if n_years < SHORT_SERIES:
        out.append(
            f"With only {n_years} season{'s' if n_years != 1 else ''} of data the trend is still uncertain "
            "and may change as years are added."
        )
        covered.update({"few_years", "short_series"})
    fam = FAMILIES.get(family) if family else None
    overdispersed = (observation_sd is not None and observation_sd > OVERDISPERSION_SD) or (
        fam is not None and fam.strongly_overdispersed(dispersion)
    )
    if overdispersed:
        out.append(
            "Values vary from visit to visit much more than chance alone would give; the model allows "
            "for this, which widens the interval."
        )
        covered.add("overdispersion")
    for change in sorted(method_changes, key=lambda c: c.year):
        if not (first_year < change.year <= last_year):
            continue
        detail = f" ({change.description})" if change.description else ""
        if change.kind == "observer":
            out.append(
                f"The observers changed in {change.year}{detail}; part of the apparent change may come "
                "from differences between observers."
            )
        else:
            out.append(
                f"The recording method changed in {change.year}{detail}; part of the apparent change "
                "may come from the change of method."
            )
    if fam is not None and fam.rate_note:
        out.append(fam.rate_note)
    if not converged:
        out.append("The model fit did not fully converge, so treat these numbers as provisional.")
        covered.add("not_converged")
    for code, message, severity in diagnostics:
        if severity == "warning" and code not in covered and message:
            out.append(message if message.endswith(".") else message + ".")
            covered.add(code)
    return out


# --------------------------------------------------------------------------- the trend on the measure's own scale
@dataclass(frozen=True)
class LevelNumbers:
    """The fitted trend on the measure's own scale, first against last year (from ``TrendResult.level_change``).

    ``unit`` as the trend engine names it ("% of cells occupied", "% cover", "mean count per m²", ...);
    ``first`` and ``last`` are the fitted line's values in that unit, ``difference`` (last - first)
    with its 95 % interval in the same unit (percentage points for a share or cover).
    """

    unit: str
    first_year: int
    last_year: int
    first: float
    last: float
    difference: float
    difference_lower: float
    difference_upper: float

    @property
    def is_share(self) -> bool:
        return self.unit.startswith("%")


def _level(value: float, level: LevelNumbers) -> str:
    if level.is_share:
        return f"{value:.0f}%" if abs(value) >= 9.5 else f"{value:.1f}%"
    return f"{value:.2g}" if abs(value) < 10 else f"{value:.0f}"


def _points(value: float, level: LevelNumbers) -> str:
    """A signed difference on the measure's scale: "−17" (percentage points) for shares, "−0.42" for counts."""
    if not math.isfinite(value):
        return "n/a"
    if level.is_share:
        mag = f"{abs(value):.0f}" if abs(value) >= 9.5 else f"{abs(value):.1f}"
    else:
        mag = f"{abs(value):.2g}"
    return f"{MINUS if value < 0 else '+'}{mag}"


def level_sentence(level: LevelNumbers) -> str:
    """The fitted trend in the measure's own units, first year against last.

    E.g. "On the fitted trend the share went from 90% in 2015 to 73% in 2025: a change of −17
    percentage points (95% CI −25 to −9)." or, for counts, "On the fitted trend the mean count per
    m² went from 2.1 in 2015 to 1.4 in 2025: a change of −0.7 (95% CI −1 to −0.4)."
    """
    what = "the share" if level.is_share and level.unit != "% cover" else (
        "cover" if level.unit == "% cover" else f"the {level.unit}")
    unit = " percentage points" if level.is_share else ""
    return (f"On the fitted trend {what} went from {_level(level.first, level)} in {level.first_year} to "
            f"{_level(level.last, level)} in {level.last_year}: a change of {_points(level.difference, level)}{unit} "
            f"(95% CI {_points(level.difference_lower, level)} to {_points(level.difference_upper, level)}).")


def odds_trend_sentence(name: str, measure: str, numbers: TrendNumbers, level: LevelNumbers) -> str:
    """A trend of a share (frequency, pin hits, presence) or of cover, led by the share itself.

    The model's rate is a change in the odds (p / (1 - p)), which is not the change of the
    share: a share that falls from 0.90 to 0.73 has odds falling 13 % a year but the share by
    17 percentage points in all.  The sentence gives the share on the fitted trend first and
    the odds rate second, labelled as odds; the call (which rests on the odds interval, against
    the margin) sets the direction word.
    """
    subject = measure_subject(measure, name)
    n = numbers
    odds = "the odds of cover" if measure in measures.of_kind(measures.KIND_PERCENT) else "the odds"
    ci = directed_interval_phrase(n.annual_lower, n.annual_upper)
    share = level_sentence(level)
    if n.call == C.CALL_DECLINING and level.difference < 0:
        head = f"{subject} fell since {n.first_year}."
    elif n.call == C.CALL_RISING and level.difference > 0:
        head = f"{subject} rose since {n.first_year}."
    elif n.call == C.CALL_STABLE:
        head = (f"{subject} changed little since {n.first_year}, within the \u00b1{percent(n.margin)} a year "
                f"(in {odds}) that this programme treats as the smallest change that matters.")
    else:
        head = f"For {subject[0].lower() + subject[1:]} we cannot yet say which way the trend is going."
    return (f"{head} {share} In {odds} the estimate is {_point_phrase(n.annual_estimate)} "
            f"(95% CI {ci}).")


@dataclass(frozen=True)
class SummaryTexts:
    """The words of one summary-table row and of the call line above a species' section.

    ``period_*`` is the column that leads the row: the change over the period in percent for counts,
    and for shares (frequency, pin hits, presence, cover) the change of the share itself in percentage
    points; ``annual_*`` is the annual rate, labelled "in the odds" where the model's rate is one.
    """

    annual_text: str
    period_text: str
    annual_estimate_text: str
    annual_ci_text: str
    period_estimate_text: str
    period_ci_text: str
    call_line: str


def summary_texts(numbers: TrendNumbers, period_lower: float, period_upper: float, *, odds: bool,
                  level: LevelNumbers | None) -> SummaryTexts:
    """The summary row's cells and the species' call line from a trend's numbers.

    A share's model rate is a change in the odds, which is not the change of the share (a share
    falling from 90 % to 73 % has odds falling 13 % a year): for such a trend the row leads with the
    share's change in percentage points on the fitted trend, first year against last, with its
    interval (``level``), and the odds rate follows, labelled as odds.
    """
    n = numbers
    annual_text = rate_with_interval(n.annual_estimate, n.annual_lower, n.annual_upper)
    in_odds = " in the odds" if odds else ""
    if odds:
        annual_text = annual_text.replace(" a year ", " a year in the odds ", 1)
    annual_estimate = f"{signed_percent(n.annual_estimate)} a year{in_odds}"
    annual_ci = f"95% CI {signed_percent(n.annual_lower).rstrip('%')} to {signed_percent(n.annual_upper).rstrip('%')}"
    years = f"{n.first_year}–{n.last_year}"
    if odds and level is not None and level.is_share:
        period_estimate = f"{_points(level.difference, level)} percentage points"
        period_ci = f"95% CI {_points(level.difference_lower, level)} to {_points(level.difference_upper, level)}"
        what = "cover" if level.unit == "% cover" else "share"
        period_text = (f"{what} {_level(level.first, level)} to {_level(level.last, level)}: "
                       f"{period_estimate} ({period_ci})")
        call_line = f"{period_text} over {years} · {annual_text}"
    else:
        period_estimate = signed_percent(n.period_estimate, 0) + in_odds
        period_ci = (f"95% CI {signed_percent(period_lower, 0).rstrip('%')} to "
                     f"{signed_percent(period_upper, 0).rstrip('%')}")
        period_text = change_with_interval(n.period_estimate, period_lower, period_upper)
        if odds:
            period_text = period_text.replace(" (95% CI", " in the odds (95% CI", 1)
        call_line = f"{annual_text} · over {years}: {period_text}"
    return SummaryTexts(annual_text, period_text, annual_estimate, annual_ci, period_estimate, period_ci, call_line)


# --------------------------------------------------------------------------- numbers in prose and tables
def significant(value: float, digits: int = 2) -> str:
    """A number rounded to ``digits`` significant figures, written without an exponent or trailing
    zeros: ``6.41e-05 -> "0.000064"``, ``3.0 -> "3"``, ``1458141 -> "1,500,000"``, ``0.625 -> "0.63"``.

    Whole numbers below ``10 ** digits`` are kept whole (``37 -> "37"``, never ``"37.0"``).
    """
    if value is None or not math.isfinite(value):
        return "n/a"
    if value == 0:
        return "0"
    magnitude = math.floor(math.log10(abs(value)))
    if float(value).is_integer() and abs(value) < 10 ** digits:
        return f"{int(value):,}"
    decimals = digits - 1 - magnitude
    rounded = round(value, decimals)
    if decimals <= 0:
        return f"{rounded:,.0f}"
    text = f"{rounded:,.{decimals}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def whole(value: float) -> str:
    """A count of individuals: whole, with thousands separators, rounded to 2 significant figures above
    a thousand (an estimated total is not known to the last plant)."""
    if value is None or not math.isfinite(value):
        return "n/a"
    if abs(value) >= 1000:
        return significant(value, 2)
    return f"{round(value):,.0f}"


def season_label(year) -> str:
    """A season as people write it: ``2016.0 -> "2016"``; blank for none."""
    if year is None or (isinstance(year, float) and not math.isfinite(year)) or year == "":
        return ""
    try:
        return str(int(float(year)))
    except (TypeError, ValueError):
        return str(year)


_RAW_MEASURE = re.compile(r"\b(" + "|".join(re.escape(m) for m in C.MEASURES) + r")\b")


def plain_measures(text: str) -> str:
    """Measure names as people write them inside a sentence: ``"pin_hits 0" -> "pin hits 0"``."""
    return _RAW_MEASURE.sub(lambda m: MEASURE_LABEL.get(m[1], m[1]), text)


def detectable_fall_sentence(change: float, power: float, n_stations: int | None, n_years: int | None) -> str:
    """``"A fall of 7.5% a year would be detected 80 times in 100 with 23 stations over 10 years."``

    ``change`` is the smallest detectable annual change [fraction per year], given with or without its
    sign; the sentence carries the direction, so the number is a magnitude (no "a fall of -7.5%").
    """
    design = f" with {n_stations} stations over {n_years} years" if n_stations is not None and n_years is not None else ""
    return (f"A fall of {abs(change) * 100:.1f}% a year would be detected {power * 100:.0f} times in 100"
            f"{design}.")


def detectable_change_not_computed_sentence(note: str) -> str:
    """Said instead of a detectable fall that could not be computed (never "nan%"), with the reason given."""
    why = note.strip()
    if not why:
        return "The detectable change could not be computed."
    text = why[:1].upper() + why[1:]
    return text if text.endswith(".") else text + "."


def total_floor_note(counted: float, unit: str = "plants") -> str:
    """Why a total's lower bound equals the number counted."""
    n = int(round(counted))
    return (f"The lower bound is the {n:,} {unit if n != 1 else unit.rstrip('s')} counted in the quadrats: "
            "the site cannot hold fewer than were seen, so the interval is cut there.")


def decline_advice(name: str, call: str, annual: float, upper: float, has_trigger: bool,
                   margin: float = 0.0) -> str | None:
    """A sentence of advice for a decline that has not fired a trigger (None when there is no decline).

    A declining call without a fired trigger still asks for a response: a look at the causes and, where no
    trigger is set, agreeing one; a fall whose interval still reaches zero asks for watching.
    """
    if call == C.CALL_DECLINING:
        if has_trigger:
            return (f"{name} is declining, though not yet past its agreed trigger: review what may be causing "
                    "the fall (management, grazing, water, recording) with the land manager now, before it "
                    "does.")
        return (f"{name} is declining and no trigger is set for it: review the likely causes with the land "
                "manager and agree a threshold and a response in advance.")
    if annual < -abs(margin) and upper > 0 and call == C.CALL_UNCLEAR:
        return (f"The estimate for {name} is falling but the data cannot yet tell: keep the stations visited "
                "every season and look again next year.")
    return None


# --------------------------------------------------------------------------- the report's other sentences
def few_quadrats_note() -> str:
    """The footnote of an estimate resting on few quadrats (the mark † in the estimates table)."""
    return (f"\u2020 Fewer than {FEW_QUADRATS} quadrats at this site: treat the estimate and its interval with "
            "caution (a few quadrats more or less can move them a long way).")


def trigger_cell(fired: Sequence[bool]) -> tuple[str, str]:
    """The summary table's trigger state and its words, from whether each of a trend's triggers fired."""
    if not fired:
        return "none", "none set"
    if any(fired):
        return "fired", "\u26a0 Fired"
    return "not fired", "Not fired"


def headline_sentences(fired: Sequence[str], call_counts: Sequence[tuple[str, int]], n_rows: int,
                       n_approaching: int) -> tuple[str, ...]:
    """The "At a glance" lines: triggers fired (``fired``: "species (measure)" each), the calls counted,
    and triggers being approached."""
    lines = []
    if fired:
        lines.append(f"{len(fired)} management trigger{'s have' if len(fired) != 1 else ' has'} fired: "
                     + "; ".join(fired) + ". Agreed responses are listed below.")
    parts = [f"{n} {CALL_LABEL[c].lower()}" for c, n in call_counts if n]
    lines.append(f"Of {n_rows} species and measures: " + ", ".join(parts) + ".")
    if n_approaching:
        lines.append(f"{n_approaching} trigger{'s are' if n_approaching != 1 else ' is'} being approached "
                     "at the current rate.")
    return tuple(lines)


def comparison_note(previous_season: object, n_changed: int) -> str:
    """The line above the comparison with last year's report."""
    return f"Compared with the report for {previous_season}: {n_changed} call{'s' if n_changed != 1 else ''} changed."


def visited_text(visited: int, due: int) -> str:
    """A coverage cell: "7 of 8 (88%)"."""
    share = f" ({visited / due * 100:.0f}%)" if due else ""
    return f"{int(visited)} of {int(due)}{share}"


def model_sentence(family_words: str, n_obs: int, n_stations: int, n_sites: int, n_years: int, first: int,
                   last: int) -> str:
    """The line under a species' figures naming the model and the data behind it."""
    return (f"Model: {family_words}; {n_obs:,} values from {n_stations} stations"
            + (f" in {n_sites} sites" if n_sites else "")
            + f", {n_years} seasons {first}\u2013{last}.")


def first_lower(text: str) -> str:
    """Lower-case the first letter only, for use inside a sentence: codes inside a label (transect SM-T)
    and a label that starts with a code stay as stored."""
    return text[:1].lower() + text[1:] if text[:1].isupper() and not text[1:2].isupper() else text


def indices_figure_alt(name: str, measure_label: str, first: int, last: int, annual_text: str,
                       events: Sequence[str], method_years: Sequence[str]) -> str:
    """Alt text of a species' yearly-estimates figure (``events``: "grazing 2018" each)."""
    text = (f"Yearly index of {name} ({measure_label}) from {first} to {last}, relative to {first}, with "
            f"95% intervals and the fitted trend line, {annual_text}.")
    if events:
        text += " Management events marked: " + ", ".join(events) + "."
    if method_years:
        text += " Method changed in " + ", ".join(method_years) + "."
    return text


def indices_figure_caption(value_label: str, first: int) -> str:
    return ("Yearly estimates (points, 95% intervals) and fitted trend (line, 95% band), "
            + (f"as {value_label}." if value_label else f"relative to {first}."))


MAP_FIGURE_CAPTION = ("Stations coloured by their own change (orange falling, purple rising); open circles: "
                      "too few years for a station's own trend; grey crosses: never recorded there. "
                      "Grid north is up.")


def map_figure_alt(n_stations: int, n_sites: int, name: str, n_fall: int, n_rise: int, n_none: int) -> str:
    return (f"Map of {n_stations} stations"
            + (f" in {n_sites} sites" if n_sites else "")
            + f" coloured by each station's own annual change in {name}: {n_fall} falling "
              f"(down triangles), {n_rise} rising (up triangles), {n_none} with too few years "
              "(open circles).")


def gradient_figure_alt(value_label: str, name: str, gradient_label: str, season: int, n_stations: int,
                        low: str, high: str) -> str:
    return (f"{value_label} of {name} against {gradient_label} in {season} at "
            f"{n_stations} stations, from {low} to {high}.")


def gradient_figure_caption(season: int, value_label: str, gradient_label: str) -> str:
    return f"{season}: {first_lower(value_label)} against {first_lower(gradient_label)}."


def margin_text(margins: Iterable[float]) -> str:
    """The margin of change that matters in words: "±2% a year", or a range when trends differ."""
    margins = set(margins)
    if len(margins) == 1:
        return f"\u00b1{percent(next(iter(margins)))} a year"
    return "between " + " and ".join(f"\u00b1{percent(m)}" for m in (min(margins), max(margins))) + " a year"


def methods_paragraphs(family_list: str, random_effects: Iterable[str], margin: str) -> tuple[str, str]:
    """The two paragraphs of the methods section: the models, and what a call means."""
    random_effects = set(random_effects)
    grouping = ("a random intercept for each station nested in its site" if "site" in random_effects
                else "a random intercept for each station")
    if "observer" in random_effects:
        grouping += ", and one for each observer"
    if "year" in random_effects:
        grouping += (", and a random effect for each year shared by all stations (good and bad years; the "
                     "intervals then rest on a t reference with degrees of freedom from the number of years, "
                     "Piepho & Ogutu 2002)")
    first = (
        "Each species and measure was analysed with a generalised linear mixed model fitted by maximum "
        f"likelihood (Laplace approximation; Breslow & Clayton 1993), with {grouping}, "
        "so that the trend is the typical change within stations rather than "
        f"a change in which stations were visited. Models used: {family_list}. Year as a continuous "
        "covariate gives the annual change, exp(slope) \u2212 1, with its 95% interval (for frequencies, pin hits, "
        "presence and cover a change in the odds, p / (1 \u2212 p)); year as a factor gives the yearly estimates, "
        "shown with the fitted trend on the measure's own scale (mean over stations). The change over the "
        "period is the annual change compounded over the years between the first and last season."
    )
    second = (
        "The models assume that change is steady on the log (or logit) scale over the period, that stations "
        "differ only through their random effects, and that the method of recording stayed the same (changes "
        "are marked on the plots). Missed and inaccessible visits are treated as missing, never as zero. Each "
        "call compares the 95% interval of the annual change with zero and with a margin of "
        f"{margin}, the smallest change this programme treats as mattering: declining or rising "
        "when the interval lies clearly on one side, stable when it lies within the margin, unclear "
        f"otherwise, including whenever fewer than {MIN_TREND_STATIONS} stations or {MIN_TREND_YEARS} seasons "
        "are available (after Dixon & Pechmann 2005)."
    )
    return first, second


def caution_sentences(placements: Sequence[str], non_probability: Sequence[str], margin: str) -> tuple[str, ...]:
    """The report's standing cautions: what the stations speak for (``placements`` of every station,
    ``non_probability`` those not placed at random), who decides, and what stable and unclear mean."""
    if non_probability:
        design = (f"Trends describe the monitored stations only: {len(non_probability)} of {len(placements)} "
                  f"station{'s were' if len(placements) != 1 else ' was'} not placed at random "
                  f"({', '.join(sorted(set(non_probability)))}), so they do not speak for the whole reserve.")
        if len(placements) == 1:
            design = ("Trends describe the monitored stations only: the stations were not placed at random "
                      f"({non_probability[0]}), so they do not speak for the whole reserve.")
    else:
        design = ("Stations were placed by a random (probability) design, so the trends speak for the "
                  "sampled area, within the intervals shown; they do not speak for places outside it.")
    return (
        design,
        "Management decisions rest with the land manager and local rules; this report informs them and does "
        "not make them.",
        f"A stable call means any change is smaller than the margin ({margin}), not that "
        "there is none; an unclear call means the data cannot tell yet, not that nothing is happening.",
        "Indices are relative to the first season of each series; they are not population sizes.",
        "Missed and inaccessible visits are treated as missing, never as absences.",
    )


# --------------------------------------------------------------------------- this season's estimates
# estimates said as an amount with its unit (positive continuous measures: shoot height in cm)
_AMOUNT_UNIT = {m.quantity: m.unit for m in measures.REGISTRY.values() if m.kind == measures.KIND_POSITIVE}


def density_unit(value: float) -> tuple[str, float]:
    """The unit a density reads best in: per m², or per hectare when below 0.01 per m²."""
    if value is not None and math.isfinite(value) and 0 < abs(value) < 0.01:
        return "per ha", 10_000.0
    return "per m²", 1.0


def quantity_text(quantity: str, value: float, scale: tuple[str, float] | None = None) -> str:
    """A value of this season's estimates to sensible significant figures (2; totals whole)."""
    if value is None or not math.isfinite(value):
        return "n/a"
    if quantity == "cover":
        return f"{significant(value, 2)}%"
    if quantity in ("frequency", "presence"):
        return f"{significant(value * 100, 2)}%"
    if quantity == "density":
        unit, factor = scale or density_unit(value)
        return f"{significant(value * factor, 2)} {unit}"
    if quantity in _AMOUNT_UNIT:   # a length or other amount: "14 cm"
        return f"{significant(value, 2)} {_AMOUNT_UNIT[quantity]}"
    return whole(value)


def quantity_interval_text(quantity: str, lower: float | None, upper: float | None,
                   scale: tuple[str, float] | None) -> str:
    """``"8.2 to 18 per m²"``: the unit once, after the upper bound."""
    if lower is None or upper is None:
        return "—"
    if quantity == "density":
        unit, factor = scale or density_unit(upper)
        return f"{significant(lower * factor, 2)} to {significant(upper * factor, 2)} {unit}"
    return f"{quantity_text(quantity, lower)} to {quantity_text(quantity, upper)}"


def figure_number(value: float, digits: int = 3) -> str:
    """A number in a figure's alt text: ``digits`` significant figures, grouped thousands."""
    if value is None or not math.isfinite(value):
        return "n/a"
    if value == 0:
        return "0"
    magnitude = int(math.floor(math.log10(abs(value))))
    decimals = digits - 1 - magnitude
    rounded = round(value, decimals)  # negative decimals round to tens, hundreds, ...
    if decimals <= 0:
        return f"{rounded:,.0f}"
    return f"{rounded:,.{decimals}f}"


def report_title(programme_name: str, season: int) -> str:
    return f"{programme_name}: monitoring report {season}"
