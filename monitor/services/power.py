"""Power and design advice from the programme's own data (or from values for a programme on paper).

The variance components and mean level come from the trend the engine fits to a stored species
(``components_from_trend``, with the number of cells or pins from the programme's own grid and
frame), or from values the user gives.  Designs are compared side by side by simulation with the
trend engine's fast path, with the approximation beside each (Urquhart et al. 1998 variance with
year-to-year variation, Gerrodette 1987 without), the power that no number of stations can exceed
over the same years, and the two inverse questions: how many stations, and how many years.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.db import Store, one_snapshot, queries
from monitor.errors import DesignError, EstimationError, InputError, InputProblem
from monitor.power import (
    Design,
    DesignSearch,
    PowerResult,
    Scenario,
    VarianceComponents,
    approximate_power,
    compare_designs,
    components_from_trend,
    detectable_change,
    plot_power,
    results_frame,
    smallest_design,
    trials_from_data,
)
from monitor.power.model import mean_share_visited
from monitor.services import trend
from monitor.services.executor import open_runner
from monitor.settings import DEFAULT_CHANGE_MARGIN

#: the grids the searches walk: stations 10 to 200, and 3 to 50 consecutive seasons
STATIONS_GRID = tuple(range(10, 201, 10))
YEARS_GRID = tuple(range(3, 51))


@dataclass(frozen=True)
class PowerStudy:
    """Designs compared for one scenario, and the smallest designs reaching the target power."""

    source: str                       # "SPECIES (measure) fitted to the programme" or "values given"
    components: VarianceComponents
    scenario: Scenario
    results: list[PowerResult]
    smallest: DesignSearch | None     # how many stations (at the longest series compared)
    target: float
    figure: Path | None
    years: DesignSearch | None = None  # how many years (at the most stations compared)

    def table(self) -> pd.DataFrame:
        return results_frame(self.results)

    def ceilings(self) -> dict[int, float]:
        """Power no number of stations can exceed, for each number of seasons compared (approximation)."""
        out: dict[int, float] = {}
        for r in self.results:
            if r.approximation is not None:
                out[r.design.n_years] = r.approximation.ceiling
        return out

    def to_dict(self) -> dict:
        return {"source": self.source, "target": self.target,
                "components": {"family": self.components.family, "year_sd": self.components.year_sd,
                               "year_rho": self.components.year_rho,
                               "site_year_sd": self.components.site_year_sd,
                               "station_sd": self.components.station_sd, "site_sd": self.components.site_sd,
                               "observation_sd": self.components.observation_sd,
                               "residual_sd": self.components.residual_sd, "trials": self.components.trials},
                "power_se_note": "power_se is one Monte-Carlo standard error; the figure's bars are two",
                "results": [r.to_dict() for r in self.results],
                "power_ceiling_by_years": {str(k): v for k, v in self.ceilings().items()},
                "smallest_design": None if self.smallest is None else self.smallest.to_dict(),
                "years_needed": None if self.years is None else self.years.to_dict(),
                "figure": None if self.figure is None else str(self.figure)}


@one_snapshot
def components_for(db: str | None, species: str, *, programme_code: str | None = None) -> tuple[VarianceComponents, str]:
    """The population model of a stored species: its fitted trend, and its grid or frame from the programme."""
    fitted = trend.fit_programme(db, programme_code=programme_code, species=[species], keep_data=True)
    if not fitted and getattr(fitted, "not_called", None):
        raise EstimationError(fitted.not_called[0].line())
    if len(fitted) != 1:
        raise InputError(InputProblem("--species", None, None, species, "one target species and measure"))
    t = fitted[0]
    trials = None
    if measures.get(t.measure).needs_n:
        # the grid or frame the records were taken with now, else the programme's set-up
        trials = trials_from_data(t.data, t.measure) if t.data is not None else None
        if trials is None:
            trials = _programme_n(db, programme_code, t.species, t.measure)
    return components_from_trend(t.result, trials=trials), f"{t.species} ({t.measure}) as fitted to the programme's data"


def _programme_n(db: str | None, programme_code: str | None, species: str, measure: str) -> int | None:
    """Cells or pins the programme's set-up states for a species' measure (its target's n)."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        targets = queries.species(store, programme.id)
    finally:
        store.dispose()
    row = targets[(targets[C.SPECIES] == species) & (targets[C.MEASURE] == measure)]
    if row.empty or pd.isna(row["n"].iloc[0]):
        return None
    return int(row["n"].iloc[0])


# --- progress in units of work ------------------------------------------------------------------

def _work(design: Design) -> float:
    """Relative cost of one replicate of a design: the visits it simulates and fits."""
    return max(1.0, design.n_stations * design.n_years * mean_share_visited(design))


class _Work:
    """Progress over the phases of a study, in units of simulated visits, so that the time left
    (click's estimate from the measured rate so far) does not assume a replicate of 200 stations over
    25 years costs what one of 10 stations over 5 does, and the searches are counted too."""

    def __init__(self, progress: Callable[[int, int], None] | None, total: float):
        self.progress, self.total, self.done = progress, max(1.0, total), 0.0

    def phase(self, weight: float) -> Callable[[int, int], None]:
        start = self.done

        def report(done: int, _total: int) -> None:
            self.done = start + weight * done
            self.total = max(self.total, self.done)
            if self.progress is not None:
                self.progress(int(self.done), int(math.ceil(self.total)))
        return report

    def finish_phase(self, planned: float, start: float) -> None:
        """A search ended before (or after) its planned work: move on to where the plan said it ends."""
        self.done = max(self.done, start + planned)
        self.total = max(self.total, self.done)
        if self.progress is not None:
            self.progress(int(self.done), int(math.ceil(self.total)))


def _search_evaluations(grid_size: int) -> int:
    return 1 + math.ceil(math.log2(grid_size + 1))


def _planned_search(components: VarianceComponents, scenario: Scenario, design: Design, vary: str,
                    grid: Sequence[int], target: float, replicates: int) -> tuple[float, float]:
    """Expected work of a search (bisection steps times replicates times the size near the
    approximation's answer), and that size: (planned work, work of one replicate)."""
    guess = None
    for value in grid:
        try:
            if approximate_power(components, design.with_(**{vary: value}), scenario).power >= target:
                guess = value
                break
        except DesignError:
            continue
    weight = _work(design.with_(**{vary: guess if guess is not None else max(grid)}))
    return _search_evaluations(len(grid)) * replicates * weight, weight


def power_study(components: VarianceComponents, source: str, *, change: float, over_years: int,
                stations: Sequence[int], years: Sequence[int], revisit: str = "[1-0]", missed_share: float = 0.0,
                alpha: float = 0.05, side: str = "decline", margin: float = DEFAULT_CHANGE_MARGIN,
                target: float = 0.8, replicates: int = 200, seed: int = 1, workers: int = 1,
                find_smallest: bool = True, find_years: bool = True, figure: Path | None = None,
                progress: Callable[[int, int], None] | None = None, cluster: str | None = None) -> PowerStudy:
    """Simulated power of every stations x years design for a steady change of ``change`` over ``over_years``.

    Every design shares the same replicate seeds (common random numbers), so the comparison between
    designs is not masked by independent noise.  With ``find_smallest`` the smallest number of
    stations reaching ``target`` over the longest series compared; with ``find_years`` the smallest
    number of consecutive seasons reaching it with the most stations compared.  ``progress`` is
    called with (work done, work planned) in units of simulated visits.  The replicates run in
    ``workers`` local processes, or on the Dask scheduler at ``cluster``; every replicate is seeded from
    ``seed`` and its place, so the answer is the same wherever it runs.
    """
    if not stations or not years:
        raise InputError(InputProblem("--stations/--years", None, None, None, "at least one value each"))
    scenario = Scenario.from_change(change, over_years=over_years, alpha=alpha, side=side, margin=margin)
    designs = [Design(int(n), int(y), revisit=revisit, missed_share=missed_share) for y in years for n in stations]
    base_stations = Design(max(stations), max(years), revisit=revisit, missed_share=missed_share)
    stations_grid = sorted({*STATIONS_GRID, *(int(n) for n in stations)})
    years_grid = sorted({*YEARS_GRID, *(int(y) for y in years if y >= 3)})
    planned_stations, weight_stations = (_planned_search(components, scenario, base_stations, "n_stations",
                                                         stations_grid, target, replicates)
                                         if find_smallest else (0.0, 0.0))
    planned_years, weight_years = (_planned_search(components, scenario, base_stations, "n_years", years_grid,
                                                   target, replicates) if find_years else (0.0, 0.0))
    work = _Work(progress, sum(replicates * _work(d) for d in designs) + planned_stations + planned_years)

    with open_runner(workers, cluster) as runner:
        # on a cluster its executor runs the replicates (chunked for its workers); locally, the stage's own pool
        executor = runner.executor if cluster else None
        n_workers = max(1, runner.cluster_workers()) if cluster else workers
        results = []
        for design in designs:
            # each design from the same seed: the same entropy, so the same replicate seeds as one joint run
            results += compare_designs(components, [design], scenario, rng=np.random.default_rng(seed),
                                       n_replicates=replicates, n_workers=n_workers,
                                       progress=work.phase(_work(design)), executor=executor)
        smallest = None
        if find_smallest:
            start = work.done
            smallest = smallest_design(components, scenario, base_stations, vary="n_stations", grid=stations_grid,
                                       target=target, rng=np.random.default_rng(seed + 1), n_replicates=replicates,
                                       n_workers=n_workers, progress=work.phase(weight_stations), executor=executor)
            work.finish_phase(planned_stations, start)
        years_search = None
        if find_years:
            start = work.done
            years_search = smallest_design(components, scenario, base_stations, vary="n_years", grid=years_grid,
                                           target=target, rng=np.random.default_rng(seed + 2),
                                           n_replicates=replicates, n_workers=n_workers,
                                           progress=work.phase(weight_years), executor=executor)
            work.finish_phase(planned_years, start)
    if figure is not None:
        import matplotlib.pyplot as plt

        fig = plot_power(results, target=target)
        Path(figure).parent.mkdir(parents=True, exist_ok=True)
        fig.savefig(figure, dpi=150, bbox_inches="tight")
        plt.close(fig)
    return PowerStudy(source, components, scenario, results, smallest, target, Path(figure) if figure else None,
                      years_search)


def detectable_changes(trends, *, power: float = 0.8, alpha: float = 0.05) -> pd.DataFrame:
    """For each fitted species: the smallest steady annual decline the current design detects with ``power``
    (approximation on the fitted components, year-to-year variation included; instant, for the annual report).

    A species whose detectable change cannot be computed gets ``detectable_change`` None and a
    ``note`` saying why in plain words; only the errors that say so are caught.
    """
    rows = []
    for t in trends:
        if t.data is None:
            continue
        try:
            components = components_from_trend(t.result, data=t.data)
            design = Design.from_data(t.data)
            found = detectable_change(components, design, alpha=alpha, side="decline", power=power,
                                      margin=t.result.margin, method="approximation")
        except (DesignError, EstimationError) as exc:
            rows.append({"species": t.species, "measure": t.measure, "detectable_change": None, "power": power,
                         "n_stations": t.result.n_stations, "n_years": t.result.n_years,
                         "note": f"the detectable change could not be computed: {exc}"})
            continue
        rows.append({"species": t.species, "measure": t.measure, "detectable_change": found.annual_change,
                     "power": power, "n_stations": design.n_stations, "n_years": design.n_years, "note": ""})
    return pd.DataFrame(rows)
