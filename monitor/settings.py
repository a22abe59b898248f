"""Programme settings: every default written once, and the one typed object a programme's settings load into.

Every module that needs a default reads it from here, and every reader of a programme's own settings
goes through :class:`ProgrammeSettings`, which is checked when it is loaded (from ``programme.json`` by
``monitor.io.settings`` or from the database by :func:`programme_settings`): a bad value is refused on
one line naming the file, the key and what was expected, never replaced by a default in silence.

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
``FEW_QUADRATS``
    Below this many quadrats a season's estimate (density, total, cover, gradient) carries a caution
    in the command's output and the report (common practice).
``DEFAULT_SETUP_MINUTES``, ``DEFAULT_TIME_ZONE``, ``DEFAULT_PROTOCOL_DESCRIPTION``
    Minutes per station for relocating, marking and photographs; the zone of field days in calendar
    files; the protocol named in exported metadata when the programme names none.

References
----------
Dixon, P. M. & Pechmann, J. H. K. (2005) A statistical test to show negligible trend.
  Ecology 86(7), 1751-1756.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, fields
from types import MappingProxyType

from monitor import columns as C
from monitor.errors import InputError, InputProblem

DEFAULT_CHANGE_MARGIN = 0.02  # fraction per year; common practice
GENERALISE_M = 1000.0         # m; common practice
FIELD_PACKS_OUTSIDE = "field_packs_for_outside_crews"
MIN_TREND_YEARS = 5           # common practice minimum for a trend call
MIN_TREND_STATIONS = 10       # common practice minimum for a trend call and for a placement
MIN_YEAR_EFFECT_YEARS = 5     # a year random effect is fitted by default from this many years with data
FEW_QUADRATS = 10             # below this many quadrats a season's estimate is flagged; common practice
DEFAULT_SETUP_MINUTES = 10.0  # minutes per station (relocating, marking, photo); common practice
DEFAULT_TIME_ZONE = "UTC"
DEFAULT_PROTOCOL_DESCRIPTION = "permanent quadrat monitoring"

#: the kinds of management trigger (the report evaluates these; docs/files.md lists them)
TRIGGER_KINDS = ("decline", "upper_bound_below")


def change_margin(programme_value: float | None = None) -> float:
    """The margin of change that matters: the programme's own setting where it has one, else the default."""
    if programme_value is None or (isinstance(programme_value, float) and math.isnan(programme_value)):
        return DEFAULT_CHANGE_MARGIN
    return float(programme_value)


def year_effect_by_default(n_years_with_data: int) -> bool:
    """Whether a series of this many years with data gets the year random effect by default (the trend
    engine's rule, which the power study's approximation follows): :data:`MIN_YEAR_EFFECT_YEARS`."""
    return int(n_years_with_data) >= MIN_YEAR_EFFECT_YEARS


def trigger_problem(kind: object, threshold: object, years: object) -> tuple[str, str] | None:
    """What is wrong with a trigger's kind, threshold and years, as (key, expected), or None: the one rule
    the settings loader and :class:`monitor.report.triggers.Trigger` both apply."""
    if kind not in TRIGGER_KINDS:
        return "kind", f"one of {', '.join(TRIGGER_KINDS)}"
    if not _is_number(threshold):
        return "threshold", "a number"
    if kind == "decline":
        if not (_is_whole(years) and int(years) >= 1):  # type: ignore[arg-type]
            return "years", "a whole number of years >= 1 (a decline trigger counts its fall over them)"
        if not 0 < float(threshold) < 1:  # type: ignore[arg-type]
            return "threshold", "a share between 0 and 1 for a decline trigger, e.g. 0.3"
    elif years is not None:
        return "years", "no years (only a decline trigger counts over years)"
    return None


@dataclass(frozen=True)
class TriggerSetting:
    """A management trigger as the programme states it (``settings.triggers[]``; see docs/files.md)."""

    species: str
    measure: str
    objective: str
    kind: str
    threshold: float
    response: str
    years: int | None = None


@dataclass(frozen=True)
class ProgrammeSettings:
    """A programme's settings, checked, with every default applied.

    Attributes
    ----------
    change_margin : float
        The margin of change that matters [fraction a year] (``change_margin``).
    time_zone : str
        IANA zone of the field days (``time_zone``).
    generalise_m : float
        Cell [m] sensitive stations are generalised to (``settings.generalise_m``).
    field_packs_for_outside_crews : bool
        Field packs generalise sensitive stations too.
    minutes_per_quadrat : Mapping[str, float]
        The programme's own minutes per quadrat by measure [min]; measures it does not name take the
        schedule's defaults.
    setup_minutes : float
        Minutes per station for relocating, marking and photographs [min].
    covariate_units : Mapping[str, str]
        Unit of each visit covariate.
    required_covariates : tuple[str, ...]
        Covariates every visit must carry (``settings.required_covariates``; without it, those with units).
    triggers : tuple[TriggerSetting, ...]
        Management triggers agreed in advance.
    protocol_measures : Mapping[str, tuple[str, ...]]
        Protocol code -> the measures a protocol change concerns (from ``protocols[].measures``).
    email, licence, protocol_description : str
        Metadata for exported archives.
    """

    change_margin: float = DEFAULT_CHANGE_MARGIN
    time_zone: str = DEFAULT_TIME_ZONE
    generalise_m: float = GENERALISE_M
    field_packs_for_outside_crews: bool = False
    minutes_per_quadrat: Mapping[str, float] = field(default_factory=lambda: MappingProxyType({}))
    setup_minutes: float = DEFAULT_SETUP_MINUTES
    covariate_units: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    required_covariates: tuple[str, ...] = ()
    triggers: tuple[TriggerSetting, ...] = ()
    protocol_measures: Mapping[str, tuple[str, ...]] = field(default_factory=lambda: MappingProxyType({}))
    email: str = ""
    licence: str = ""
    protocol_description: str = DEFAULT_PROTOCOL_DESCRIPTION


