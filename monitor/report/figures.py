"""Report figures: functions ``plot_x(..., ax=None) -> Figure``.

No global pyplot state: figures are built with ``matplotlib.figure.Figure`` on
an Agg canvas, so they are safe in threads and in tests, and nothing needs
closing beyond dropping the reference.

Colours
-------
Stations are coloured with ColorBrewer's PuOr diverging scheme (orange = falling,
purple = rising), one of the schemes Brewer marks as colour-blind safe
(Harrower & Brewer 2003), and each station's marker shape also carries the sign
(down triangle = falling, up triangle = rising) so the map reads without colour.

References
----------
Harrower, M. and Brewer, C. A. (2003). ColorBrewer.org: an online tool for
selecting colour schemes for maps. The Cartographic Journal 40(1), 27-37.
"""

from __future__ import annotations

import base64
import io
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from matplotlib import rc_context
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import TwoSlopeNorm
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.ticker import FuncFormatter

from monitor import columns as C

CMAP = "PuOr"          # ColorBrewer diverging, colour-blind safe (Harrower & Brewer 2003)
POINT_COLOUR = "#1b1b1b"
TREND_COLOUR = "#3b6ea5"
BAND_COLOUR = "#9ebbd9"
EVENT_COLOUR = "#6b6b6b"
METHOD_COLOUR = "#b2182b"
NO_TREND_COLOUR = "#9a9a9a"

_SVG_RC = {
    "svg.fonttype": "path",     # text as outlines: no fonts needed, names cannot become markup
    "svg.hashsalt": "monitor",  # stable ids: the same figure gives the same SVG
}


@dataclass(frozen=True)
class EventMark:
    """A dated mark on an index plot: a management event or a change of method."""

    year: int
    label: str
    kind: str = "event"   # "event" or "method"


