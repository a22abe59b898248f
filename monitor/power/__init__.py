"""monitor.power: can a monitoring design detect the change that matters, and what would it take?

Pure computation (no database, no command line).  Simulation-based power of the trend test
with the trend engine's fast path, Gerrodette's (1987) approximation beside it, designs compared
side by side, and the inverse questions (smallest number of stations or years, smallest
detectable change).  See ``monitor.power.model`` for the population model and
``monitor.power.study`` for the test and the seeding.

Example: "with 40 quadrats surveyed every year, can we detect a 50 % fall in 10 years?"::

    import numpy as np
    from monitor.power import (Design, Scenario, components_from_trend, simulate_power,
                               smallest_design)

    components = components_from_trend(trend_result)          # or VarianceComponents.from_mean(...)
    scenario = Scenario.from_change(-0.5, over_years=10, alpha=0.05, side="decline")
    result = simulate_power(components, Design(40, 11), scenario,
                            rng=np.random.default_rng(2024), n_replicates=500, n_workers=2)
    result.power, result.power_se, result.approximation.power
    smallest_design(components, scenario, Design(40, 11), vary="n_stations",
                    grid=range(10, 201, 10), rng=np.random.default_rng(2024)).value

``Design(40, 11)`` is eleven seasons, year 0 to year 10, so that the 50 % fall happens
within the surveys.
"""

from monitor.power.approximation import (
    Approximation,
    approximate_detectable_change,
    approximate_power,
    gerrodette_exponential_power,
    gerrodette_linear_power,
    index_variance,
    slope_variance,
    variance_factor,
    yearly_index_sd,
    years_needed,
)
from monitor.power.model import (
    FAMILIES,
    SIDES,
    Design,
    Scenario,
    VarianceComponents,
    components_from_trend,
    trials_from_data,
)
from monitor.power.panels import PanelMember, RevisitDesign, parse_revisit
from monitor.power.plot import plot_power
from monitor.power.simulate import simulate_dataset
from monitor.power.study import (
    DesignSearch,
    DetectableChange,
    PowerResult,
    compare_designs,
    design_grid,
    detectable_change,
    reject_null,
    results_frame,
    simulate_power,
    smallest_design,
)

__all__ = [
    "FAMILIES", "SIDES", "Approximation", "Design", "DesignSearch", "DetectableChange", "PanelMember",
    "PowerResult", "RevisitDesign", "Scenario", "VarianceComponents", "approximate_detectable_change",
    "approximate_power", "compare_designs", "components_from_trend", "design_grid", "detectable_change",
    "gerrodette_exponential_power", "gerrodette_linear_power", "parse_revisit", "plot_power",
    "reject_null", "results_frame", "simulate_dataset", "simulate_power", "smallest_design",
    "variance_factor", "yearly_index_sd", "index_variance", "slope_variance", "years_needed", "trials_from_data",
]