#: keys of ``settings`` in programme.json (docs/files.md lists each; tests/test_settings.py checks)
SETTINGS_KEYS = ("minutes_per_quadrat", "setup_minutes", "covariate_units", "required_covariates", "triggers",
                 "generalise_m", FIELD_PACKS_OUTSIDE, "email", "licence", "protocol_description")
#: keys the set-up loader stores beside them from the top level of programme.json
STORED_KEYS = ("time_zone", "protocol_measures")
_TRIGGER_REQUIRED = ("species", "measure", "objective", "kind", "threshold", "response")


def _is_number(value: object) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


def _is_whole(value: object) -> bool:
    return _is_number(value) and float(value) == int(value)  # type: ignore[arg-type]


Bad = Callable[[str, object, str], None]


def _mapping(value: object, key: str, bad: Bad, check: Callable[[object], bool], expected: str) -> dict:
    if not isinstance(value, dict):
        bad(key, value, f"an object of {expected}")
        return {}
    out = {}
    for name, item in value.items():
        if check(item):
            out[str(name)] = item
        else:
            bad(f"{key}.{name}", item, expected)
    return out


def _measure_names() -> tuple[str, ...]:
    return tuple(C.MEASURES)


def _triggers(value: object, key: str, bad: Bad) -> tuple[TriggerSetting, ...]:
    if not isinstance(value, list):
        bad(key, value, "a list of trigger objects (species, measure, kind, threshold, objective, response)")
        return ()
    out = []
    for i, item in enumerate(value):
        where = f"{key}[{i}]"
        if not isinstance(item, dict):
            bad(where, item, "an object with species, measure, kind, threshold, objective and response")
            continue
        missing = [k for k in _TRIGGER_REQUIRED if item.get(k) in (None, "")]
        unknown = [k for k in item if k not in _TRIGGER_REQUIRED + ("years",)]
        if missing or unknown:
            for k in missing:
                bad(f"{where}.{k}", None, "a value (required)")
            for k in unknown:
                bad(f"{where}.{k}", item[k], f"a known key ({', '.join(_TRIGGER_REQUIRED + ('years',))})")
            continue
        if item["measure"] not in _measure_names():
            bad(f"{where}.measure", item["measure"], f"one of {', '.join(_measure_names())}")
            continue
        wrong = trigger_problem(item["kind"], item["threshold"], item.get("years"))
        if wrong:
            bad(f"{where}.{wrong[0]}", item.get(wrong[0]), wrong[1])
            continue
        out.append(TriggerSetting(species=str(item["species"]), measure=str(item["measure"]),
                                  objective=str(item["objective"]), kind=str(item["kind"]),
                                  threshold=float(item["threshold"]), response=str(item["response"]),
                                  years=None if item.get("years") is None else int(item["years"])))
    return tuple(out)


def time_zone_problem(value: object) -> str | None:
    """Why ``value`` is not an IANA time zone name, or None."""
    import zoneinfo

    if isinstance(value, str) and value.strip():
        try:
            zoneinfo.ZoneInfo(value.strip())
            return None
        except (zoneinfo.ZoneInfoNotFoundError, ValueError):
            pass
    return "an IANA time zone name such as Europe/London or UTC"


def margin_problem(value: object) -> str | None:
    """Why ``value`` is not a margin of change, or None."""
    if _is_number(value) and 0 < float(value) < 1:  # type: ignore[arg-type]
        return None
    return f"a fraction a year above 0 and below 1 (e.g. {DEFAULT_CHANGE_MARGIN:g})"


