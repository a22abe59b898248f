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

import pandas as pd

from monitor import columns as C
from monitor.db import Store, one_snapshot, queries
from monitor.errors import Diagnostic, EstimationError, InputError, InputProblem
from monitor.settings import DEFAULT_CHANGE_MARGIN
from monitor.trend import TrendModel, TrendResult, default_family


@dataclass(frozen=True)
class NotCalled:
    """A target species whose trend cannot be called from the data (too short a series, too few stations)."""

    species: str
    common_name: str
    measure: str
    reason: str
    years: tuple[int, ...] = ()

    def line(self) -> str:
        seasons = (f"data from {len(self.years)} season{'s' if len(self.years) != 1 else ''}"
                   f" ({', '.join(map(str, self.years))})" if self.years else "no data")
        return f"{self.species} ({self.measure}): too short to call: {seasons}; {self.reason}"

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


def fit_one(data: pd.DataFrame, measure: str, *, family: str | None = None, margin: float,
            observer_effect: bool = False, profile: bool = True, indices: bool = True) -> TrendResult:
    model = TrendModel(data, measure=measure, family=family or default_family(measure), margin=margin,
                       observer_effect=observer_effect and C.OBSERVER in data and data[C.OBSERVER].notna().all())
    return model.fit(profile=profile, indices=indices)


@one_snapshot
def fit_programme(db: str | None, *, programme_code: str | None = None, species: list[str] | None = None,
                  sites: list[str] | None = None, first_year: int | None = None, last_year: int | None = None,
                  family: str | None = None, observer_effect: bool = False, keep_data: bool = False,
                  progress: Callable[[int, int, str], None] | None = None) -> list[SpeciesTrend]:
    """Fit every target species and measure of the programme (or those named).

    A species whose trend cannot be fitted (one season of data, too few stations, no values) does not stop
    the others: it is listed in the returned list's ``not_called`` as too short to call, with the reason.
    """
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
                out.not_called.append(NotCalled(target[C.SPECIES], target["common_name"] or "", target[C.MEASURE],
                                                "no stored values in the years asked", ()))
                continue
            long[C.LINEAGE] = long[C.STATION].map(chains)
            data, notes = analysis_frame(long, target[C.MEASURE])
            try:
                result = fit_one(data, target[C.MEASURE], family=family, margin=programme.change_margin,
                                 observer_effect=observer_effect)
            except EstimationError as exc:  # this species cannot be called; the others still are
                years = tuple(sorted(int(y) for y in set(data[C.YEAR]))) if C.YEAR in data else ()
                out.not_called.append(NotCalled(target[C.SPECIES], target["common_name"] or "", target[C.MEASURE],
                                                str(exc), years))
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


def fit_table(path: Path, *, measure: str | None = None, family: str | None = None, margin: float = DEFAULT_CHANGE_MARGIN,
              observer_effect: bool = False) -> SpeciesTrend:
    """Fit a plain long table brought from elsewhere: station, year, optional site, and the measure's columns."""
    path = Path(path)
    try:
        table = pd.read_csv(path) if path.suffix.lower() != ".xlsx" else pd.read_excel(path)
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise InputError(InputProblem(path.name, None, None, None, f"a readable CSV or .xlsx table ({exc})")) from None
    table.columns = [str(c).strip().lower() for c in table.columns]
    if measure is None:
        found = [m for cols, m in MEASURE_BY_COLUMNS if all(c in table.columns for c in cols)]
        if not found:
            raise InputError(InputProblem(path.name, 1, None, ", ".join(table.columns),
                                          "columns station, year and one of: count; cover_pct; occupied+cells; "
                                          "hits+pins; present"))
        measure = found[0]
    for column in (C.STATION, C.YEAR):
        if column not in table.columns:
            raise InputError(InputProblem(path.name, 1, column, None, f"a column '{column}'"))
    years = pd.to_numeric(table[C.YEAR], errors="coerce")
    bad = years.isna() | (years != years.round())
    if bad.any():
        row = int(bad.to_numpy().argmax()) + 2
        raise InputError(InputProblem(path.name, row, C.YEAR, table[C.YEAR].iloc[row - 2], "a whole year"))
    table[C.YEAR] = years.astype(int)
    for column in C.MEASURE_COLUMNS[measure]:
        values = pd.to_numeric(table[column], errors="coerce")
        if values.isna().any():
            row = int(values.isna().to_numpy().argmax()) + 2
            raise InputError(InputProblem(path.name, row, column, table[column].iloc[row - 2], "a number"))
        table[column] = values
    table[C.STATION] = table[C.STATION].astype(str)
    if C.SITE in table:
        table[C.SITE] = table[C.SITE].astype(str)
    result = fit_one(table, measure, family=family, margin=margin, observer_effect=observer_effect)
    return SpeciesTrend(path.stem, "", measure, result, (), None)
