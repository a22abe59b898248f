"""Trends across years for each target species and measure, from the stored programme or a user's table.

Which stations enter a species' model: those where the species has been recorded present at least
once in the years analysed.  Stations outside a species' range only add structural zeros that say
nothing about its trend (and a site where it never grew would get an intercept at minus infinity).
Missed and inaccessible visits are absent from the data, never zeros.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor.db import Store, one_snapshot, queries
from monitor.errors import Diagnostic, EstimationError, InputError, InputProblem
from monitor.settings import DEFAULT_CHANGE_MARGIN, change_margin
from monitor.trend import TrendModel, TrendResult


@dataclass(frozen=True)
class NotCalled:
    """A target species whose trend cannot be called from the data (too short a series, too few stations)."""

    species: str
    common_name: str
    measure: str
    reason: str
    years: tuple[int, ...] = ()

    def why(self) -> str:
        seasons = (f"data from {len(self.years)} season{'s' if len(self.years) != 1 else ''}"
                   f" ({', '.join(map(str, self.years))})" if self.years else "no data")
        return f"too short to call: {seasons}; {self.reason}"

    def line(self) -> str:
        return f"{self.species} ({self.measure}): {self.why()}"

    def to_dict(self) -> dict:
        return {"species": self.species, "common_name": self.common_name, "measure": self.measure,
                "call": "too short to call", "reason": self.reason, "years": list(self.years)}


class TrendRun(list):
    """The fitted trends (a list of :class:`SpeciesTrend`) and, in ``not_called``, the species that could not
    be fitted, each with its reason."""

    def __init__(self, *args):
        super().__init__(*args)
        self.not_called: list[NotCalled] = []


@dataclass(frozen=True)
class SpeciesTrend:
    """A fitted trend with what it was fitted to."""

    species: str
    common_name: str
    measure: str
    result: TrendResult
    notes: tuple[Diagnostic, ...] = field(default_factory=tuple)
    data: pd.DataFrame | None = field(default=None, repr=False, compare=False)

    def to_dict(self) -> dict:
        out = {"species": self.species, "common_name": self.common_name, **self.result.to_dict()}
        out["diagnostics"] = out["diagnostics"] + [
            {"code": d.code, "message": d.message, "severity": d.severity} for d in self.notes]
        return out


def presence_value(frame: pd.DataFrame) -> pd.Series:
    """True where the species was recorded present (any value above zero)."""
    return frame["value"] > 0


def analysis_frame(long: pd.DataFrame, measure: str) -> tuple[pd.DataFrame, list[Diagnostic]]:
    """The model's input for one species and measure, and the notes about what was left out and why."""
    notes: list[Diagnostic] = []
    # a relocated quadrat continues its lineage: presence, counts and the station effect go by lineage
    key = C.LINEAGE if C.LINEAGE in long.columns else C.STATION
    present_at = set(long.loc[presence_value(long), key])
    dropped = long[key].nunique() - len(present_at)
    frame = long[long[key].isin(present_at)]
    moved = frame[C.STATION].nunique() - frame[key].nunique()
    if moved:
        notes.append(Diagnostic("relocated_stations",
                                f"{moved} relocated station(s) continue the series of the station they replaced "
                                "(one station effect per chain).", "info"))
    if dropped:
        notes.append(Diagnostic("stations_never_present",
                                f"{dropped} stations where the species was never recorded are left out of the model.",
                                "info"))
    protocols = frame.dropna(subset=[C.PROTOCOL]).groupby(C.PROTOCOL)[C.YEAR].min().sort_values()
    if len(protocols) > 1:
        steps = ", ".join(f"{p} from {y}" for p, y in protocols.items())
        notes.append(Diagnostic("protocol_change", f"The series spans a change of protocol ({steps}); "
                                "a step at the change may be read as trend.", "warning"))
    targeted = frame.loc[frame["placement"] == "targeted", C.STATION].nunique() if "placement" in frame else 0
    if targeted:
        notes.append(Diagnostic("targeted_stations", f"{targeted} stations were placed by hand (targeted), so the "
                                "trend need not describe the reserve as a whole.", "warning"))
    return queries.to_measure_columns(frame, measure), notes


@dataclass(frozen=True)
class ModelChoices:
    """How the trend models are built (the CLI's options): see ``monitor.trend.TrendModel``.

    ``year_random`` None follows the engine's rule (a year effect from 5 years with data);
    ``observation_effect`` None lets the overdispersion test decide for k-of-n data.
    """

    family: str | None = None
    year_random: str | None = None
    site_by_year: bool = False
    observer_effect: bool = False
    observation_effect: bool | None = None


