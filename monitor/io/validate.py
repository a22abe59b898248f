"""Validation of a season's field records against the programme (pure; no database).

:func:`validate_records` takes the canonical frames produced by :mod:`monitor.io.records` and a
:class:`Reference` describing what the programme holds, and returns every problem as an
:class:`monitor.errors.InputProblem` (severity "error", or "warning" for the checks a user may accept
with a flag: a date in the future, a date outside the round's or the species' season window).

Range rules per measure (monitor/measures.py; common practice): count a whole number >= 0; cover a percent 0-100;
frequency and pin hits a whole k with 0 <= k <= n and n the programme's grid or frame; presence 0 or 1.
Vectorised over the observations so that a million rows validate in seconds.
"""

from __future__ import annotations

import datetime as dt
import difflib
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor import measures as registry
from monitor.errors import InputError, InputProblem, ProblemCounter
from monitor.io import headers as H

WARNING = "warning"


@dataclass(frozen=True)
class Reference:
    """What the programme already holds, as far as checking a season's records needs.

    Attributes
    ----------
    stations : DataFrame
        Columns ``station`` and ``retired`` (date, or None/NaT while in service).
    species : DataFrame
        Columns ``species``, ``measure`` and ``n`` (cells or pins; NA for other measures).  A species
        may appear on several rows if it is measured in several ways.
    targets : tuple of (species, measure)
        What every done visit records; a done visit without a value for one of them is an error
        unless ``blanks_mean_zero``.
    blanks_mean_zero : bool
        The programme's rule that a target left blank on a done visit is a recorded zero.
    windows : mapping year -> (start date, end date)
        The round's season window in each year.
    species_windows : mapping species -> ("MM-DD", "MM-DD")
        Phenology windows per species; may wrap the new year.
    existing_visits : DataFrame, optional
        Stored visits: columns ``station``, ``date`` and ``repeat``.
    observers : frozenset of str, optional
        The observer register; when given, every observer code must be in it.
    covariate_units : mapping name -> unit, optional
        Known covariates and their units; when given, names and units must match.
    today : date
        Dates after this are in the future.
    season_of : callable date -> int, optional
        The season a visit date belongs to (default: its calendar year).  A programme whose window
        wraps the new year counts January and February dates to the season that opened in December.
    """

    stations: pd.DataFrame
    species: pd.DataFrame
    targets: tuple[tuple[str, str], ...] = ()
    blanks_mean_zero: bool = False
    windows: Mapping[int, tuple[dt.date, dt.date]] = field(default_factory=dict)
    species_windows: Mapping[str, tuple[str, str]] = field(default_factory=dict)
    existing_visits: pd.DataFrame | None = None
    observers: frozenset[str] | None = None
    covariate_units: Mapping[str, str | None] | None = None
    today: dt.date = field(default_factory=dt.date.today)
    season_of: Callable[[dt.date], int] | None = None


def _plain(value: object) -> object:
    """A value for a message: text as typed, or a whole float shown as a whole number (11, not 11.0)."""
    if isinstance(value, (float, np.floating)):
        value = float(value)
        return int(value) if value.is_integer() and abs(value) < 1e15 else value
    return value


def _closest(value: str, choices: list[str]) -> str:
    close = difflib.get_close_matches(value, choices, n=3, cutoff=0.5)
    if not close:
        lowered = {c.lower(): c for c in choices}
        if value.lower() in lowered:
            close = [lowered[value.lower()]]
    return f"; closest: {', '.join(close)}" if close else ""


def _as_date(value: object) -> dt.date | None:
    if value is None or (isinstance(value, float) and np.isnan(value)) or value is pd.NaT:
        return None
    if isinstance(value, pd.Timestamp):
        return value.date()
    if isinstance(value, dt.datetime):
        return value.date()
    if isinstance(value, dt.date):
        return value
    try:
        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    return pd.Timestamp(value).date()


def _team_key(team: object) -> tuple:
    """A visit's observers as a hashable tuple (None or NaN = no observers)."""
    if team is None or (isinstance(team, float) and np.isnan(team)):
        return ()
    return tuple(team)


