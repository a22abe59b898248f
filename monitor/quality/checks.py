"""Quality checks on stored records (pure: plain DataFrames in, a DataFrame of flags out).

Four checks, each returning rows of a flags table with columns ``kind, station, species, year,
detail, severity``:

``jump``
    A value far from the station's own history for that species and measure.  On the log scale
    ``u = log(1 + y)``, for each year the value is compared with the median of the *other* years
    (leave-one-out, so a jump does not widen its own yardstick), scaled by their median absolute
    deviation made consistent for the normal, ``s = max(1.4826 * MAD, s_min)``; the modified
    z-score ``z = (u - median) / s`` is flagged when ``|z| > 3.5`` (Iglewicz & Hoaglin 1993).
    ``s_min`` (default log(2)/2) keeps all-zero or constant series from flagging a single plant.
``overdue``
    A station in service not visited (done or partial) in a year its panel's revisit rule
    ``[a-b]`` (McDonald 2003) made it due, once that year is over.
``observer``
    An observer whose values differ systematically from others' at the same stations.  Each value
    by observer O is paired with the median (log scale) of values by observers other than O at the
    same station, species and measure in the same year (repeat or calibration visits); where none
    exists and ``across_years`` is set, in the station's other years.  The differences are averaged per
    station (stations are the independent units) and tested with the Wilcoxon signed-rank test
    (Wilcoxon 1945); flagged when p < alpha.
``covariate_missing``
    A done or partial visit without a value for a covariate the programme requires.

References
----------
Iglewicz, B. and Hoaglin, D. C. (1993). How to Detect and Handle Outliers. ASQC Quality Press.
Leys, C., Ley, C., Klein, O., Bernard, P. and Licata, L. (2013). Detecting outliers: do not use
standard deviation around the mean, use absolute deviation around the median. Journal of
Experimental Social Psychology 49, 764-766.
McDonald, T. L. (2003). Review of environmental monitoring methods: survey designs. Environmental
Monitoring and Assessment 85, 277-292.
Wilcoxon, F. (1945). Individual comparisons by ranking methods. Biometrics Bulletin 1, 80-83.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor import measures

FLAG_COLUMNS = ["kind", C.STATION, C.SPECIES, C.YEAR, "detail", "severity"]
MAD_TO_SD = 1.4826  # 1 / Phi^-1(3/4): makes the MAD a consistent estimator of sigma for normal data
JUMP_THRESHOLD = 3.5  # Iglewicz & Hoaglin (1993), modified z-score


def _flags(rows: list[dict]) -> pd.DataFrame:
    frame = pd.DataFrame(rows, columns=FLAG_COLUMNS)
    frame[C.YEAR] = frame[C.YEAR].astype("Int64")
    return frame


def analysis_values(table: pd.DataFrame) -> pd.Series:
    """The value checked for each row: ``value`` if present, else the measure's k column.

    (the first of the measure's columns in the registry, monitor/measures.py: count -> count;
    frequency -> occupied; ...)
    """
    if "value" in table.columns:
        return table["value"].astype(float)
    out = pd.Series(np.nan, index=table.index, dtype=float)
    for measure, entry in measures.REGISTRY.items():
        if entry.value_column in table.columns:
            mask = table[C.MEASURE] == measure
            out[mask] = table.loc[mask, entry.value_column].astype(float)
    return out


def station_jumps(table: pd.DataFrame, *, threshold: float = JUMP_THRESHOLD, min_history: int = 4,
                  min_scale: float = math.log(2) / 2) -> pd.DataFrame:
    """Flag values far from the station's own history (robust leave-one-out modified z on log(1+y)).

    Parameters
    ----------
    table : DataFrame
        Long analysis table: station, year, species, measure and ``value`` (or the measure columns of
        monitor.measures).  Several values in one year are averaged first.
    threshold : float
        Flag when ``|z|`` exceeds it; 3.5 after Iglewicz & Hoaglin (1993).
    min_history : int
        Other years needed before a value can be judged.
    min_scale : float
        Floor on the robust scale (log units).

    Returns
    -------
    DataFrame of flags (kind "jump").

    Notes
    -----
    ``u_t = log(1 + y_t)``; ``m_t = median(u_s, s != t)``; ``s_t = max(1.4826 MAD(u_s, s != t), s_min)``;
    ``z_t = (u_t - m_t) / s_t``.
    """
    data = table.assign(_value=analysis_values(table))
    data = data[~data[C.MEASURE].isin(measures.of_kind(measures.KIND_BINARY))].dropna(subset=["_value"])
    yearly = data.groupby([C.STATION, C.SPECIES, C.MEASURE, C.YEAR], sort=True)["_value"].mean().reset_index()
    # the series of one station, species and measure are consecutive rows (sorted); series of the same
    # length are stacked into a matrix and judged together, one leave-one-out column at a time, so the
    # work is a few vectorised medians per series length rather than two per value
    series = yearly.groupby([C.STATION, C.SPECIES, C.MEASURE], sort=False).ngroup().to_numpy()
    starts = np.flatnonzero(np.r_[True, series[1:] != series[:-1]])
    lengths = np.diff(np.r_[starts, len(series)])
    years_all = yearly[C.YEAR].to_numpy()
    y_all = yearly["_value"].to_numpy(dtype=float)
    found = []  # (first row of the series, t, z, median of the others)
    for length in np.unique(lengths):
        if length < min_history + 1:
            continue
        first = starts[lengths == length]
        at = first[:, None] + np.arange(length)[None, :]
        u = np.log1p(np.clip(y_all[at], 0, None))
        for t in range(length):
            others = np.delete(u, t, axis=1)
            med = np.median(others, axis=1)
            scale = np.maximum(MAD_TO_SD * np.median(np.abs(others - med[:, None]), axis=1), min_scale)
            z = (u[:, t] - med) / scale
            for g in np.flatnonzero(np.abs(z) > threshold):
                found.append((int(first[g]), t, float(z[g]), float(med[g]), int(length)))
    rows = []
    for start, t, z, med, length in sorted(found):
        station, species, measure = (yearly[c].iat[start] for c in (C.STATION, C.SPECIES, C.MEASURE))
        value = y_all[start + t]
        typical = math.expm1(med)
        rows.append({"kind": "jump", C.STATION: station, C.SPECIES: species, C.YEAR: int(years_all[start + t]),
                     "detail": f"{measure} {value:g} against a typical {typical:.3g} in the station's other "
                               f"{length - 1} years (robust z = {z:+.1f}, |z| > {threshold:g})",
                     "severity": "warning"})
    return _flags(rows)


def overdue_stations(visits: pd.DataFrame, stations: pd.DataFrame, panels: pd.DataFrame,
                     current_year: int) -> pd.DataFrame:
    """Flag stations in service that missed a year their panel made them due, once that year is over.

    Parameters
    ----------
    visits : DataFrame
        station, year (or date), status.  Done and partial visits count as visited.
    stations : DataFrame
        station, panel; optional ``established`` and ``retired`` dates.
    panels : DataFrame
        panel, visit_years, rest_years, start_year (blank start = every year from the station's start).
    current_year : int
        The season in progress; its due visits are not yet overdue.
    """
    from monitor.io.programme import panel_due

    if C.YEAR not in visits.columns and C.DATE in visits.columns:
        visits = visits.assign(**{C.YEAR: [d.year for d in visits[C.DATE]]})
    done = visits[visits[C.VISIT_STATUS].isin(C.STATUSES_WITH_VALUES)] if len(visits) else visits
    last_visit = done.groupby(C.STATION)[C.YEAR].max().to_dict() if len(done) else {}
    first_year_visits = visits.groupby(C.STATION)[C.YEAR].min().to_dict() if len(visits) else {}
    rules = {r[C.PANEL]: r for r in panels.to_dict("records")}
    rows = []
    for s in stations.to_dict("records"):
        code, panel = s[C.STATION], s.get(C.PANEL)
        retired = s.get("retired")
        if retired is not None and not (isinstance(retired, float) and math.isnan(retired)) and not pd.isna(retired):
            continue
        if panel is None or panel not in rules:
            continue
        rule = rules[panel]
        a, b = int(rule["visit_years"]), int(rule["rest_years"])
        start = rule.get("start_year")
        established = s.get("established")
        est_year = established.year if hasattr(established, "year") else None
        origin = None if start is None or pd.isna(start) else int(start)
        since = last_visit.get(code)
        if since is None:
            since = (est_year or first_year_visits.get(code) or origin or current_year) - 1
        anchor = origin if origin is not None else (est_year or since + 1)
        missed = [y for y in range(since + 1, current_year) if panel_due(a, b, anchor, y)]
        if missed:
            last_text = f"last visited {last_visit[code]}" if code in last_visit else "never visited"
            rows.append({"kind": "overdue", C.STATION: code, C.SPECIES: None, C.YEAR: missed[0],
                         "detail": f"{last_text}; panel {panel} [{a}-{b}] made it due in "
                                   f"{', '.join(map(str, missed))}",
                         "severity": "warning"})
    return _flags(rows)


def _observers_of(value: object) -> tuple[str, ...]:
    if isinstance(value, (tuple, list)):
        return tuple(str(v) for v in value)
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ()
    return tuple(o.strip() for o in str(value).split(";") if o.strip())


def observer_pairs(table: pd.DataFrame, observer: str, *, across_years: bool = True) -> np.ndarray:
    """One paired log difference per station (and species, measure) for ``observer``.

    For each value by the observer, ``d = log(1+y_O) - median log(1+y)`` of values by observers other
    than O at the same station, species and measure in the same year; where there is none and
    ``across_years`` is set, in the station's other years.  The d of one station are averaged, so the
    units tested are stations (independent), not visits that share a reference value.
    """
    return _observer_pairs(*_observer_data(table), observer, across_years=across_years)


def _observer_data(table: pd.DataFrame) -> tuple[pd.DataFrame, list[tuple[str, ...]]]:
    """The rows the observer check uses, with ``_u = log(1 + y)`` and ``_team``, the position of the row's
    team in the list returned beside (each distinct team is read once, not once a row)."""
    data = table.assign(_value=analysis_values(table))
    data = data[~data[C.MEASURE].isin(measures.of_kind(measures.KIND_BINARY))].dropna(subset=["_value"])
    codes, uniques = pd.factorize(data[C.OBSERVER], use_na_sentinel=False)
    data = data.assign(_u=np.log1p(np.clip(data["_value"].to_numpy(dtype=float), 0, None)), _team=codes,
                       _key=data.groupby([C.STATION, C.SPECIES, C.MEASURE], sort=True).ngroup().to_numpy())
    data = data[data["_key"] >= 0]  # a row without station, species or measure has no series (as before)
    # station-series and season as one number (exact in float64; a missing year stays missing)
    data = data.assign(_key_year=data["_key"].to_numpy(float) * 10_000 + data[C.YEAR].to_numpy(float, na_value=np.nan))
    return data[["_key", "_key_year", "_u", "_team"]], [_observers_of(team) for team in uniques]


def _observer_pairs(data: pd.DataFrame, teams: list[tuple[str, ...]], observer: str, *,
                    across_years: bool = True) -> np.ndarray:
    if data.empty:
        return np.array([], dtype=float)
    with_observer = [k for k, team in enumerate(teams) if observer in team]
    is_mine = np.isin(data["_team"].to_numpy(), with_observer)
    mine, others = data[is_mine], data[~is_mine]
    if mine.empty or others.empty:
        return np.array([], dtype=float)
    # references only where the observer recorded: the work per observer follows their own stations, so the
    # whole check grows with the values, not with values times observers
    others = others[np.isin(others["_key"].to_numpy(), mine["_key"].unique())]
    ref = mine["_key_year"].map(others.groupby("_key_year")["_u"].median())
    if across_years:
        ref = ref.fillna(mine["_key"].map(others.groupby("_key")["_u"].median()))
    d = (mine["_u"] - ref).to_numpy(dtype=float)
    kept = ~np.isnan(d)
    # one mean per station, species and measure (integer keys numbered in their sorted order)
    return pd.Series(d[kept]).groupby(mine["_key"].to_numpy()[kept]).mean().to_numpy(dtype=float)


def observer_differences(table: pd.DataFrame, *, min_pairs: int = 6, alpha: float = 0.01,
                         across_years: bool = True) -> pd.DataFrame:
    """Flag observers whose values differ systematically from others' at the same stations.

    Each observer's per-station paired log differences (:func:`observer_pairs`) are tested against zero
    with the two-sided Wilcoxon signed-rank test (scipy.stats.wilcoxon); flagged when there are at least
    ``min_pairs`` pairs and p < ``alpha``.  The detail gives the median ratio exp(median d) - 1.
    """
    from scipy.stats import wilcoxon

    data, teams = _observer_data(table)
    observers = sorted({o for team in teams for o in team})
    rows = []
    for observer in observers:
        d = _observer_pairs(data, teams, observer, across_years=across_years)
        d = d[d != 0]
        if len(d) < min_pairs:
            continue
        p = float(wilcoxon(d, alternative="two-sided").pvalue)
        if p < alpha:
            ratio = math.expm1(float(np.median(d)))
            rows.append({"kind": "observer", C.STATION: None, C.SPECIES: None, C.YEAR: None,
                         "detail": f"observer {observer}: values {abs(ratio) * 100:.0f}% "
                                   f"{'higher' if ratio > 0 else 'lower'} than other observers at the same "
                                   f"stations (median of {len(d)} pairs; Wilcoxon signed-rank p = {p:.2g})",
                         "severity": "warning"})
    return _flags(rows)


def missing_covariates(visits: pd.DataFrame, covariates: pd.DataFrame, required: Iterable[str]) -> pd.DataFrame:
    """Flag done or partial visits lacking a required covariate."""
    required = list(required)
    have = set(zip(covariates[C.STATION], covariates[C.DATE], covariates["name"], strict=True)) if len(covariates) else set()
    rows = []
    for v in visits.to_dict("records"):
        if v[C.VISIT_STATUS] not in C.STATUSES_WITH_VALUES:
            continue
        for name in required:
            if (v[C.STATION], v[C.DATE], name) not in have:
                rows.append({"kind": "covariate_missing", C.STATION: v[C.STATION], C.SPECIES: None,
                             C.YEAR: v[C.DATE].year, "detail": f"no {name} on the visit of {v[C.DATE].isoformat()}",
                             "severity": "info"})
    return _flags(rows)


def quality_flags(table: pd.DataFrame, *, visits: pd.DataFrame | None = None,
                  stations: pd.DataFrame | None = None, panels: pd.DataFrame | None = None,
                  covariates: pd.DataFrame | None = None, required_covariates: Iterable[str] = (),
                  current_year: int | None = None) -> pd.DataFrame:
    """All quality checks whose inputs are given, as one flags table sorted by kind, station and year."""
    parts = [station_jumps(table)]
    if C.OBSERVER in table.columns:
        parts.append(observer_differences(table))
    if visits is not None and stations is not None and panels is not None and current_year is not None:
        parts.append(overdue_stations(visits, stations, panels, current_year))
    if visits is not None and covariates is not None:
        parts.append(missing_covariates(visits, covariates, required_covariates))
    parts = [p for p in parts if len(p)]
    if not parts:
        return _flags([])
    out = pd.concat(parts, ignore_index=True)
    return out.sort_values(["kind", C.STATION, C.YEAR], na_position="first", kind="stable").reset_index(drop=True)
