"""Power and design advice from the programme's own data (or from values for a programme on paper).

The variance components and mean level come from the trend the engine fits to a stored species
(``components_from_trend``), or from values the user gives.  Designs are compared side by side by
simulation with the trend engine's fast path, with Gerrodette's (1987) approximation beside each.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from monitor.errors import InputError, InputProblem
from monitor.power import (
    Design,
    DesignSearch,
    PowerResult,
    Scenario,
    VarianceComponents,
    compare_designs,
    components_from_trend,
    detectable_change,
    plot_power,
    results_frame,
    smallest_design,
)
from monitor.services import trend
from monitor.services.executor import open_runner
from monitor.settings import DEFAULT_CHANGE_MARGIN


@dataclass(frozen=True)
class PowerStudy:
    """Designs compared for one scenario, and the smallest design reaching the target power."""

    source: str                       # "SPECIES (measure) fitted to the programme" or "values given"
    components: VarianceComponents
    scenario: Scenario
    results: list[PowerResult]
    smallest: DesignSearch | None
    target: float
    figure: Path | None

    def table(self) -> pd.DataFrame:
        return results_frame(self.results)

    def to_dict(self) -> dict:
        return {"source": self.source, "target": self.target,
                "results": [r.to_dict() for r in self.results],
                "smallest_design": None if self.smallest is None else self.smallest.to_dict(),
                "figure": None if self.figure is None else str(self.figure)}


def components_for(db: str | None, species: str, *, programme_code: str | None = None) -> tuple[VarianceComponents, str]:
    fitted = trend.fit_programme(db, programme_code=programme_code, species=[species])
    if len(fitted) != 1:
        raise InputError(InputProblem("--species", None, None, species, "one target species and measure"))
    t = fitted[0]
    return components_from_trend(t.result), f"{t.species} ({t.measure}) as fitted to the programme's data"


def power_study(components: VarianceComponents, source: str, *, change: float, over_years: int,
                stations: Sequence[int], years: Sequence[int], revisit: str = "[1-0]", missed_share: float = 0.0,
                alpha: float = 0.05, side: str = "decline", margin: float = DEFAULT_CHANGE_MARGIN, target: float = 0.8,
                replicates: int = 200, seed: int = 1, workers: int = 1, find_smallest: bool = True,
                figure: Path | None = None, progress: Callable[[int, int], None] | None = None,
                cluster: str | None = None) -> PowerStudy:
    """Simulated power of every stations x years design for a steady change of ``change`` over ``over_years``.

    The replicates run in ``workers`` local processes, or on the Dask scheduler at ``cluster``; every
    replicate is seeded from ``seed`` and its place, so the answer is the same wherever it runs."""
    if not stations or not years:
        raise InputError(InputProblem("--stations/--years", None, None, None, "at least one value each"))
    scenario = Scenario.from_change(change, over_years=over_years, alpha=alpha, side=side, margin=margin)
    designs = [Design(int(n), int(y), revisit=revisit, missed_share=missed_share) for y in years for n in stations]
    rng = np.random.default_rng(seed)
    with open_runner(workers, cluster) as runner:
        executor = runner.executor if cluster else None
        n_workers = workers if not cluster else max(1, runner.cluster_workers())
        results = compare_designs(components, designs, scenario, rng=rng, n_replicates=replicates,
                                  n_workers=n_workers, progress=progress, executor=executor)
        smallest = None
        if find_smallest:
            longest = max(years)
            grid = sorted({*range(10, 201, 10), *stations})
            smallest = smallest_design(components, scenario, Design(max(stations), longest, revisit=revisit,
                                                                      missed_share=missed_share),
                                       vary="n_stations", grid=grid, target=target,
                                       rng=np.random.default_rng(seed + 1), n_replicates=replicates,
                                       n_workers=n_workers, executor=executor)
    if figure is not None:
        import matplotlib.pyplot as plt

        fig = plot_power(results, target=target)
        Path(figure).parent.mkdir(parents=True, exist_ok=True)
        fig.savefig(figure, dpi=150, bbox_inches="tight")
        plt.close(fig)
    return PowerStudy(source, components, scenario, results, smallest, target, Path(figure) if figure else None)


def detectable_changes(trends, *, power: float = 0.8, alpha: float = 0.05) -> pd.DataFrame:
    """For each fitted species: the smallest steady annual decline the current design detects with ``power``
    (Gerrodette approximation on the fitted components; instant, for the annual report)."""
    rows = []
    for t in trends:
        if t.data is None:
            continue
        try:
            components = components_from_trend(t.result)
            design = Design.from_data(t.data)
            found = detectable_change(components, design, alpha=alpha, side="decline", power=power,
                                      margin=t.result.margin, method="approximation")
        except Exception as exc:  # noqa: BLE001 - one species' trouble must not stop the report
            rows.append({"species": t.species, "measure": t.measure, "detectable_change": None, "power": power,
                         "n_stations": t.result.n_stations, "n_years": t.result.n_years,
                         "note": f"not computed: {exc}"})
            continue
        rows.append({"species": t.species, "measure": t.measure, "detectable_change": found.annual_change,
                     "power": power, "n_stations": design.n_stations, "n_years": design.n_years})
    return pd.DataFrame(rows)
