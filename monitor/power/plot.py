"""Figures of power studies (no global pyplot state)."""

from __future__ import annotations

from collections.abc import Sequence

from matplotlib.axes import Axes
from matplotlib.figure import Figure

from monitor.power.study import PowerResult


def plot_power(results: Sequence[PowerResult], ax: Axes | None = None, target: float = 0.8) -> Figure:
    """Simulated power against the number of stations, one line per number of survey years.

    Error bars are +-2 Monte-Carlo standard errors (tables print +-1); the dashed line marks the
    target power.  Where the model has year-to-year variation, a dotted line of each colour marks
    the power that no number of stations can exceed over that many years (the approximation's
    ceiling, ``Approximation.ceiling``): only more years lift it.  Designs that differ in more than
    stations and years should be plotted separately.

    Parameters
    ----------
    results : sequence of PowerResult
        From :func:`monitor.power.compare_designs` (e.g. over :func:`monitor.power.design_grid`).
    ax : matplotlib Axes, optional
        Draw here; a new Figure is made when omitted.
    target : float
        Power drawn as the horizontal reference line.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if ax is None:
        figure = Figure(figsize=(6.0, 4.0))
        ax = figure.add_subplot(1, 1, 1)
    else:
        figure = ax.get_figure()
    by_years: dict[int, list[PowerResult]] = {}
    for r in results:
        by_years.setdefault(r.design.n_years, []).append(r)
    for years in sorted(by_years):
        group = sorted(by_years[years], key=lambda r: r.design.n_stations)
        x = [r.design.n_stations for r in group]
        y = [r.power for r in group]
        err = [2 * r.power_se for r in group]
        bars = ax.errorbar(x, y, yerr=err, marker="o", capsize=3, label=f"{years} years")
        ceiling = next((r.approximation.ceiling for r in group if r.approximation is not None), None)
        if ceiling is not None and ceiling < 0.999:
            ax.axhline(ceiling, linestyle=":", linewidth=1.2, color=bars.lines[0].get_color(),
                       label=f"{years} years, unlimited stations: {ceiling:.2f}")
    ax.axhline(target, linestyle="--", color="0.4", linewidth=1, label=f"{target:.0%} power")
    ax.set_ylim(0, 1.02)
    ax.set_xlabel("Number of stations")
    ax.set_ylabel("Power (simulated; bars ±2 Monte-Carlo SE)")
    if results:
        s = results[0].scenario
        ax.set_title(f"Power to detect {s.annual_change:+.1%} a year ({s.side}, alpha {s.alpha:g})", fontsize=10)
    ax.legend(loc="best", fontsize=8)
    return figure
