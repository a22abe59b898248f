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
from monitor.errors import Diagnostic, EstimationError, InputError, InputProblem
from monitor.families import family as family_of
from monitor.io.trend_table import read_trend_table
from monitor.services import analyses
from monitor.services.analyses import AREA_ALL, AREA_KINDS, FitTask
from monitor.services.common import current_user, target_species
from monitor.services.executor import open_runner
from monitor.settings import DEFAULT_CHANGE_MARGIN, programme_settings
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


@dataclass(frozen=True)
class ModelChoices:
    """How the trend models are built (the CLI's options): see ``monitor.trend.TrendModel``.

    ``year_random`` None follows the engine's rule (a year effect from ``MIN_YEAR_EFFECT_YEARS`` years with data, monitor/settings.py);
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
                       observation_effect=choices.observation_effect if _observation_effect_optional(choices.family)
                       else None)
    return model.fit(profile=profile, indices=indices, fast=False)


def _observation_effect_optional(family: str | None) -> bool:
    """Whether the family leaves the observation-level effect to the data (None: the measure's default)."""
    return family is None or family_of(family).observation_effect == "optional"


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
                  choices: ModelChoices | None = None, skipped: list[dict] | None = None,
                  by: str | None = None, workers: int | None = 1, cluster: str | None = None,
                  refit: bool = False, save: bool = True,
                  progress: Callable[[int, int, str], None] | None = None) -> list[SpeciesTrend]:
    """Fit every target species and measure of the programme (or those named), and by area with ``by``.

    A species whose trend cannot be fitted (one season of data, too few stations, no values, every value
    the same) does not stop the others: it is listed in the returned list's ``not_called`` as too short to
    call, with the reason, and, when ``skipped`` is a list, appended to it as {species, measure, reason}.
    An area that cannot be fitted is noted on the species' overall trend.

    Stored fits whose data, specification and engine still match are reused (``refit`` fits everything
    again); the rest are fitted by ``workers`` local processes (None: the cores) or on the Dask scheduler
    at ``cluster``, and stored by this process.  Results come in target order: each species' overall
    trend, then its areas in code order.  Everything is read from one snapshot of the database; the new
    fits are stored when it ends.
    """
    with analyses.saving_after() as saved:
        if choices is None:
            choices = ModelChoices(family=family, observer_effect=observer_effect)
        trends = _fit_programme(db, programme_code=programme_code, species=species, sites=sites,
                                first_year=first_year, last_year=last_year, choices=choices, skipped=skipped,
                                keep_data=keep_data, by=by, workers=workers, cluster=cluster, refit=refit,
                                save=save, progress=progress)
    out = TrendRun(t if t.fit_id is not None else replace(t, fit_id=saved.fit_id(t)) for t in trends)
    out.not_called = trends.not_called
    return out


@one_snapshot
def _fit_programme(db: str | None, *, programme_code: str | None, species: list[str] | None,
                   sites: list[str] | None, first_year: int | None, last_year: int | None,
                   choices: ModelChoices, skipped: list[dict] | None, keep_data: bool, by: str | None,
                   workers: int | None,
                   cluster: str | None, refit: bool, save: bool,
                   progress: Callable[[int, int, str], None] | None) -> list[SpeciesTrend]:
    """The reading and fitting of ``fit_programme``, in one snapshot (the new fits are stored after it)."""
    if by is not None and by not in AREA_KINDS:
        raise InputError(InputProblem("--by", None, None, by, f"one of {', '.join(AREA_KINDS)}"))
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        targets = target_species(store, programme.id, species)
        areas = fit_store.area_of_stations(store, programme.id).set_index(C.STATION)[by] if by else None
        from monitor.services.relocation import lineage

        chains = lineage(store, programme.id)
        tasks: list[FitTask] = []
        not_called: list[NotCalled] = []
        notes: dict[tuple[str, str], list[Diagnostic]] = {}
        names = {}
        for target in targets.to_dict(orient="records"):
            sp, measure = target[C.SPECIES], target[C.MEASURE]
            names[sp] = target["common_name"] or ""
            long = queries.observations_long(store, programme.id, species=sp, measure=measure, sites=sites,
                                             first_year=first_year, last_year=last_year)
            if long.empty:
                short = NotCalled(sp, names[sp], measure, "no stored values in the years asked", ())
                not_called.append(short)
                if skipped is not None:
                    skipped.append({C.SPECIES: sp, C.MEASURE: measure, "reason": short.why()})
                continue
            long[C.LINEAGE] = long[C.STATION].map(chains)
            data, species_notes = analysis_frame(long, measure)
            options = {"margin": programme_settings(programme).change_margin, "choices": choices}
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
    return _species_trends(outcomes, notes, names, keep_data, skipped, not_called)


def _species_trends(outcomes, notes, names, keep_data: bool, skipped: list[dict] | None,
                    not_called: list[NotCalled]) -> TrendRun:
    out = TrendRun()
    out.not_called = not_called
    dropped = set()
    for o in outcomes:
        t = o.task
        key = (t.species, t.measure)
        if key in dropped:
            continue
        if o.error is not None:
            if t.area_kind == AREA_ALL:
                if not isinstance(o.error, EstimationError):
                    raise o.error
                # this species cannot be called; the others still are
                years = tuple(sorted(int(y) for y in set(t.data[C.YEAR]))) if C.YEAR in t.data else ()
                short = NotCalled(t.species, names.get(t.species, ""), t.measure, str(o.error), years)
                out.not_called.append(short)
                if skipped is not None:
                    skipped.append({C.SPECIES: t.species, C.MEASURE: t.measure, "reason": short.why()})
                dropped.add(key)
                continue
            notes[key].append(Diagnostic(f"{t.area_kind}_not_fitted",
                                         f"{t.area_kind.capitalize()} {t.area}: no trend ({o.error}).", "info"))
            continue
        out.append(SpeciesTrend(t.species, names.get(t.species, ""), t.measure, o.result,
                                tuple(notes[key]) if t.area_kind == AREA_ALL else (),
                                t.data if keep_data else None, area_kind=t.area_kind, area=t.area,
                                fitted_at=o.fitted_at, reused=o.reused, fit_id=o.fit_id, fit_key=o.key))
    # area notes found after the overall entry was made: rebuild it with every note
    out[:] = [replace(s, notes=tuple(notes[(s.species, s.measure)])) if s.area_kind == AREA_ALL else s for s in out]
    return out


def fit_table(path: Path, *, measure: str | None = None, family: str | None = None,
              margin: float = DEFAULT_CHANGE_MARGIN, observer_effect: bool = False,
              choices: ModelChoices | None = None) -> SpeciesTrend:
    """Fit a plain long table brought from elsewhere: station, year, optional site, and the measure's columns.

    Every cell is checked as written (:func:`monitor.io.trend_table.read_trend_table`: a blank, "n/a" or a
    negative count is refused with its file, row and field); nothing is fitted unless the whole table is right.
    """
    path = Path(path)
    if choices is None:
        choices = ModelChoices(family=family, observer_effect=observer_effect)
    table, measure = read_trend_table(path, measure=measure)
    result = fit_one(table, measure, margin=margin, choices=choices)
    return SpeciesTrend(path.stem, "", measure, result, (), None)