def new_figure(width: float = 6.4, height: float = 3.4) -> tuple[Figure, Axes]:
    """A figure with one axes on an Agg canvas, outside pyplot."""
    fig = Figure(figsize=(width, height), layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    return fig, ax


def _apply_rc(ax: Axes) -> None:
    for spine in ("top", "right"):
        ax.spines[spine].set_visible(False)
    ax.tick_params(labelsize=8)


def plot_indices(
    indices: pd.DataFrame,
    fitted_trend: pd.DataFrame | None = None,
    *,
    marks: Sequence[EventMark] = (),
    ylabel: str = "Index (first year = 1)",
    title: str | None = None,
    ax: Axes | None = None,
    reference: float | None = 1.0,
) -> Figure:
    """Yearly estimates (or indices) with 95 % intervals, the fitted trend line and its band.

    Parameters
    ----------
    indices : DataFrame
        Columns ``year``, ``index``, ``lower``, ``upper`` (index relative to the
        base year, base = 1), as ``TrendResult.indices``.
    fitted_trend : DataFrame, optional
        Columns ``year``, ``fit``, ``lower``, ``upper`` on the index scale, as
        ``TrendResult.fitted_trend``.
    marks : sequence of EventMark
        Management events (dotted grey) and method changes (dashed, labelled
        "method changed") drawn as vertical lines at their year.
    ylabel, title : str
    reference : float or None
        A grey line at this value (1 for indices); None for yearly estimates on the
        measure's own scale (``TrendResult.yearly`` and ``trend_line``, same columns).
    ax : Axes, optional
        Draw into this axes; a new figure otherwise.

    Returns
    -------
    Figure
        The yearly points are the Line2D with gid ``"indices"``; the trend line
        has gid ``"trend"``.

    Notes
    -----
    The index of year ``t`` is ``exp(beta_t - beta_base)`` from the year-as-factor
    model; the trend line is ``exp(b1 * (t - t_base))`` from the year-as-covariate
    model, with its Wald band (see ``monitor.trend``).
    """
    if ax is None:
        fig, ax = new_figure()
    else:
        fig = ax.figure
    _apply_rc(ax)
    handles = []
    if fitted_trend is not None and len(fitted_trend):
        ft = fitted_trend.sort_values(C.YEAR)
        ax.fill_between(ft[C.YEAR].to_numpy(float), ft["lower"].to_numpy(float), ft["upper"].to_numpy(float),
                        color=BAND_COLOUR, alpha=0.45, linewidth=0, label="Trend 95% band")
        (trend_line,) = ax.plot(ft[C.YEAR].to_numpy(float), ft["fit"].to_numpy(float), color=TREND_COLOUR,
                                linewidth=2, label="Fitted trend", gid="trend")
        handles.append(trend_line)
        handles.append(ax.collections[-1])
    ix = indices.sort_values(C.YEAR)
    years = ix[C.YEAR].to_numpy(float)
    ax.vlines(years, ix["lower"].to_numpy(float), ix["upper"].to_numpy(float), color=POINT_COLOUR,
              linewidth=1.1, label="95% interval")
    (points,) = ax.plot(years, ix["index"].to_numpy(float), linestyle="none", marker="o", markersize=4.5,
                        color=POINT_COLOUR, label="Yearly index", gid="indices")
    handles.insert(0, points)
    if reference is not None:
        ax.axhline(reference, color="#bbbbbb", linewidth=0.8, zorder=0)
    top = np.nanmax(np.r_[ix["upper"].to_numpy(float), ix["index"].to_numpy(float), 1.0 if reference is not None else 0.0,
                          fitted_trend["upper"].to_numpy(float) if fitted_trend is not None and len(fitted_trend)
                          else []])
    top = float(top) if math.isfinite(top) else 2.0
    ax.set_ylim(0, top * 1.18)
    # group marks by year so that several events in one year share one line and one label
    by_year: dict[tuple[int, str], list[str]] = {}
    for mark in marks:
        by_year.setdefault((int(mark.year), mark.kind), []).append(mark.label)
    seen_kinds = set()
    for (year, kind), labels in sorted(by_year.items()):
        if kind == "method":
            ax.axvline(year - 0.5, color=METHOD_COLOUR, linestyle="--", linewidth=1.2)
            text = "method changed"
        else:
            ax.axvline(year, color=EVENT_COLOUR, linestyle=":", linewidth=1.2)
            text = ", ".join(sorted(set(labels)))
        ax.annotate(text, xy=(year - 0.5 if kind == "method" else year, 1.0), xycoords=("data", "axes fraction"),
                    xytext=(2, -2), textcoords="offset points", va="top", ha="left", fontsize=7,
                    color=METHOD_COLOUR if kind == "method" else EVENT_COLOUR, rotation=90)
        seen_kinds.add(kind)
    if "event" in seen_kinds:
        handles.append(Line2D([], [], color=EVENT_COLOUR, linestyle=":", label="Management event"))
    if "method" in seen_kinds:
        handles.append(Line2D([], [], color=METHOD_COLOUR, linestyle="--", label="Method changed"))
    if len(years):
        span = years.max() - years.min()
        ax.set_xlim(years.min() - 0.6, years.max() + 0.6)
        step = 1 if span <= 12 else 2 if span <= 24 else 5
        ax.set_xticks(np.arange(int(years.min()), int(years.max()) + 1, step))
    ax.set_xlabel("Season")
    ax.set_ylabel(ylabel)
    if title:
        ax.set_title(title, loc="left")
    if ax is fig.axes[0] and len(fig.axes) == 1:
        fig.legend(handles=handles, loc="outside lower center", ncol=3, frameon=False, fontsize=8)
    else:
        ax.legend(handles=handles, loc="best", frameon=False, fontsize=7)
    return fig


def _site_outlines(geometry) -> list[np.ndarray]:
    """Exterior and interior rings of a (multi)polygon as arrays of x, y."""
    from shapely.geometry import shape
    from shapely.geometry.base import BaseGeometry

    geom = geometry if isinstance(geometry, BaseGeometry) else shape(geometry)
    polygons = getattr(geom, "geoms", [geom])
    rings = []
    for polygon in polygons:
        if polygon.geom_type != "Polygon":
            continue
        rings.append(np.asarray(polygon.exterior.coords))
        rings.extend(np.asarray(r.coords) for r in polygon.interiors)
    return rings


def change_limit(changes: Iterable[float]) -> float:
    """Symmetric colour limit for station changes: the 95th percentile of ``|change|``, 5 %-50 % a year."""
    values = np.abs(np.asarray([c for c in changes if c is not None and np.isfinite(c)], float))
    if values.size == 0:
        return 0.05
    return float(np.clip(np.quantile(values, 0.95), 0.05, 0.5))


def plot_station_map(
    stations: pd.DataFrame,
    station_changes: pd.DataFrame | None = None,
    sites: Mapping[str, object] | None = None,
    *,
    limit: float | None = None,
    title: str | None = None,
    ax: Axes | None = None,
) -> Figure:
    """Map of stations coloured by each station's own annual change.

    Parameters
    ----------
    stations : DataFrame
        Columns ``station``, ``x``, ``y`` [m, projected CRS], optional ``site``.
    station_changes : DataFrame, optional
        Columns ``station``, ``annual_change`` [fraction per year, NaN when the
        station has too few years], as ``monitor.trend.station_changes``.
    sites : mapping of site code -> polygon, optional
        Shapely geometry or GeoJSON-like mapping in the same projected CRS;
        outlines are drawn and labelled.
    limit : float, optional
        Colour scale runs from ``-limit`` to ``+limit`` [fraction per year];
        default ``change_limit`` of the data.  Values beyond are drawn at the end colour.

    Returns
    -------
    Figure
        Down triangles for falling stations, up triangles for rising ones, hollow grey circles for
        stations in the model with too few years for their own trend, small grey crosses for stations
        where the species was never recorded (not in ``station_changes``), a colour bar in percent a
        year, a scale bar and a grid-north arrow.  Site names sit above their outlines, clear of the
        stations.
    """
    if ax is None:
        fig, ax = new_figure(4.4, 3.9)
    else:
        fig = ax.figure
    ax.set_aspect("equal", adjustable="datalim")
    for spine in ax.spines.values():
        spine.set_color("#bbbbbb")
    if sites:
        for code, geometry in sites.items():
            rings = _site_outlines(geometry)
            for ring in rings:
                ax.plot(ring[:, 0], ring[:, 1], color="#555555", linewidth=0.9, zorder=1)
            if rings:
                from shapely.geometry import shape
                from shapely.geometry.base import BaseGeometry

                geom = geometry if isinstance(geometry, BaseGeometry) else shape(geometry)
                minx, _miny, maxx, maxy = geom.bounds
                # above the outline's top edge, so no station marker sits under the label
                ax.annotate(str(code), ((minx + maxx) / 2, maxy), xytext=(0, 3), textcoords="offset points",
                            fontsize=7, color="#333333", ha="center", va="bottom", zorder=5,
                            bbox={"boxstyle": "round,pad=0.15", "facecolor": "white", "edgecolor": "none",
                                  "alpha": 0.85})
    frame = stations[[C.STATION, C.X, C.Y]].copy()
    if station_changes is not None and len(station_changes):
        in_model = frame[C.STATION].isin(set(station_changes[C.STATION]))
        frame = frame.merge(station_changes[[C.STATION, "annual_change"]], on=C.STATION, how="left")
    else:
        in_model = pd.Series(True, index=frame.index)
        frame["annual_change"] = np.nan
    in_model = in_model.to_numpy(bool)
    change = frame["annual_change"].to_numpy(float)
    lim = limit if limit is not None else change_limit(change)
    norm = TwoSlopeNorm(vcenter=0.0, vmin=-lim, vmax=lim)
    has = np.isfinite(change)
    clipped = np.clip(change, -lim, lim)
    falling = has & (change < 0)
    rising = has & (change >= 0)
    mappable = None
    legend = []
    size = 34 if len(frame) <= 150 else 18 if len(frame) <= 600 else 9
    for mask, marker, label in ((falling, "v", "Station falling"), (rising, "^", "Station rising")):
        if mask.any():
            mappable = ax.scatter(frame.loc[mask, C.X], frame.loc[mask, C.Y], c=clipped[mask], cmap=CMAP,
                                  norm=norm, marker=marker, s=size, edgecolors="#222222", linewidths=0.4,
                                  zorder=3)
        legend.append(Line2D([], [], linestyle="none", marker=marker, markerfacecolor="#dddddd",
                             markeredgecolor="#222222", label=label))
    few = ~has & in_model
    never = ~has & ~in_model
    if few.any():
        ax.scatter(frame.loc[few, C.X], frame.loc[few, C.Y], facecolors="none", edgecolors=NO_TREND_COLOUR,
                   marker="o", s=size * 0.7, linewidths=0.8, zorder=3)
        legend.append(Line2D([], [], linestyle="none", marker="o", markerfacecolor="none",
                             markeredgecolor=NO_TREND_COLOUR, label="Too few years"))
    if never.any():
        ax.scatter(frame.loc[never, C.X], frame.loc[never, C.Y], color="#b0b0b0", marker="x", s=size * 0.45,
                   linewidths=0.7, zorder=2)
        legend.append(Line2D([], [], linestyle="none", marker="x", color="#b0b0b0", label="Never recorded here"))
    if mappable is None:
        from matplotlib.cm import ScalarMappable

        mappable = ScalarMappable(norm=norm, cmap=CMAP)
    bar = fig.colorbar(mappable, ax=ax, shrink=0.85, pad=0.02)
    bar.set_label("Station's own change (% a year)", fontsize=8)
    bar.ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v * 100:+.0f}" if v else "0"))
    bar.ax.tick_params(labelsize=7)
    fig.legend(handles=legend, loc="outside lower center", ncol=2 if len(legend) > 3 else 3, frameon=False,
               fontsize=7.5, handletextpad=0.2, columnspacing=0.8)
    ax.tick_params(labelsize=7)
    ax.set_xlabel("Easting (m)", fontsize=8)
    ax.set_ylabel("Northing (m)", fontsize=8)
    ax.ticklabel_format(useOffset=False, style="plain")
    # few, unrotated easting labels that cannot run together
    from matplotlib.ticker import MaxNLocator

    ax.xaxis.set_major_locator(MaxNLocator(nbins=3))
    ax.yaxis.set_major_locator(MaxNLocator(nbins=4))
    _scale_bar(ax)
    _north_arrow(ax)
    if title:
        ax.set_title(title, loc="left")
    return fig


