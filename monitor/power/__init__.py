"""monitor.power: can a monitoring design detect the change that matters, and what would it take?

Pure computation (no database, no command line).  Simulation-based power of the trend test
with the trend engine's fast path, Gerrodette's (1987) approximation beside it, designs compared
side by side, and the inverse questions (smallest number of stations or years, smallest
detectable change).  See ``monitor.power.model`` for the population model and
``monitor.power.study`` for the test and the seeding.
"""

from monitor.power.approximation import (
    Approximation,
    approximate_detectable_change,
    approximate_power,
    gerrodette_exponential_power,
    gerrodette_linear_power,
    variance_factor,
    yearly_index_sd,
)
from monitor.power.model import (
    FAMILIES,
    SIDES,
    Design,
    Scenario,
    VarianceComponents,
    components_from_trend,
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
    "variance_factor", "yearly_index_sd",
]
