"""Figures: plot_x(result, ax=None) -> Figure with no global pyplot state."""

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
import pytest
from matplotlib.figure import Figure

from monitor import columns as C
from monitor.estimate import (
    compare_seasons,
    estimate_gradient,
    estimate_pin_cover,
    plot_gradient,
    plot_proportions,
    plot_running_mean,
    plot_season_comparison,
    running_mean,
)


@pytest.fixture
def results():
    rng = np.random.default_rng(12)
    distance = np.tile(np.linspace(0, 100, 15), 2)
    year = np.repeat([2023, 2024], 15)
    data = pd.DataFrame({C.DISTANCE: distance, C.YEAR: year, C.COUNT: rng.poisson(np.exp(2 - 0.02 * distance))})
    pins = pd.DataFrame({C.STATION: [f"q{i}" for i in range(12)], C.HITS: rng.integers(0, 11, 12), C.PINS: 10})
    return {
        plot_gradient: estimate_gradient(data),
        plot_running_mean: running_mean(rng.poisson(5, 20), precision=0.2),
        plot_proportions: estimate_pin_cover(pins),
        plot_season_comparison: compare_seasons(
            pd.DataFrame({C.STATION: [f"q{i}" for i in range(10)] * 2, C.YEAR: np.repeat([2023, 2024], 10),
                          C.COUNT: np.concatenate([counts := rng.poisson(8, 10), counts + rng.poisson(2, 10)])})
        ),
    }


def test_figures_are_returned_without_pyplot_state(results, tmp_path):
    before = plt.get_fignums()
    for plot, result in results.items():
        figure = plot(result)
        assert isinstance(figure, Figure)
        ax = figure.axes[0]
        assert ax.get_xlabel() and ax.get_ylabel()
        assert ax.lines or ax.collections
        figure.savefig(tmp_path / f"{plot.__name__}.png")
        assert (tmp_path / f"{plot.__name__}.png").stat().st_size > 1000
    assert plt.get_fignums() == before


def test_gradient_figure_draws_one_curve_per_season(results):
    figure = plot_gradient(results[plot_gradient])
    labels = [t.get_text() for t in figure.axes[0].get_legend().get_texts()]
    assert len(labels) == 2 and labels[0].startswith("2023: rho ") and labels[1].startswith("2024: rho ")
    assert len(figure.axes[0].get_lines()) == 2  # one fitted curve per season


def test_figures_draw_into_a_given_axes(results):
    figure = Figure()
    axes = figure.subplots(1, 4)
    for ax, (plot, result) in zip(axes, results.items(), strict=True):
        assert plot(result, ax=ax) is figure
        assert ax.has_data()