def nice_length(span: float) -> float:
    """A round scale-bar length near a quarter of ``span`` [m]: 1, 2 or 5 times a power of ten."""
    target = max(span / 4.0, 1e-9)
    power = 10 ** math.floor(math.log10(target))
    for step in (5, 2, 1):
        if step * power <= target:
            return float(step * power)
    return float(power)


def _scale_bar(ax: Axes) -> None:
    """A scale bar in the lower right corner, its length a round number of metres (or km)."""
    from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar

    # the limits once the equal aspect has widened them (for the box as it stands, before the layout: the bar
    # is drawn in data units, so it is true whatever the final box; only its round length is chosen here).
    # Not a full draw of the figure: that solved the layout and drew everything once more than needed.
    ax.apply_aspect()
    x0, x1 = ax.get_xlim()
    length = nice_length(abs(x1 - x0))
    label = f"{length / 1000:g} km" if length >= 1000 else f"{length:g} m"
    bar = AnchoredSizeBar(ax.transData, length, label, loc="lower right", pad=0.4, borderpad=0.5, sep=3,
                          frameon=True, size_vertical=0, fontproperties={"size": 7})
    bar.patch.set_facecolor("white")
    bar.patch.set_alpha(0.85)
    bar.patch.set_edgecolor("none")
    ax.add_artist(bar)


