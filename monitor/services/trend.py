"""Trends across years for each target species and measure, from the stored programme or a user's table.

Which stations enter a species' model: those where the species has been recorded present at least
once in the years analysed.  Stations outside a species' range only add structural zeros that say
nothing about its trend (and a site where it never grew would get an intercept at minus infinity).
Missed and inaccessible visits are absent from the data, never zeros.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path

import pandas as pd

from monitor import columns as C
from monitor.db import Store, one_snapshot, queries
from monitor.db import fits as fit_store
from monitor.errors import DataError, Diagnostic, InputError, InputProblem
from monitor.services import analyses
from monitor.services.analyses import AREA_ALL, AREA_KINDS, FitTask
from monitor.services.executor import open_runner
from monitor.services.records import current_user
from monitor.settings import DEFAULT_CHANGE_MARGIN
from monitor.trend import TrendModel, TrendResult, default_family


@dataclass(frozen=True)
class SpeciesTrend:
    """A fitted trend with what it was fitted to."""

    species: str
    common_name: str
    measure: str
    result: TrendResult
    notes: tuple[Diagnostic, ...] = field(default_factory=tuple)
    data: pd.DataFrame | None = field(default=None, repr=False, compare=False)
    area_kind: str = "all"             # all, site, stratum or region
    area: str = ""                     # the site, stratum or region code ("" for the whole programme)
    fitted_at: dt.datetime | None = None
    reused: bool = False               # read back from the stored fits, not fitted by this run
    fit_id: int | None = None          # the stored fit (None when not stored)
    fit_key: tuple | None = field(default=None, repr=False, compare=False)  # identity of the fit in the store

    def to_dict(self) -> dict:
        out = {"species": self.species, "common_name": self.common_name, "area_kind": self.area_kind,
               "area": self.area, **self.result.to_dict()}
        out["diagnostics"] = out["diagnostics"] + [
            {"code": d.code, "message": d.message, "severity": d.severity} for d in self.notes]
        out["fitted_at"] = None if self.fitted_at is None else self.fitted_at.isoformat()
        out["reused"] = self.reused
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


def fit_options(data: pd.DataFrame, measure: str, *, family: str | None = None, margin: float,
                observer_effect: bool = False) -> dict:
    """The options of ``fit_one`` for this table, resolved (JSON-ready: they identify a stored fit)."""
    return {"family": family or default_family(measure), "margin": float(margin),
            "observer_effect": bool(observer_effect and C.OBSERVER in data and data[C.OBSERVER].notna().all())}


def fit_one(data: pd.DataFrame, measure: str, *, family: str | None = None, margin: float,
            observer_effect: bool = False, profile: bool = True, indices: bool = True) -> TrendResult:
    model = TrendModel(data, measure=measure, family=family or default_family(measure), margin=margin,
                       observer_effect=observer_effect and C.OBSERVER in data and data[C.OBSERVER].notna().all())
    return model.fit(profile=profile, indices=indices)


def _targets(store: Store, programme_id: int, species: list[str] | None) -> pd.DataFrame:
    targets = queries.species(store, programme_id).dropna(subset=[C.MEASURE])
    if species:
        unknown = sorted(set(species) - set(targets[C.SPECIES]))
        if unknown:
            raise InputError(InputProblem("--species", None, None, ", ".join(unknown),
                                          f"a target species code ({', '.join(targets[C.SPECIES])})"))
        targets = targets[targets[C.SPECIES].isin(species)]
    return targets


def _area_tasks(task: FitTask, by: str, areas: pd.Series) -> tuple[list[FitTask], list[Diagnostic]]:
    """One task per area (site, stratum or region) of a species' table, in code order."""
    data = task.data
    area_of = data[C.STATION].map(areas)
    notes = []
    missing = int(area_of.isna().sum())
    if missing:
        stations = data.loc[area_of.isna(), C.STATION].nunique()
        notes.append(Diagnostic(f"no_{by}", f"{stations} station(s) have no {by}; their {missing} value(s) enter "
                                f"the overall trend only.", "info"))
    tasks = [FitTask(task.species, task.measure, by, str(code), task.options,
                     data[(area_of == code).to_numpy()].reset_index(drop=True))
             for code in sorted(area_of.dropna().unique())]
    return tasks, notes