def fit_one(data: pd.DataFrame, measure: str, *, margin: float, choices: ModelChoices = ModelChoices(),
            profile: bool = True, indices: bool = True) -> TrendResult:
    """The full maximum likelihood fit of one species and measure (never the fast path: people read it).

    With ``choices.observer_effect`` visits without an observer form a level of their own
    (the result says how many); they are never dropped.
    """
    model = TrendModel(data, measure=measure, family=choices.family, margin=margin,
                       observer_effect=choices.observer_effect, year_random=choices.year_random,
                       site_by_year=choices.site_by_year,
                       observation_effect=choices.observation_effect if choices.family in (None, "binomial") else None)
    return model.fit(profile=profile, indices=indices, fast=False)


@one_snapshot
def fit_programme(db: str | None, *, programme_code: str | None = None, species: list[str] | None = None,
                  sites: list[str] | None = None, first_year: int | None = None, last_year: int | None = None,
                  family: str | None = None, observer_effect: bool = False, keep_data: bool = False,
                  choices: ModelChoices | None = None, skipped: list[dict] | None = None,
                  progress: Callable[[int, int, str], None] | None = None) -> list[SpeciesTrend]:
    """Fit every target species and measure of the programme (or those named).

    A species whose trend cannot be fitted (one season of data, too few stations, no values, every value
    the same) does not stop the others: it is listed in the returned list's ``not_called`` as too short to
    call, with the reason, and, when ``skipped`` is a list, appended to it as {species, measure, reason}.
    """
    if choices is None:
        choices = ModelChoices(family=family, observer_effect=observer_effect)
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        targets = queries.species(store, programme.id).dropna(subset=[C.MEASURE])
        if species:
            unknown = sorted(set(species) - set(targets[C.SPECIES]))
            if unknown:
                raise InputError(InputProblem("--species", None, None, ", ".join(unknown),
                                              f"a target species code ({', '.join(targets[C.SPECIES])})"))
            targets = targets[targets[C.SPECIES].isin(species)]
        from monitor.services.relocation import lineage

        chains = lineage(store, programme.id)
        out = TrendRun()
        for i, target in enumerate(targets.to_dict(orient="records")):
            if progress:
                progress(i, len(targets), target[C.SPECIES])
            long = queries.observations_long(store, programme.id, species=target[C.SPECIES],
                                             measure=target[C.MEASURE], sites=sites, first_year=first_year,
                                             last_year=last_year)
            if long.empty:
                short = NotCalled(target[C.SPECIES], target["common_name"] or "", target[C.MEASURE],
                                  "no stored values in the years asked", ())
                out.not_called.append(short)
                if skipped is not None:
                    skipped.append({C.SPECIES: target[C.SPECIES], C.MEASURE: target[C.MEASURE], "reason": short.why()})
                continue
            long[C.LINEAGE] = long[C.STATION].map(chains)
            data, notes = analysis_frame(long, target[C.MEASURE])
            try:
                result = fit_one(data, target[C.MEASURE], margin=change_margin(programme.change_margin),
                                 choices=choices)
            except EstimationError as exc:  # this species cannot be called; the others still are
                years = tuple(sorted(int(y) for y in set(data[C.YEAR]))) if C.YEAR in data else ()
                short = NotCalled(target[C.SPECIES], target["common_name"] or "", target[C.MEASURE], str(exc), years)
                out.not_called.append(short)
                if skipped is not None:
                    skipped.append({C.SPECIES: target[C.SPECIES], C.MEASURE: target[C.MEASURE], "reason": short.why()})
                continue
            out.append(SpeciesTrend(target[C.SPECIES], target["common_name"] or "", target[C.MEASURE], result,
                                    tuple(notes), data if keep_data else None))
        if progress:
            progress(len(targets), len(targets), "")
        return out
    finally:
        store.dispose()


MEASURE_BY_COLUMNS = [
    ((C.OCCUPIED, C.CELLS), C.MEASURE_FREQUENCY),
    ((C.HITS, C.PINS), C.MEASURE_PIN_HITS),
    ((C.COUNT,), C.MEASURE_COUNT),
    ((C.COVER,), C.MEASURE_COVER),
    ((C.PRESENT,), C.MEASURE_PRESENCE),
]


