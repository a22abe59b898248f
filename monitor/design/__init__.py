"""monitor.design: where permanent quadrats go and which panel revisits them when.

Pure computation on shapely geometry in projected metres: no database, no click.
Every function that draws takes ``rng`` (numpy Generator or integer seed) and the result
stores the seed that reproduces it.
"""

from monitor.design._common import MIN_STATIONS, Placement, derive_rng, usable_area
from monitor.design.halton import halton, radical_inverse
from monitor.design.panels import (
    Panel,
    PanelDesign,
    RevisitPattern,
    assign_panels,
    due_table,
    format_revisit,
    parse_revisit,
)
from monitor.design.placement import (
    allocate,
    balanced_acceptance,
    extend_balanced,
    extend_random,
    extend_stratified,
    hilbert_order,
    simple_random,
    stratified_random,
    systematic_grid,
    transect,
)

__all__ = [
    "MIN_STATIONS",
    "Panel",
    "PanelDesign",
    "Placement",
    "RevisitPattern",
    "allocate",
    "assign_panels",
    "balanced_acceptance",
    "derive_rng",
    "due_table",
    "extend_balanced",
    "extend_random",
    "extend_stratified",
    "format_revisit",
    "halton",
    "hilbert_order",
    "parse_revisit",
    "radical_inverse",
    "simple_random",
    "stratified_random",
    "systematic_grid",
    "transect",
    "usable_area",
]
