"""Figures: data drawn equal the fitted numbers; PNGs read back at the right size and not blank."""

from __future__ import annotations

import io
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
from lxml import etree
from matplotlib import colormaps
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import to_hex
from matplotlib.figure import Figure
from PIL import Image
from report_testdata import fit_trend, simulate_programme, station_changes

from monitor import columns as cols
from monitor.report.figures import (
    EventMark,
    change_limit,
    figure_png,
    figure_svg,
    plot_gradient,
    plot_indices,
    plot_station_map,
)


@pytest.fixture(scope="module")
def programme():
    counts, stations, sites = simulate_programme(np.random.default_rng(11), annual_change=-0.05)
    return counts, stations, sites, fit_trend(counts)


def _line(fig, gid):
    lines = [ln for ax in fig.axes for ln in ax.get_lines() if ln.get_gid() == gid]
    assert len(lines) == 1
    return lines[0]


def test_index_points_equal_fitted_indices(programme):
    counts, _stations, _sites, result = programme
    fig = plot_indices(result.indices, result.fitted_trend, marks=[EventMark(2018, "grazing")])
    points = _line(fig, "indices")
    expected = result.indices.sort_values(cols.YEAR)
    np.testing.assert_array_equal(points.get_xdata(), expected[cols.YEAR].to_numpy(float))
    np.testing.assert_array_equal(points.get_ydata(), expected["index"].to_numpy(float))
    trend = _line(fig, "trend")
    np.testing.assert_array_equal(trend.get_ydata(), result.fitted_trend.sort_values(cols.YEAR)["fit"].to_numpy(float))


def test_index_points_follow_statsmodels_year_factor_fit(programme):
    # Independent check of what is drawn: exp(year coefficients) of a statsmodels 0.14 Poisson GLM with
    # year as a factor and station fixed effects (the stand-in's model; with the project's GLMM the points
    # are the engine's indices and this check only holds approximately, hence the loose tolerance).
    import statsmodels.api as sm
    import statsmodels.formula.api as smf

    counts, _stations, _sites, result = programme
    fit = smf.glm("count ~ C(year) + C(station)", counts, family=sm.families.Poisson()).fit()
    expected = [1.0] + [float(np.exp(fit.params[f"C(year)[T.{y}]"])) for y in range(2016, 2026)]
    drawn = _line(plot_indices(result.indices, result.fitted_trend), "indices").get_ydata()
    np.testing.assert_allclose(drawn, expected, rtol=0.05)


def test_png_size_and_not_blank(programme):
    _counts, _stations, _sites, result = programme
    fig = plot_indices(result.indices, result.fitted_trend)
    png = figure_png(fig, dpi=100)
    # PNG signature and IHDR size (W3C PNG specification, 2nd ed., sections 5.2 and 11.2.2), read by Pillow
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    image = Image.open(io.BytesIO(png)).convert("L")
    width, height = fig.get_size_inches() * 100
    assert image.size == (round(width), round(height))
    pixels = np.asarray(image, float)
    assert (pixels < 200).mean() > 0.01      # some ink
    assert pixels.std() > 10                 # not a flat image
    empty = Figure(figsize=fig.get_size_inches())
    FigureCanvasAgg(empty)
    blank = Image.open(io.BytesIO(figure_png(empty, dpi=100))).convert("L")
    assert np.asarray(blank, float).std() < 1  # the same measure on an empty figure says blank


def test_map_colours_and_shapes(programme):
    counts, stations, sites, _result = programme
    changes = station_changes(counts)
    changes.loc[0, "annual_change"] = np.nan
    fig = plot_station_map(stations, changes, sites, limit=0.1)
    fig.canvas.draw()  # colours are mapped from the data at draw time
    ax = fig.axes[0]
    collections = [c for c in ax.collections if len(c.get_offsets())]
    n_total = sum(len(c.get_offsets()) for c in collections)
    assert n_total == len(stations)
    # ColorBrewer PuOr (11 classes) runs from #7f3b08 (dark orange) to #2d004b (dark purple)
    # (Harrower & Brewer 2003; from memory), a colour-blind-safe diverging scheme.
    cmap = colormaps["PuOr"]
    assert to_hex(cmap(0.0)) == "#7f3b08" and to_hex(cmap(1.0)) == "#2d004b"
    merged = stations.merge(changes, on=cols.STATION)
    # every station's face colour is the palette's colour of its change, clipped to +-10 %/yr and
    # scaled linearly around 0 (matplotlib TwoSlopeNorm with vcenter 0)
    checked = 0
    for collection in collections:
        faces = collection.get_facecolors()
        if len(faces) != len(collection.get_offsets()):
            continue  # hollow markers (no own trend) have no face colour
        for (x, y), face in zip(collection.get_offsets(), faces, strict=True):
            row = merged[(merged["x"] == x) & (merged["y"] == y)].iloc[0]
            change = row["annual_change"]
            np.testing.assert_allclose(face, cmap(0.5 + np.clip(change, -0.1, 0.1) / 0.2), atol=1e-6)
            checked += 1
    assert checked == int(merged["annual_change"].notna().sum())
    # the legend names the shapes, so the sign does not rely on colour alone
    labels = [t.get_text() for legend in fig.legends for t in legend.get_texts()]
    assert {"Station falling", "Station rising", "Too few years"} <= set(labels)


def test_change_limit_is_symmetric_quantile():
    # 95th percentile of |change| by numpy 2.x quantile (linear interpolation), clipped to [5 %, 50 %]
    values = np.linspace(-0.2, 0.1, 101)
    assert change_limit(values) == pytest.approx(np.quantile(np.abs(values), 0.95))
    assert change_limit([0.001, -0.002]) == 0.05
    assert change_limit([np.nan]) == 0.05


def test_gradient_points_are_the_data():
    data = pd.DataFrame({"gradient": np.arange(20.0), "value": np.arange(20.0) ** 0.5})
    fig = plot_gradient(data, gradient_label="Distance (m)", value_label="Count")
    points = _line(fig, "gradient_points")
    np.testing.assert_array_equal(points.get_ydata(), data["value"].to_numpy())
    means = _line(fig, "gradient_means")
    # 4 equal-count bins of 5 points (numpy.array_split): mean of the first five x values is 2.0
    assert means.get_xdata()[0] == 2.0


def test_svg_is_wellformed_and_reproducible(programme):
    _counts, _stations, _sites, result = programme
    svg1 = figure_svg(plot_indices(result.indices, result.fitted_trend))
    svg2 = figure_svg(plot_indices(result.indices, result.fitted_trend))
    root = etree.fromstring(svg1)  # lxml: well-formed XML
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert svg1 == svg2


def test_figures_do_not_use_pyplot_or_database_libraries():
    # Style rule 9 (no global pyplot state) and the pure-stage import rule (HELPER_RULES).
    code = (
        "import sys, numpy as np, pandas as pd\n"
        "from monitor.report import plot_indices, build_report_context, render_report\n"
        "ix = pd.DataFrame({'year': [1, 2], 'index': [1.0, 0.9], 'lower': [1.0, 0.8], 'upper': [1.0, 1.0]})\n"
        "plot_indices(ix)\n"
        "bad = [m for m in ('matplotlib.pyplot', 'sqlalchemy', 'sqlmodel', 'alembic', 'click') if m in sys.modules]\n"
        "print(bad)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