def fit_table(path: Path, *, measure: str | None = None, family: str | None = None,
              margin: float = DEFAULT_CHANGE_MARGIN, observer_effect: bool = False,
              choices: ModelChoices | None = None) -> SpeciesTrend:
    """Fit a plain long table brought from elsewhere: station, year, optional site, and the measure's columns.

    Every cell is checked as written (a blank, "n/a" or a negative count is refused with its
    file, row and field); nothing is fitted unless the whole table is right.
    """
    path = Path(path)
    if choices is None:
        choices = ModelChoices(family=family, observer_effect=observer_effect)
    try:
        if path.suffix.lower() == ".xlsx":
            table = pd.read_excel(path, dtype=str, keep_default_na=False)
        else:
            table = pd.read_csv(path, dtype=str, keep_default_na=False)
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise InputError(InputProblem(path.name, None, None, None, f"a readable CSV or .xlsx table ({exc})")) from None
    table.columns = [str(c).strip().lower() for c in table.columns]
    table = table.fillna("").astype(str)
    if measure is None:
        found = [m for cols, m in MEASURE_BY_COLUMNS if all(c in table.columns for c in cols)]
        if not found:
            raise InputError(InputProblem(path.name, 1, None, ", ".join(table.columns),
                                          "columns station, year and one of: count; cover_pct; occupied+cells; "
                                          "hits+pins; present"))
        measure = found[0]
    missing = [InputProblem(path.name, 1, column, None, f"a column '{column}'")
               for column in (C.STATION, C.YEAR, *C.MEASURE_COLUMNS[measure]) if column not in table.columns]
    if missing:
        raise InputError(missing)
    table, problems = _checked_table(table, measure, path.name)
    if problems:
        raise InputError(problems)
    result = fit_one(table, measure, margin=margin, choices=choices)
    return SpeciesTrend(path.stem, "", measure, result, (), None)


# what each value column must hold: (lowest, highest or None, whole numbers only, words)
_VALUE_RULES = {
    C.COUNT: (0, None, True, "a whole count of 0 or more"),
    C.COVER: (0, 100, False, "a cover between 0 and 100 (%)"),
    C.OCCUPIED: (0, None, True, "a whole number of occupied cells, 0 or more"),
    C.CELLS: (1, None, True, "a whole number of cells, 1 or more"),
    C.HITS: (0, None, True, "a whole number of pin hits, 0 or more"),
    C.PINS: (1, None, True, "a whole number of pins, 1 or more"),
    C.PRESENT: (0, 1, True, "0 (absent) or 1 (present)"),
}


def _checked_table(table: pd.DataFrame, measure: str, name: str) -> tuple[pd.DataFrame, list[InputProblem]]:
    """Numbers from the text of a --table file, and every cell that is not what its column needs."""
    problems: list[InputProblem] = []

    def numbers(column: str, expected: str, low=None, high=None, whole=False) -> pd.Series:
        text = table[column].str.strip()
        values = pd.to_numeric(text, errors="coerce")
        ok = values.notna() & np.isfinite(values.to_numpy(float, na_value=np.nan))
        if whole:
            ok &= values == values.round()
        if low is not None:
            ok &= values >= low
        if high is not None:
            ok &= values <= high
        for i in np.flatnonzero(~ok.to_numpy()):
            raw = text.iloc[i]
            problems.append(InputProblem(name, int(i) + 2, column, raw if raw else None,
                                         expected + ("" if raw else " (the cell is blank)")))
        return values

    station = table[C.STATION].str.strip()
    for i in np.flatnonzero((station == "").to_numpy()):
        problems.append(InputProblem(name, int(i) + 2, C.STATION, None, "a station code (the cell is blank)"))
    out = table.copy()
    out[C.STATION] = station
    out[C.YEAR] = numbers(C.YEAR, "a whole year", whole=True)
    for column in C.MEASURE_COLUMNS[measure]:
        low, high, whole, expected = _VALUE_RULES[column]
        out[column] = numbers(column, expected, low, high, whole)
    if measure in (C.MEASURE_FREQUENCY, C.MEASURE_PIN_HITS) and not problems:
        k, n = C.MEASURE_COLUMNS[measure]
        for i in np.flatnonzero((out[k] > out[n]).to_numpy()):
            problems.append(InputProblem(name, int(i) + 2, k, table[k].iloc[i],
                                         f"at most the number in '{n}' ({table[n].iloc[i]})"))
    if problems:
        return out, problems
    out[C.YEAR] = out[C.YEAR].astype(int)
    if C.SITE in out:
        out[C.SITE] = out[C.SITE].str.strip()
    if C.QUADRAT_AREA in out:
        out[C.QUADRAT_AREA] = pd.to_numeric(out[C.QUADRAT_AREA], errors="coerce")
    return out, problems