def parse_settings(doc: object, *, file: str, prefix: str = "settings.", stored: bool = False,
                   margin: object = None) -> tuple[ProgrammeSettings, list[InputProblem]]:
    """Check a ``settings`` object and build the settings from it, with every problem found.

    ``doc`` is the ``settings`` object of programme.json (``stored`` False: only :data:`SETTINGS_KEYS`)
    or the settings kept in the database (``stored`` True: also :data:`STORED_KEYS`); ``margin`` the
    programme's change margin (None: the default).  Problems name ``file`` and the key with ``prefix``.
    """
    problems: list[InputProblem] = []

    def bad(key: str, value: object, expected: str) -> None:
        problems.append(InputProblem(file=file, row=None, field=prefix + key, value=value, expected=expected))

    values: dict[str, object] = {}
    if margin is not None and not (isinstance(margin, float) and math.isnan(margin)):
        why = margin_problem(margin)
        if why:
            problems.append(InputProblem(file=file, row=None, field="change_margin", value=margin, expected=why))
        else:
            values["change_margin"] = float(margin)  # type: ignore[arg-type]
    if doc is None:
        doc = {}
    if not isinstance(doc, dict):
        problems.append(InputProblem(file=file, row=None, field=prefix.rstrip("."), value=type(doc).__name__,
                                     expected="a JSON object"))
        return ProgrammeSettings(**values), problems  # type: ignore[arg-type]
    known = SETTINGS_KEYS + (STORED_KEYS if stored else ())
    for key, value in doc.items():
        if key not in known:
            bad(key, None, f"a known key ({', '.join(known)})")
        elif key == "minutes_per_quadrat":
            given = _mapping(value, key, bad, lambda v: _is_number(v) and v >= 0, "minutes >= 0 by measure")
            for measure in list(given):
                if measure not in _measure_names():
                    bad(f"{key}.{measure}", measure, f"a measure ({', '.join(_measure_names())})")
                    given.pop(measure)
            values[key] = MappingProxyType({m: float(v) for m, v in given.items()})
        elif key == "setup_minutes":
            if _is_number(value) and value >= 0:
                values[key] = float(value)
            else:
                bad(key, value, "minutes per station >= 0")
        elif key == "covariate_units":
            values[key] = MappingProxyType(_mapping(value, key, bad, lambda v: isinstance(v, str), "unit names"))
        elif key == "required_covariates":
            if isinstance(value, list) and all(isinstance(v, str) and v for v in value):
                values[key] = tuple(value)
            else:
                bad(key, value, "a list of covariate names")
        elif key == "triggers":
            values[key] = _triggers(value, key, bad)
        elif key == "generalise_m":
            if _is_number(value) and value > 0:
                values[key] = float(value)
            else:
                bad(key, value, "a grid cell in metres > 0")
        elif key == FIELD_PACKS_OUTSIDE:
            if isinstance(value, bool):
                values[key] = value
            else:
                bad(key, value, "true or false")
        elif key in ("email", "licence", "protocol_description"):
            if isinstance(value, str):
                values[key] = value
            else:
                bad(key, value, "text")
        elif key == "time_zone":
            why = time_zone_problem(value)
            if why:
                bad(key, value, why)
            else:
                values[key] = str(value).strip()
        elif key == "protocol_measures":
            values[key] = MappingProxyType({
                str(code): tuple(ms) for code, ms in _mapping(
                    value, key, bad, lambda v: isinstance(v, list) and all(m in _measure_names() for m in v),
                    "lists of measures").items()})
    if "required_covariates" not in values and "covariate_units" in values:
        values["required_covariates"] = tuple(sorted(values["covariate_units"]))  # type: ignore[arg-type]
    return ProgrammeSettings(**values), problems  # type: ignore[arg-type]


def programme_settings(programme) -> ProgrammeSettings:
    """The settings of a stored programme (its ``settings_json`` and ``change_margin``), checked.

    Raises :class:`~monitor.errors.InputError` naming the programme and the key when a stored value is
    not what the settings allow (something other than ``monitor setup`` wrote it).
    """
    file = f"programme {getattr(programme, 'code', '?')} settings (in the database)"
    text = getattr(programme, "settings_json", None) or "{}"
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(InputProblem(file, None, "settings_json", None, f"a JSON object ({exc.msg})")) from None
    loaded, problems = parse_settings(doc, file=file, stored=True,
                                      margin=getattr(programme, "change_margin", None))
    if problems:
        raise InputError(problems)
    return loaded


def settings_field_names() -> tuple[str, ...]:
    """The attributes of :class:`ProgrammeSettings` (for the test that every one is loaded)."""
    return tuple(f.name for f in fields(ProgrammeSettings))


__all__ = ["DEFAULT_CHANGE_MARGIN", "DEFAULT_PROTOCOL_DESCRIPTION", "DEFAULT_SETUP_MINUTES", "DEFAULT_TIME_ZONE",
           "FEW_QUADRATS", "FIELD_PACKS_OUTSIDE", "GENERALISE_M", "MIN_TREND_STATIONS", "MIN_TREND_YEARS", "MIN_YEAR_EFFECT_YEARS",
           "ProgrammeSettings", "SETTINGS_KEYS", "STORED_KEYS", "TRIGGER_KINDS", "TriggerSetting", "change_margin",
           "margin_problem", "parse_settings", "programme_settings", "time_zone_problem", "trigger_problem",
           "year_effect_by_default"]
