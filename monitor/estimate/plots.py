"""Figures for estimates: ``plot_x(result, ax=None) -> Figure``, no global pyplot state."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from monitor import measures

from .adequacy import RunningMean
from .change import SeasonComparison
from .cover import ProportionEstimate
from .gradient import GradientResult

if TYPE_CHECKING:  # matplotlib is imported when a figure is drawn, not when monitor.estimate is
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure


def _figure(ax: Axes | None, size=(6.0, 4.0)) -> tuple[Figure, Axes]:
    from matplotlib.figure import Figure

    if ax is not None:
        return ax.figure, ax  # type: ignore[return-value]
    figure = Figure(figsize=size, layout="constrained")
    return figure, figure.add_subplot()


def plot_running_mean(result: RunningMean, ax: Axes | None = None) -> Figure:
    """Running mean with its interval as quadrats are added, and the +/- precision band.

    A crew reads it as: once the interval (shaded) sits inside the dashed band, more quadrats
    add little.
    """
    figure, ax = _figure(ax)
    k = np.array([s.k for s in result.steps])
    mean = np.array([s.mean for s in result.steps])
    lower = np.array([s.lower for s in result.steps])
    upper = np.array([s.upper for s in result.steps])
    ax.fill_between(k, lower, upper, alpha=0.25, label=f"{result.confidence:.0%} interval")
    ax.plot(k, mean, marker="o", markersize=3, label="running mean")
    final = mean[-1]
    for sign in (-1, 1):
        ax.axhline(final * (1 + sign * result.precision), linestyle="--", linewidth=0.8, color="grey")
    if result.first_adequate_k is not None:
        ax.axvline(result.first_adequate_k, linestyle=":", color="black", linewidth=0.8,
                   label=f"within +/-{result.precision:.0%} from k = {result.first_adequate_k}")
    ax.set_xlabel("quadrats taken")
    ax.set_ylabel("mean per quadrat")
    ax.set_title("Running mean as quadrats are added")
    ax.legend(fontsize="small")
    return figure


_AXIS_LABELS = {"distance_m": "distance along the transect [m]", "count": "count per quadrat",
                "soil_moisture": "soil moisture [%]"}


def plot_gradient(result: GradientResult, ax: Axes | None = None) -> Figure:
    """Abundance along the transect (or covariate): points and fitted GLM curve per season.

    Seasons are coloured along a sequential, colour-blind-safe scale (viridis), early seasons dark,
    so a shift of the curve over the years reads as a gradient of colour; the legend sits outside
    the axes so no point is hidden.
    """
    from matplotlib import colormaps

    figure, ax = _figure(ax, size=(7.5, 4.2))
    x = np.asarray(result.x)
    y = np.asarray(result.y)
    seasons = np.asarray(result.seasons, dtype=object)
    grid = np.linspace(x.min(), x.max(), 200)
    scale = colormaps["viridis"]
    n = max(len(result.fits) - 1, 1)
    for i, fit in enumerate(result.fits):
        colour = scale(0.9 * i / n)
        mask = seasons == fit.season if fit.season is not None else np.ones(x.size, dtype=bool)
        label = "all" if fit.season is None else str(fit.season)
        text = f"{label}: rho {fit.spearman_rho:+.2f} (p {fit.spearman_p:.2g})"
        ax.scatter(x[mask], y[mask], s=16, color=colour, alpha=0.8, edgecolors="none")
        if not result.offset_area:
            ax.plot(grid, np.exp(fit.intercept + fit.slope * grid), color=colour, linewidth=1.2, label=text)
        else:  # intercept is a log density: draw the curve per m^2 of the median quadrat
            ax.plot(grid, np.exp(fit.intercept + fit.slope * grid), color=colour, linewidth=1.2, label=text)
    ax.set_xlabel(_AXIS_LABELS.get(result.covariate, result.covariate))
    ax.set_ylabel(_AXIS_LABELS.get(result.value, result.value))
    ax.set_title(f"{result.value.replace('_', ' ')} along {result.covariate.replace('_', ' ')}, "
                 "with the fitted log-linear curve per season", fontsize="medium")
    ax.set_ylim(bottom=0)
    ax.legend(fontsize="x-small", loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    return figure


def plot_proportions(result: ProportionEstimate, ax: Axes | None = None) -> Figure:
    """Per-quadrat shares with Wilson intervals, and the pooled share with its interval."""
    figure, ax = _figure(ax)
    shares = np.array([q.share for q in result.per_quadrat])
    lower = np.array([q.lower for q in result.per_quadrat])
    upper = np.array([q.upper for q in result.per_quadrat])
    position = np.arange(shares.size)
    ax.errorbar(position, shares, yerr=[shares - lower, upper - shares], fmt="o", capsize=2,
                label="quadrat (Wilson)")
    ax.axhspan(result.lower, result.upper, alpha=0.2, color="C1",
               label=f"pooled {result.confidence:.0%} interval (design effect {result.design_effect:.1f})")
    ax.axhline(result.share, color="C1")
    ax.set_xticks(position, [q.station for q in result.per_quadrat], rotation=90, fontsize="x-small")
    ax.set_ylim(0, 1)
    ax.set_xlabel("quadrat")
    ax.set_ylabel(measures.get(result.measure).estimate_unit)  # "share of grid cells occupied", ...
    ax.legend(fontsize="small")
    return figure


def plot_season_comparison(result: SeasonComparison, ax: Axes | None = None) -> Figure:
    """Each permanent quadrat's value in the second season against the first, with the 1:1 line.

    Points hugging a line show the between-season correlation that makes paired comparisons of
    permanent quadrats more powerful than comparing two independent samples.
    """
    figure, ax = _figure(ax, size=(4.5, 4.5))
    first = np.array([p[1] for p in result.pairs])
    second = np.array([p[2] for p in result.pairs])
    top = max(first.max(), second.max())
    bottom = min(first.min(), second.min(), 0.0)
    ax.plot([bottom, top], [bottom, top], color="grey", linestyle="--", linewidth=0.8, label="no change")
    ax.scatter(first, second, s=16, label=f"stations (r = {result.correlation:.2f})")
    ax.set_xlabel(f"{result.value}, {result.first_season}")
    ax.set_ylabel(f"{result.value}, {result.second_season}")
    ax.set_title(
        f"Change {result.mean_difference:+.3g} (paired p = {result.paired_p:.3g}; "
        f"unpaired p = {result.welch_p:.3g})",
        fontsize="small",
    )
    ax.legend(fontsize="small")
    return figure
