"""monitor.estimate: this season's estimates from permanent quadrats.

Pure computation on pandas, numpy, scipy and statsmodels; no database, no command line.

What it answers within one season, and how
------------------------------------------
* How many are there?  Density per m^2 and the site total from quadrat counts:
  ``Y_hat = ybar * (A / a)`` with a t interval and the finite population correction ``1 - n/N``,
  ``N = A / a`` (:func:`estimate_density`); strata weighted by area with Satterthwaite degrees of
  freedom (:func:`estimate_density_stratified`, :func:`combine_strata`).  Systematic and spatially
  balanced placements use the simple-random-sampling variance, which is conservative; each result's
  ``note`` says which estimator was used.
* Cover and frequency: mean percent cover (:func:`estimate_cover`); gridded frequency and
  point-frame cover as k of n with the Wilson score interval per quadrat (:func:`wilson_interval`)
  and pooled over quadrats by a ratio estimator whose interval allows for the clustering of cells
  or pins within a quadrat (:func:`estimate_frequency`, :func:`estimate_pin_cover`,
  :func:`pooled_proportion`).
* Did we take enough quadrats?  ``n = (t_{n-1} s / (p xbar))^2`` iterated
  (:func:`quadrats_needed`), and the running mean with its interval (:func:`running_mean`).
* Did it change since last time?  Paired t and Wilcoxon signed-rank beside Welch, with the
  between-season correlation that makes permanent quadrats powerful (:func:`compare_seasons`).
* How does abundance change along a gradient?  Spearman's rho and a Poisson or negative binomial
  GLM slope (:func:`estimate_gradient`).
* The season's table for the CLI and report: :func:`season_estimates`.

Results are frozen dataclasses with ``to_dict()`` and carry ``n``; estimation trouble is a
:class:`monitor.errors.Diagnostic` on the result, and impossible requests raise
:class:`monitor.errors.EstimationError`.  Figures: :func:`plot_running_mean`,
:func:`plot_gradient`, :func:`plot_proportions`, :func:`plot_season_comparison` (``plot_x(result, ax=None) -> Figure``).

References
----------
Cochran, W. G. (1977). Sampling Techniques, 3rd ed. Wiley, New York.
Wilson, E. B. (1927). JASA 22:209-212.  Newcombe, R. G. (1998). Stat. Med. 17:857-872.
Korn, E. L. & Graubard, B. I. (1998). Survey Methodology 24:193-201.
Krebs, C. J. (1999). Ecological Methodology, 2nd ed. Addison-Wesley Longman.
"""

from ._common import FEW_QUADRATS
from .adequacy import (
    RunningMean,
    RunningMeanStep,
    SampleAdequacy,
    quadrats_needed,
    quadrats_needed_from_moments,
    running_mean,
)
from .change import SeasonComparison, compare_seasons
from .cover import (
    CoverEstimate,
    ProportionEstimate,
    QuadratProportion,
    estimate_cover,
    estimate_frequency,
    estimate_pin_cover,
    pooled_proportion,
    wilson_interval,
)
from .density import (
    DensityEstimate,
    StratifiedDensityEstimate,
    StratifiedTotal,
    combine_strata,
    design_note,
    estimate_density,
    estimate_density_stratified,
)
from .gradient import GradientFit, GradientResult, estimate_gradient
from .lengths import GeometricMeanEstimate, estimate_geometric_mean
from .plots import plot_gradient, plot_proportions, plot_running_mean, plot_season_comparison
from .season import PLACEMENT, season_estimates

__all__ = [
    "FEW_QUADRATS",
    "PLACEMENT",
    "CoverEstimate",
    "DensityEstimate",
    "GeometricMeanEstimate",
    "GradientFit",
    "GradientResult",
    "ProportionEstimate",
    "QuadratProportion",
    "RunningMean",
    "RunningMeanStep",
    "SampleAdequacy",
    "SeasonComparison",
    "StratifiedDensityEstimate",
    "StratifiedTotal",
    "combine_strata",
    "compare_seasons",
    "design_note",
    "estimate_cover",
    "estimate_density",
    "estimate_density_stratified",
    "estimate_frequency",
    "estimate_geometric_mean",
    "estimate_gradient",
    "estimate_pin_cover",
    "plot_gradient",
    "plot_proportions",
    "plot_running_mean",
    "plot_season_comparison",
    "pooled_proportion",
    "quadrats_needed",
    "quadrats_needed_from_moments",
    "running_mean",
    "season_estimates",
    "wilson_interval",
]