def fit_programme(db: str | None, *, programme_code: str | None = None, species: list[str] | None = None,
                  sites: list[str] | None = None, first_year: int | None = None, last_year: int | None = None,
                  family: str | None = None, observer_effect: bool = False, keep_data: bool = False,
                  by: str | None = None, workers: int | None = 1, cluster: str | None = None,
                  refit: bool = False, save: bool = True,
                  progress: Callable[[int, int, str], None] | None = None) -> list[SpeciesTrend]:
    """Fit every target species and measure of the programme (or those named), and by area with ``by``.

    Stored fits whose data, specification and engine still match are reused (``refit`` fits everything
    again); the rest are fitted by ``workers`` local processes (None: the cores) or on the Dask scheduler
    at ``cluster``, and stored by this process.  Results come in target order: each species' overall
    trend, then its areas in code order.  Everything is read from one snapshot of the database; the new
    fits are stored when it ends.
    """
    with analyses.saving_after() as saved:
        trends = _fit_programme(db, programme_code=programme_code, species=species, sites=sites,
                                first_year=first_year, last_year=last_year, family=family,
                                observer_effect=observer_effect, keep_data=keep_data, by=by, workers=workers,
                                cluster=cluster, refit=refit, save=save, progress=progress)
    return [t if t.fit_id is not None else replace(t, fit_id=saved.fit_id(t)) for t in trends]


@one_snapshot
def _fit_programme(db: str | None, *, programme_code: str | None, species: list[str] | None,
                   sites: list[str] | None, first_year: int | None, last_year: int | None, family: str | None,
                   observer_effect: bool, keep_data: bool, by: str | None, workers: int | None,
                   cluster: str | None, refit: bool, save: bool,
                   progress: Callable[[int, int, str], None] | None) -> list[SpeciesTrend]:
    """The reading and fitting of ``fit_programme``, in one snapshot (the new fits are stored after it)."""
    if by is not None and by not in AREA_KINDS:
        raise InputError(InputProblem("--by", None, None, by, f"one of {', '.join(AREA_KINDS)}"))
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        targets = _targets(store, programme.id, species)
        areas = fit_store.area_of_stations(store, programme.id).set_index(C.STATION)[by] if by else None
        from monitor.services.relocation import lineage

        chains = lineage(store, programme.id)
        tasks: list[FitTask] = []
        notes: dict[tuple[str, str], list[Diagnostic]] = {}
        names = {}
        for target in targets.to_dict(orient="records"):
            sp, measure = target[C.SPECIES], target[C.MEASURE]
            names[sp] = target["common_name"] or ""
            long = queries.observations_long(store, programme.id, species=sp, measure=measure, sites=sites,
                                             first_year=first_year, last_year=last_year)
            if long.empty:
                raise DataError(f"no stored values for {sp} ({measure}) in the years asked")
            long[C.LINEAGE] = long[C.STATION].map(chains)
            data, species_notes = analysis_frame(long, measure)
            options = fit_options(data, measure, family=family, margin=programme.change_margin,
                                  observer_effect=observer_effect)
            overall = FitTask(sp, measure, AREA_ALL, "", options, data)
            tasks.append(overall)
            notes[(sp, measure)] = species_notes
            if areas is not None:
                area_tasks, area_notes = _area_tasks(overall, by, areas)  # type: ignore[arg-type]
                tasks += area_tasks
                notes[(sp, measure)] += area_notes

        def tick(done: int, total: int) -> None:
            if progress:
                progress(done, total, "")

        with open_runner(workers, cluster) as runner:
            outcomes = analyses.fit_tasks(store, programme.id, tasks, runner, who=current_user(), refit=refit,
                                          save=save, progress=tick)
    finally:
        store.dispose()
    return _species_trends(outcomes, notes, names, keep_data)


def _species_trends(outcomes, notes, names, keep_data: bool) -> list[SpeciesTrend]:
    out = []
    for o in outcomes:
        t = o.task
        key = (t.species, t.measure)
        if o.error is not None:
            if t.area_kind == AREA_ALL:
                raise o.error
            notes[key].append(Diagnostic(f"{t.area_kind}_not_fitted",
                                         f"{t.area_kind.capitalize()} {t.area}: no trend ({o.error}).", "info"))
            continue
        out.append(SpeciesTrend(t.species, names.get(t.species, ""), t.measure, o.result,
                                tuple(notes[key]) if t.area_kind == AREA_ALL else (),
                                t.data if keep_data else None, area_kind=t.area_kind, area=t.area,
                                fitted_at=o.fitted_at, reused=o.reused, fit_id=o.fit_id, fit_key=o.key))
    # area notes found after the overall entry was made: rebuild it with every note
    return [replace(s, notes=tuple(notes[(s.species, s.measure)])) if s.area_kind == AREA_ALL else s for s in out]


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
