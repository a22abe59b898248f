r"""Which stations are due this season, when each can be visited, and how long each takes.

A station is *due* in year :math:`t` when its panel's revisit rule says so
(:class:`monitor.design.PanelDesign`).  It is *overdue* when an earlier round's visit to it
was missed or inaccessible (or a round was held in a year it was due and it has no record
at all) and no done or partial visit has followed; it is then carried into this season,
most overdue first, whatever its panel says.

The visit window of a station is the programme's season window narrowed by the windows of
the species recorded there (flowering, say), since one visit records them all:
:math:`[\max(a_0, a_s), \min(b_0, b_s)]`.  A window may wrap the new year (1 December to 28
February): season :math:`t` then runs from December of :math:`t` into :math:`t + 1`, days are
counted on through 31 December, and a visit belongs to the season in which it started.

Effort per station [min] = set-up + :math:`\sum` minutes per quadrat for each
(species, measure) recorded there.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.design.panels import PanelDesign
from monitor.errors import DesignError

WINDOW_START = "window_start"      # first day a visit may take place [date]
WINDOW_END = "window_end"          # last day a visit may take place [date]
EFFORT = "effort_min"              # minutes on site at the station, set-up included [min]
OVERDUE_YEARS = "overdue_years"    # years since the missed round (0 = not overdue) [years]
MISSED_YEAR = "missed_year"        # earliest missed round not since made good [year] or NA
DUE = "due"                        # due this year by the panel rule [bool]
TARGETS = "targets"                # ';'-joined species:measure recorded at the station
FIRST_SEASON = "first_season"      # first season a station could be visited (set out then) [year] or NA


@dataclass(frozen=True)
class SeasonWindow:
    """A yearly window given as month-day pairs, e.g. ``SeasonWindow((5, 1), (7, 31))``.

    A window whose end comes before its start wraps the new year (a southern summer,
    ``SeasonWindow((12, 1), (2, 28))``): the season of year :math:`t` then runs from the start in
    :math:`t` to the end in :math:`t + 1`, and a date belongs to the season in which it started.
    """

    start: tuple[int, int]
    end: tuple[int, int]

    def __post_init__(self) -> None:
        for md in (self.start, self.end):
            try:
                dt.date(2024, int(md[0]), int(md[1]))  # leap year accepts 29 February
            except (ValueError, TypeError, IndexError) as exc:
                raise DesignError(f"season window date {md!r} is not a month-day pair") from exc

    @classmethod
    def parse(cls, start: str, end: str) -> SeasonWindow:
        """From ``"MM-DD"`` strings."""
        def md(s: str) -> tuple[int, int]:
            try:
                m, d = (int(v) for v in s.split("-"))
            except ValueError as exc:
                raise DesignError(f"season window date {s!r} is not MM-DD") from exc
            return m, d
        return cls(md(start), md(end))

    @property
    def wraps(self) -> bool:
        """True when the window runs over the new year (its end month-day is before its start)."""
        return tuple(self.end) < tuple(self.start)

    def dates(self, year: int) -> tuple[dt.date, dt.date]:
        """First and last day of season ``year`` (the last in ``year + 1`` when the window wraps)."""
        def day(y: int, md: tuple[int, int]) -> dt.date:
            m, d = md
            if (m, d) == (2, 29) and not _leap(y):
                d = 28
            return dt.date(y, m, d)
        return day(year, self.start), day(year + 1 if self.wraps else year, self.end)

    def season_of(self, date: dt.date) -> int:
        """The season a date belongs to: the year in which that season's window opened.

        For a wrapping window a date up to the window's end in January or February belongs to the
        season that opened the year before; otherwise the season is the calendar year.
        """
        if self.wraps and (date.month, date.day) <= tuple(self.end):
            return date.year - 1
        return date.year

    def first_season_after(self, day: dt.date) -> int:
        """The first season whose window has not closed by ``day`` (a station set out that day)."""
        season = self.season_of(day)
        return season + (1 if day > self.dates(season)[1] else 0)

    def overlapping(self, start: dt.date, end: dt.date) -> tuple[dt.date, dt.date]:
        """This window's occurrence that overlaps ``[start, end]`` most (species windows inside a season
        that wraps the new year may fall in either calendar year)."""
        best = None
        for y in range(start.year - 1, end.year + 1):
            a, b = self.dates(y)
            overlap = (min(b, end) - max(a, start)).days
            if best is None or overlap > best[0]:
                best = (overlap, a, b)
        return best[1], best[2]

    def to_dict(self) -> dict[str, Any]:
        return {"start": f"{self.start[0]:02d}-{self.start[1]:02d}", "end": f"{self.end[0]:02d}-{self.end[1]:02d}",
                "wraps": self.wraps}


def _leap(y: int) -> bool:
    return y % 4 == 0 and (y % 100 != 0 or y % 400 == 0)


#: default minutes per quadrat for one species and measure, for a 1 m^2 quadrat (common practice
#: orders of magnitude; set the programme's own figures)
DEFAULT_MINUTES = {code: m.minutes_per_quadrat for code, m in measures.REGISTRY.items()}


@dataclass(frozen=True)
class EffortSettings:
    """Minutes per quadrat by measure, plus set-up (relocating, marking, photo) per station."""

    setup_min: float = 10.0
    minutes_per_measure: Mapping[str, float] = field(default_factory=lambda: dict(DEFAULT_MINUTES))

    def effort(self, targets: Sequence[tuple[str, str]]) -> float:
        total = float(self.setup_min)
        for _, measure in targets:
            if measure not in self.minutes_per_measure:
                raise DesignError(f"no minutes per quadrat set for measure {measure!r}")
            total += float(self.minutes_per_measure[measure])
        return total

    def to_dict(self) -> dict[str, Any]:
        return {"setup_min": self.setup_min, "minutes_per_measure": dict(self.minutes_per_measure)}


def _targets_of(row: pd.Series, targets: Sequence[tuple[str, str]]) -> list[tuple[str, str]]:
    own = row.get(TARGETS) if TARGETS in row.index else None
    if own is None or (isinstance(own, float) and np.isnan(own)) or own == "":
        return list(targets)
    out = []
    for item in str(own).split(";"):
        sp, _, meas = item.strip().partition(":")
        if not meas:
            raise DesignError(f"station {row[C.STATION]}: target {item!r} is not species:measure")
        out.append((sp, meas))
    return out


def station_window(year: int, window: SeasonWindow, species: Sequence[str],
                   species_windows: Mapping[str, SeasonWindow] | None) -> tuple[dt.date, dt.date]:
    """Programme window narrowed by the windows of ``species`` (intersection)."""
    a, b = window.dates(year)
    season = (a, b)
    for sp in species:
        if species_windows and sp in species_windows:
            sa, sb = species_windows[sp].overlapping(*season)
            a, b = max(a, sa), min(b, sb)
    return a, b


def overdue_table(stations: pd.DataFrame, history: pd.DataFrame | None, year: int,
                  design: PanelDesign | None = None) -> pd.DataFrame:
    """Per station: earliest missed round not made good since, and years overdue.

    ``history`` has columns station, year, status (one row per visit; rounds held are the
    years present).  A station counts as missed in a round year when it has a missed or
    inaccessible visit then, or when ``design`` says it was due and it has no visit at all, in a
    round held in or after its first season (``first_season`` column, else the year it was
    ``established``; a round before a station was set out cannot have missed it).
    """
    codes = stations[C.STATION].astype(str)
    out = pd.DataFrame({C.STATION: codes, MISSED_YEAR: pd.array([pd.NA] * len(codes), dtype="Int64")})
    if history is None or history.empty:
        out[OVERDUE_YEARS] = 0
        return out
    h = history[[C.STATION, C.YEAR, C.VISIT_STATUS]].copy()
    h[C.STATION] = h[C.STATION].astype(str)
    h = h[h[C.YEAR] < year]
    rounds = sorted(set(int(y) for y in h[C.YEAR]))
    done = h[h[C.VISIT_STATUS].isin(C.STATUSES_WITH_VALUES)].groupby(C.STATION)[C.YEAR].max()
    missed = h[h[C.VISIT_STATUS].isin((C.STATUS_MISSED, C.STATUS_INACCESSIBLE))]
    missed_years: dict[str, list[int]] = {}
    for st, y in zip(missed[C.STATION], missed[C.YEAR], strict=True):
        missed_years.setdefault(st, []).append(int(y))
    if design is not None and C.PANEL in stations.columns:
        seen = set(zip(h[C.STATION], h[C.YEAR].astype(int), strict=True))
        first_seasons = _first_seasons(stations)
        for st, panel, first_season in zip(codes, stations[C.PANEL], first_seasons, strict=True):
            if pd.isna(panel):
                continue
            for y in rounds:
                # a round held before the station was set out cannot have missed it
                if y < first_season:
                    continue
                if design.is_due(str(panel), y) and (st, y) not in seen:
                    missed_years.setdefault(st, []).append(y)
    first = []
    for st in codes:
        last_done = done.get(st, -10**9)
        pending = [y for y in missed_years.get(st, []) if y > last_done]
        first.append(min(pending) if pending else pd.NA)
    out[MISSED_YEAR] = pd.array(first, dtype="Int64")
    out[OVERDUE_YEARS] = (year - out[MISSED_YEAR]).fillna(0).astype(int)
    return out


def _first_seasons(stations: pd.DataFrame) -> list[int]:
    """First season each station could be visited: ``first_season``, else the year of ``established``."""
    n = len(stations)
    if FIRST_SEASON in stations.columns:
        raw = list(stations[FIRST_SEASON])
        return [-10**9 if pd.isna(v) else int(v) for v in raw]
    if "established" in stations.columns:
        out = []
        for v in stations["established"]:
            if v is None or (not isinstance(v, dt.date) and pd.isna(v)):
                out.append(-10**9)
            else:
                out.append(pd.Timestamp(v).year)
        return out
    return [-10**9] * n


def due_stations(
    stations: pd.DataFrame,
    year: int,
    *,
    design: PanelDesign | None,
    window: SeasonWindow,
    targets: Sequence[tuple[str, str]],
    effort: EffortSettings | None = None,
    species_windows: Mapping[str, SeasonWindow] | None = None,
    history: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Stations to visit in ``year``: due by panel rule plus overdue, most overdue first.

    Parameters
    ----------
    stations : DataFrame
        station, site, x, y [m], panel; optional quadrat_width_m, quadrat_length_m,
        ``targets`` (';'-joined species:measure overriding the programme's), ``retired``.
    year : int
    design : PanelDesign or None
        Revisit design; None means every station is due every year.
    window : SeasonWindow
        Programme season window.
    targets : sequence of (species, measure)
        What every visit records (programme default).
    effort : EffortSettings
    species_windows : mapping species -> SeasonWindow
    history : DataFrame, optional
        Earlier visits: station, year, status.

    Returns
    -------
    DataFrame
        The stations' columns plus due, missed_year, overdue_years, window_start,
        window_end, effort_min, targets; sorted by overdue_years (descending) then station.
        A station whose narrowed window is empty raises DesignError (the species windows
        do not overlap the programme window).
    """
    if not isinstance(window, SeasonWindow):
        raise DesignError("a season window is required")
    effort = effort or EffortSettings()
    needed = {C.STATION, C.SITE, C.X, C.Y}
    missing = needed - set(stations.columns)
    if missing:
        raise DesignError(f"stations table lacks column {sorted(missing)[0]!r}")
    st = stations.copy()
    st[C.STATION] = st[C.STATION].astype(str)
    if "retired" in st.columns:
        st = st[~st["retired"].fillna(False).astype(bool)]
    if design is None:
        st[DUE] = True
    else:
        if C.PANEL not in st.columns:
            raise DesignError("stations need a panel column to apply a revisit design")
        st[DUE] = [False if pd.isna(p) else design.is_due(str(p), year) for p in st[C.PANEL]]
    od = overdue_table(st, history, year, design)
    st = st.merge(od, on=C.STATION, how="left")
    st = st[st[DUE] | (st[OVERDUE_YEARS] > 0)].copy()
    starts, ends, efforts, tlist = [], [], [], []
    for _, row in st.iterrows():
        tg = _targets_of(row, targets)
        a, b = station_window(year, window, [s for s, _ in tg], species_windows)
        if b < a:
            raise DesignError(f"station {row[C.STATION]}: the species windows do not overlap the season window "
                              f"in {year}")
        starts.append(a)
        ends.append(b)
        efforts.append(effort.effort(tg))
        tlist.append(";".join(f"{s}:{m}" for s, m in tg))
    st[WINDOW_START] = starts
    st[WINDOW_END] = ends
    st[EFFORT] = efforts
    st[TARGETS] = tlist
    st = st.sort_values([OVERDUE_YEARS, C.STATION], ascending=[False, True], kind="stable")
    return st.reset_index(drop=True)