def _north_arrow(ax: Axes) -> None:
    """An arrow to grid north (up the northing axis) in the upper left corner."""
    ax.annotate("N", xy=(0.07, 0.95), xytext=(0.07, 0.80), xycoords="axes fraction", textcoords="axes fraction",
                ha="center", va="top", fontsize=8, fontweight="bold", zorder=6,
                arrowprops={"arrowstyle": "-|>", "color": "#222222", "linewidth": 1.0})


def plot_gradient(
    data: pd.DataFrame,
    *,
    gradient_label: str,
    value_label: str,
    title: str | None = None,
    ax: Axes | None = None,
) -> Figure:
    """Abundance against a gradient for one season, with the mean in equal-count bins.

    Parameters
    ----------
    data : DataFrame
        Columns ``gradient`` (distance along a transect [m], soil moisture, ...)
        and ``value`` (the measure at each station this season).
    gradient_label, value_label : str
        Axis labels with units.

    Returns
    -------
    Figure
        Points have gid ``"gradient_points"``; bin means gid ``"gradient_means"``.
    """
    if ax is None:
        fig, ax = new_figure(4.4, 3.3)
    else:
        fig = ax.figure
    _apply_rc(ax)
    frame = data[["gradient", "value"]].dropna().sort_values("gradient")
    x = frame["gradient"].to_numpy(float)
    y = frame["value"].to_numpy(float)
    ax.plot(x, y, linestyle="none", marker="o", markersize=3.5, color="#555555", alpha=0.6,
            label="Station", gid="gradient_points")
    n_bins = int(min(8, max(1, len(x) // 5)))
    if len(x) >= 10:
        chunks = np.array_split(np.arange(len(x)), n_bins)
        mx = [x[c].mean() for c in chunks]
        my = [y[c].mean() for c in chunks]
        ax.plot(mx, my, color=TREND_COLOUR, linewidth=2, marker="s", markersize=4,
                label=f"Mean in {n_bins} equal-count bins", gid="gradient_means")
    ax.set_xlabel(gradient_label)
    ax.set_ylabel(value_label)
    ax.set_ylim(bottom=0)
    if title:
        ax.set_title(title, loc="left")
    ax.legend(loc="upper right", frameon=False)
    return fig


def figure_png(fig: Figure, dpi: int = 130) -> bytes:
    """PNG bytes of a figure (white background, no metadata timestamp)."""
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, facecolor="white", metadata={"Software": None})
    return buffer.getvalue()


def figure_svg(fig: Figure) -> bytes:
    """SVG bytes of a figure, text as paths, without a date stamp."""
    buffer = io.BytesIO()
    with rc_context(_SVG_RC):
        fig.savefig(buffer, format="svg", facecolor="white", metadata={"Date": None})
    return buffer.getvalue()


def data_uri(png: bytes) -> str:
    """A ``data:image/png;base64,...`` URI for embedding."""
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def photo_thumbnail(data: bytes, width: int = 480) -> str:
    """A photo as a small JPEG data URI for the report page (Pillow, which matplotlib brings).

    Raises ValueError when the bytes are not an image Pillow reads.
    """
    import io as _io

    from PIL import Image, ImageOps, UnidentifiedImageError

    try:
        image = Image.open(_io.BytesIO(data))
        image = ImageOps.exif_transpose(image).convert("RGB")
    except (UnidentifiedImageError, OSError) as exc:
        raise ValueError(f"not an image ({exc})") from None
    if image.width > width:
        image = image.resize((width, max(1, round(image.height * width / image.width))))
    out = _io.BytesIO()
    image.save(out, format="JPEG", quality=82)
    return "data:image/jpeg;base64," + base64.b64encode(out.getvalue()).decode("ascii")