def _dates(series: pd.Series) -> pd.Series:
    """A date column as datetime.date objects (accepts date objects, Timestamps or ISO strings)."""
    if pd.api.types.is_datetime64_any_dtype(series):
        return series.dt.date
    if len(series) and all(type(d) is dt.date for d in series.iloc[:1000]):
        return series
    return series.map(_as_date)


def _pair_codes(stations_a, dates_a, stations_b, dates_b) -> tuple[np.ndarray, np.ndarray]:
    """Integer codes of (station, date) pairs, equal for equal pairs across the two sets (a fast join key)."""
    n = len(stations_a)
    station_codes, _ = pd.factorize(np.concatenate([np.asarray(stations_a, dtype=object),
                                                    np.asarray(stations_b, dtype=object)]))
    date_codes, date_values = pd.factorize(np.concatenate([np.asarray(dates_a, dtype=object),
                                                           np.asarray(dates_b, dtype=object)]))
    key = station_codes.astype(np.int64) * (len(date_values) + 1) + date_codes
    return key[:n], key[n:]


def _pair_index(first, second) -> tuple[np.ndarray, list[tuple]]:
    """Index of each (first, second) pair in the list of distinct pairs (found without building every tuple)."""
    a, a_values = pd.factorize(np.asarray(first, dtype=object))
    b, b_values = pd.factorize(np.asarray(second, dtype=object))
    combined, distinct = pd.factorize(a.astype(np.int64) * (len(b_values) + 1) + b)
    width = len(b_values) + 1
    pairs = [(a_values[k // width], b_values[k % width]) for k in distinct.tolist()]
    return combined, pairs


def _missing_targets(visits: pd.DataFrame, observations: pd.DataFrame, reference: Reference):
    """(station, date, species, measure, source_row) for each target without a value on a done visit.

    In the order of the done visits, then of the targets.
    """
    done = visits[visits[C.VISIT_STATUS] == C.STATUS_DONE]
    if done.empty:
        return []
    rows = done[H.SOURCE_ROW].to_numpy() if H.SOURCE_ROW in done.columns else np.full(len(done), None)
    stations = done[C.STATION].to_numpy(dtype=object)
    dates = _dates(done[C.DATE]).to_numpy(dtype=object)
    # a measure with no value where the species is absent (a shoot height) may be blank on a done visit
    targets = [t for t in reference.targets if registry.zero_when_absent(t[1])]
    n_targets = len(targets)
    if not n_targets:
        return []
    target_code = {pair: k for k, pair in reversed(list(enumerate(targets)))}
    visit_key, obs_key = _pair_codes(stations, dates, observations[C.STATION].to_numpy(dtype=object),
                                     _dates(observations[C.DATE]).to_numpy(dtype=object))
    # dense codes of the visits' keys, so that "has this target" is one boolean per visit and target
    dense, distinct = pd.factorize(np.concatenate([visit_key, obs_key]))
    visit_dense, obs_dense = dense[:len(visit_key)], dense[len(visit_key):]
    have = np.zeros(len(distinct) * n_targets, dtype=bool)
    if len(observations):
        pair_at, distinct_pairs = _pair_index(observations[C.SPECIES].to_numpy(dtype=object),
                                              observations[C.MEASURE].to_numpy(dtype=object))
        codes = np.array([target_code.get(pair, -1) for pair in distinct_pairs] or [-1], dtype=np.int64)[pair_at]
        hit = codes >= 0
        have[obs_dense[hit] * n_targets + codes[hit]] = True
    code_of = np.array([target_code[t] for t in targets], dtype=np.int64)
    wanted = (visit_dense[:, None] * n_targets + code_of[None, :]).ravel()
    missing = np.flatnonzero(~have[wanted])
    visit_at, target_at = np.divmod(missing, n_targets)
    return [(stations[v], dates[v], targets[t][0], targets[t][1], rows[v])
            for v, t in zip(visit_at.tolist(), target_at.tolist(), strict=True)]


class _Problems:
    """The problems found so far in one file: ``add`` keeps them in a counter ordered by row."""

    def __init__(self, file: str):
        self.file = file
        self.counter = ProblemCounter()

    def add(self, row, field_, value, expected, severity="error") -> None:
        row = None if row is None else int(row)
        self.counter.add_parts(self.file, row, field_, value, expected, severity, key=(-1 if row is None else row,))


def validate_records(visits: pd.DataFrame, observations: pd.DataFrame, covariates: pd.DataFrame,
                     reference: Reference, *, file: str | None = None) -> list[InputProblem]:
    """Check a season's records against the programme; return every problem found.

    Parameters
    ----------
    visits, observations, covariates : DataFrame
        Canonical frames (docs/files.md), e.g. from :func:`monitor.io.records.read_field_records`.
    reference : Reference
        What the programme holds.
    file : str, optional
        File name for the messages; defaults to ``visits.attrs["file"]``.

    Returns
    -------
    list of InputProblem
        Errors and warnings, in the order: visits, observations, covariates.

    Notes
    -----
    One function per check: :func:`check_visits` (station, date, observers), :func:`check_repeats`
    (a second visit in a round), then for the observations :func:`check_values_have_visits`,
    :func:`check_species_and_measures`, :func:`check_value_ranges`, :func:`check_grid_sizes` and
    :func:`check_species_windows`; then :func:`check_targets` and :func:`check_covariates`.
    """
    problems = _Problems(file or visits.attrs.get("file") or "<records>")
    season = reference.season_of or (lambda d: d.year)
    check_visits(visits, reference, season, problems)
    check_repeats(visits, reference, season, problems)
    if len(observations):
        obs = _Observed.of(observations)
        check_values_have_visits(obs, visits, problems)
        registered, pair_at, distinct_pairs = check_species_and_measures(obs, reference, problems)
        check_value_ranges(obs, problems)
        check_grid_sizes(obs, registered, pair_at, distinct_pairs, problems)
        check_species_windows(obs, reference, problems)
    check_targets(visits, observations, reference, problems)
    check_covariates(covariates, visits, reference, problems)
    return ProblemList.of(problems.counter)


def _retired_stations(reference: Reference) -> dict[str, dt.date]:
    retired = {}
    if H.RETIRED in reference.stations.columns:
        for code, when in zip(reference.stations[C.STATION], reference.stations[H.RETIRED], strict=True):
            when = _as_date(when)
            if when is not None:
                retired[code] = when
    return retired


def check_visits(visits: pd.DataFrame, reference: Reference, season: Callable[[dt.date], int],
                 problems: _Problems) -> None:
    """Each visit's station (of the programme, in service on the date), date (not in the future, inside the
    round's window: warnings) and observers (in the register)."""
    add = problems.add
    station_codes = [str(s) for s in reference.stations[C.STATION]]
    retired = _retired_stations(reference)
    known_stations = set(station_codes)
    n_visits = len(visits)
    v_stations = visits[C.STATION].tolist()
    v_dates = [d if type(d) is dt.date else _as_date(d) for d in visits[C.DATE]]
    v_rows = visits[H.SOURCE_ROW].tolist() if H.SOURCE_ROW in visits.columns else [None] * n_visits
    v_teams = visits[H.OBSERVERS].tolist() if H.OBSERVERS in visits.columns else [()] * n_visits
    # cheap screens first (per distinct date and team); the full checks run only on visits they pick out
    date_suspect: dict[dt.date, bool] = {}
    for date in set(v_dates):
        window = reference.windows.get(season(date))
        date_suspect[date] = date > reference.today or (window is not None and not window[0] <= date <= window[1])
    team_suspect: dict[object, bool] = {}
    if reference.observers is not None:
        for team in set(map(_team_key, v_teams)):
            team_suspect[team] = any(code not in reference.observers for code in team)
    for i in range(n_visits):
        station, date = v_stations[i], v_dates[i]
        if (station in known_stations and station not in retired and not date_suspect[date]
                and not (team_suspect and team_suspect[_team_key(v_teams[i])])):
            continue
        row = v_rows[i]
        if station not in known_stations:
            add(row, C.STATION, station, "a station of the programme" + _closest(station, station_codes))
        elif station in retired and date >= retired[station]:
            add(row, C.STATION, station, f"a station in service on {date.isoformat()} "
                                         f"(retired on {retired[station].isoformat()})")
        if date > reference.today:
            add(row, C.DATE, date.isoformat(), f"a date not after today ({reference.today.isoformat()})", WARNING)
        window = reference.windows.get(season(date))
        if window is not None and not window[0] <= date <= window[1]:
            add(row, C.DATE, date.isoformat(),
                f"a date inside the {season(date)} season window {window[0].isoformat()} to {window[1].isoformat()}",
                WARNING)
        if reference.observers is not None:
            for code in v_teams[i] or ():
                if code not in reference.observers:
                    add(row, H.OBSERVERS, code,
                        "an observer in the register" + _closest(code, sorted(reference.observers)))


def check_repeats(visits: pd.DataFrame, reference: Reference, season: Callable[[dt.date], int],
                  problems: _Problems) -> None:
    """A second visit to a station in one round (stored or in this file) must be marked repeat = yes."""
    rounds: dict[tuple[str, int], list[tuple[dt.date, bool, int | None]]] = {}
    if reference.existing_visits is not None and len(reference.existing_visits):
        ex = reference.existing_visits
        reps = ex[H.REPEAT] if H.REPEAT in ex.columns else [False] * len(ex)
        for station, date, rep in zip(ex[C.STATION], ex[C.DATE], reps, strict=True):
            date = _as_date(date)
            rounds.setdefault((station, season(date)), []).append((date, bool(rep), None))
    n_visits = len(visits)
    v_dates = [d if type(d) is dt.date else _as_date(d) for d in visits[C.DATE]]
    v_rows = visits[H.SOURCE_ROW].tolist() if H.SOURCE_ROW in visits.columns else [None] * n_visits
    v_repeats = visits[H.REPEAT].tolist() if H.REPEAT in visits.columns else [None] * n_visits
    for station, date, repeat, row in zip(visits[C.STATION].tolist(), v_dates, v_repeats, v_rows, strict=True):
        rounds.setdefault((station, season(date)), []).append((date, bool(repeat), row))
    for (station, year), entries in rounds.items():
        if len(entries) < 2:
            continue  # one visit in the round: nothing to compare
        # same station and date already stored = the same visit (a correction), not a second one
        first_plain: dt.date | None = None
        seen_dates: set[dt.date] = set()
        for date, repeat, row in sorted(entries, key=lambda e: (e[2] is not None, e[0])):
            if date in seen_dates:
                continue
            seen_dates.add(date)
            if repeat:
                continue
            if first_plain is None:
                first_plain = date
            elif row is not None:
                problems.add(row, H.REPEAT, "no", f"repeat = yes for a second visit to {station} in the {year} "
                                                  f"round (already visited on {first_plain.isoformat()})")


@dataclass(frozen=True)
class _Observed:
    """The observation columns the checks read, as arrays (vectorised over a million rows)."""

    frame: pd.DataFrame
    rows: np.ndarray
    fields: np.ndarray
    stations: np.ndarray
    dates: np.ndarray
    species: np.ndarray
    measures: np.ndarray
    values: np.ndarray
    shown: np.ndarray   # what the messages echo: the cell as typed where the reader kept it ('11', not 11.0)
    ns: np.ndarray

    @classmethod
    def of(cls, obs: pd.DataFrame) -> _Observed:
        values = obs[H.VALUE].astype(float).to_numpy()
        return cls(
            frame=obs,
            rows=obs[H.SOURCE_ROW].to_numpy() if H.SOURCE_ROW in obs.columns else np.full(len(obs), None),
            fields=obs[H.SOURCE_FIELD].to_numpy() if H.SOURCE_FIELD in obs.columns else np.full(len(obs), None),
            stations=obs[C.STATION].to_numpy(), dates=obs[C.DATE].to_numpy(),
            species=obs[C.SPECIES].astype(str).to_numpy(), measures=obs[C.MEASURE].astype(str).to_numpy(),
            values=values,
            shown=obs[H.SOURCE_TEXT].to_numpy(dtype=object) if H.SOURCE_TEXT in obs.columns else values,
            ns=pd.to_numeric(obs[H.N], errors="coerce").to_numpy(dtype=float) if H.N in obs.columns
            else np.full(len(obs), np.nan))


def check_values_have_visits(obs: _Observed, visits: pd.DataFrame, problems: _Problems) -> None:
    """Values must belong to a visit in the file; missed / inaccessible visits carry no values."""
    visit_key, obs_key = _pair_codes(visits[C.STATION].to_numpy(dtype=object),
                                     _dates(visits[C.DATE]).to_numpy(dtype=object), obs.stations,
                                     _dates(obs.frame[C.DATE]).to_numpy(dtype=object))
    first_of_key = ~pd.Series(visit_key).duplicated().to_numpy()
    at = pd.Index(visit_key[first_of_key]).get_indexer(obs_key)
    statuses = np.append(visits[C.VISIT_STATUS].to_numpy(dtype=object)[first_of_key], None)
    visit_status = statuses[at]  # at = -1 (no visit in the file) picks the trailing None
    for i in np.flatnonzero(pd.isna(visit_status)):
        problems.add(obs.rows[i], obs.fields[i], _plain(obs.shown[i]),
                     f"a value belonging to a visit of {obs.stations[i]} in this file")
    no_values = np.isin(visit_status.astype(str), [C.STATUS_MISSED, C.STATUS_INACCESSIBLE])
    for i in np.flatnonzero(no_values):
        problems.add(obs.rows[i], obs.fields[i], _plain(obs.shown[i]),
                     f"a blank cell: a {visit_status[i]} visit carries no values (missing is not zero)")


def check_species_and_measures(obs: _Observed, reference: Reference, problems: _Problems):
    """Species of the programme, each with a measure registered for it.

    Returns the registered (species, measure) -> n, and each row's index into the distinct pairs.
    """
    registered = {(str(s), str(m)): n for s, m, n in zip(reference.species[C.SPECIES],
                                                         reference.species[C.MEASURE],
                                                         reference.species.get(H.N, [None] * len(reference.species)),
                                                         strict=True)}
    species_codes = sorted({s for s, _ in registered})
    unknown = ~np.isin(obs.species, species_codes)
    for i in np.flatnonzero(unknown):
        problems.add(obs.rows[i], obs.fields[i], obs.species[i],
                     "a species of the programme" + _closest(obs.species[i], species_codes))
    # (species, measure) pairs worked out once per distinct pair
    pair_at, distinct_pairs = _pair_index(obs.species, obs.measures)
    registered_pair = np.array([pair in registered for pair in distinct_pairs] or [False])[pair_at]
    not_registered = ~registered_pair & ~unknown
    for i in np.flatnonzero(not_registered):
        ways = sorted(m for s, m in registered if s == obs.species[i])
        problems.add(obs.rows[i], obs.fields[i], obs.measures[i],
                     f"a measure registered for {obs.species[i]}: {', '.join(ways)}")
    return registered, pair_at, distinct_pairs


def check_value_ranges(obs: _Observed, problems: _Problems) -> None:
    """Each value inside its measure's range: one rule each, from the registry (monitor/measures.py; the
    phone field sheet checks the same)."""
    values, ns = obs.values, obs.ns
    whole = np.isclose(values, np.round(values), rtol=0, atol=1e-9)
    for measure, value_rule in registry.VALUE_RULES.items():
        chosen = obs.measures == measure
        if not chosen.any():
            continue
        with np.errstate(invalid="ignore"):
            outside = values <= value_rule.minimum if value_rule.above_minimum else values < value_rule.minimum
            if value_rule.maximum is not None:
                outside |= values > value_rule.maximum
            if value_rule.whole:
                outside |= ~whole
            if value_rule.up_to_n:
                outside |= np.nan_to_num(ns, nan=np.inf) < values
        for i in np.flatnonzero(chosen & outside):
            problems.add(obs.rows[i], obs.fields[i], _plain(obs.shown[i]),
                         value_rule.wording(None if np.isnan(ns[i]) else int(ns[i])))


def check_grid_sizes(obs: _Observed, registered: Mapping, pair_at: np.ndarray, distinct_pairs: list,
                     problems: _Problems) -> None:
    """A k-of-n value's n is the programme's grid (cells) or frame (pins) for that species."""
    kn = np.isin(obs.measures, registry.k_of_n_codes())
    distinct_n = np.array([registered.get(pair) for pair in distinct_pairs] or [None], dtype=object)
    programme_n = pd.to_numeric(pd.Series(distinct_n), errors="coerce").to_numpy(dtype=float)[pair_at]
    ns = obs.ns
    bad = kn & ~np.isnan(programme_n) & (np.isnan(ns) | (ns != programme_n))
    for i in np.flatnonzero(bad):
        entry = registry.get(obs.measures[i])
        shown = None if np.isnan(ns[i]) else int(ns[i])
        problems.add(obs.rows[i], obs.fields[i], f"n={shown}",
                     f"n = {int(programme_n[i])} {entry.trials}, the programme's {entry.trial_source} "
                     f"for {obs.species[i]}")


def check_species_windows(obs: _Observed, reference: Reference, problems: _Problems) -> None:
    """Phenology: a value outside its species' season window is a warning; month-day worked out once per
    distinct date."""
    if not reference.species_windows:
        return
    species = obs.species
    in_scope = np.isin(species, list(reference.species_windows))
    if not in_scope.any():
        return
    codes, distinct = pd.factorize(pd.Series(obs.dates, dtype=object))
    month_days = np.array([f"{d.month:02d}-{d.day:02d}" for d in map(_as_date, distinct)] or [""])
    md = month_days[codes]
    outside = np.zeros(len(species), dtype=bool)
    for code, (start, end) in reference.species_windows.items():
        mask = in_scope & (species == code)
        if not mask.any():
            continue
        inside = (start <= md) & (md <= end) if start <= end else (md >= start) | (md <= end)
        outside |= mask & ~inside
    for i in np.flatnonzero(outside):
        start, end = reference.species_windows[species[i]]
        problems.add(obs.rows[i], obs.fields[i], _as_date(obs.dates[i]).isoformat(),
                     f"a visit inside {species[i]}'s season window {start} to {end}", WARNING)


def check_targets(visits: pd.DataFrame, observations: pd.DataFrame, reference: Reference,
                  problems: _Problems) -> None:
    """Every target species and measure has a value on a done visit, unless blanks mean zero."""
    if not (reference.targets and not reference.blanks_mean_zero and len(visits)):
        return
    for station, date, species_code, measure, row in _missing_targets(visits, observations, reference):
        problems.add(row, f"{species_code}:{measure}", None,
                     f"a value for target {species_code} ({measure}) on a done visit of {station} on "
                     f"{date.isoformat()}; 0 if absent (the programme does not treat blanks as zero)")


def check_covariates(covariates: pd.DataFrame, visits: pd.DataFrame, reference: Reference,
                     problems: _Problems) -> None:
    """No covariate on a missed or inaccessible visit; names and units as the programme records them."""
    if not len(covariates):
        return
    n_visits = len(visits)
    v_dates = [d if type(d) is dt.date else _as_date(d) for d in visits[C.DATE]]
    status_of = dict(zip(zip(visits[C.STATION].tolist(), v_dates, strict=True), visits[C.VISIT_STATUS].tolist(),
                         strict=True)) if n_visits else {}
    for rec in covariates.itertuples(index=False):
        c = rec._asdict()
        key = (c[C.STATION], _as_date(c[C.DATE]))
        row = c.get(H.SOURCE_ROW)
        shown_field = f"cov:{c['name']}"
        if status_of.get(key) in (C.STATUS_MISSED, C.STATUS_INACCESSIBLE):
            problems.add(row, shown_field, c[H.VALUE], f"a blank cell: a {status_of[key]} visit carries no values")
        if reference.covariate_units is not None:
            if c["name"] not in reference.covariate_units:
                problems.add(row, shown_field, c["name"], "a covariate of the programme"
                             + _closest(str(c["name"]), sorted(reference.covariate_units)))
            elif (reference.covariate_units[c["name"]] or None) != (c.get(H.UNIT) or None):
                problems.add(row, shown_field, c.get(H.UNIT),
                             f"unit [{reference.covariate_units[c['name']]}] as the programme records {c['name']}")


class ProblemList(list):
    """The first :data:`monitor.errors.MAX_LISTED` problems in row order, with the count of all of them
    (``total``) and per kind (``counts``): a bounded listing however many problems a file has."""

    total: int = 0
    counts: dict[str, int]

    @classmethod
    def of(cls, counter: ProblemCounter) -> ProblemList:
        out = cls(counter.kept())
        out.total = counter.total
        out.counts = dict(counter.counts)
        return out


def raise_for_problems(problems: list[InputProblem], *, accept_warnings: bool = False) -> list[InputProblem]:
    """Raise InputError if there is any error, or any warning not accepted; return the accepted warnings."""
    errors = [p for p in problems if p.severity != WARNING]
    warnings = [p for p in problems if p.severity == WARNING]
    counts = getattr(problems, "counts", None)
    n_errors = len(errors)
    if counts is not None:
        n_errors = sum(n for kind, n in counts.items() if not kind.startswith("warning: "))
    if n_errors or (warnings and not accept_warnings):
        listed = errors + ([] if accept_warnings else warnings)
        if counts is None:
            raise InputError(listed)
        if accept_warnings:
            counts = {k: n for k, n in counts.items() if not k.startswith("warning: ")}
        raise InputError(sorted(listed, key=lambda p: -1 if p.row is None else p.row),
                         total=sum(counts.values()), counts=counts)
    return warnings


def fill_blank_targets(visits: pd.DataFrame, observations: pd.DataFrame, reference: Reference) -> pd.DataFrame:
    """For a programme whose blanks mean zero: add a stored 0 for every target missing on a done visit.

    Only done visits are filled; partial, missed and inaccessible visits never are (missing is not zero).
    The added rows have ``source_field`` "(blank = 0)".
    """
    if not reference.blanks_mean_zero or not reference.targets:
        return observations
    n_of = {(str(s), str(m)): n for s, m, n in zip(reference.species[C.SPECIES], reference.species[C.MEASURE],
                                                   reference.species.get(H.N, [None] * len(reference.species)), strict=True)}
    have = set(zip(observations[C.STATION], observations[C.DATE].map(_as_date), observations[C.SPECIES],
                   observations[C.MEASURE], strict=True)) if len(observations) else set()
    added = []
    done = visits[visits[C.VISIT_STATUS] == C.STATUS_DONE]
    for rec in done.itertuples(index=False):
        v = rec._asdict()
        date = _as_date(v[C.DATE])
        for species_code, measure in reference.targets:
            if not registry.zero_when_absent(measure):
                continue   # no value exists where the species is absent (a shoot height)
            if (v[C.STATION], date, species_code, measure) not in have:
                n = n_of.get((species_code, measure))
                added.append({C.STATION: v[C.STATION], C.DATE: date, C.SPECIES: species_code, C.MEASURE: measure,
                              H.VALUE: 0.0, H.N: None if n is None or pd.isna(n) else int(n),
                              H.SOURCE_ROW: v.get(H.SOURCE_ROW), H.SOURCE_FIELD: "(blank = 0)"})
    if not added:
        return observations
    out = pd.concat([observations, pd.DataFrame(added, columns=observations.columns)], ignore_index=True)
    out[H.N] = out[H.N].astype("Int64")
    out.attrs = dict(observations.attrs)
    return out
