r"""Where permanent quadrats go: random, stratified, balanced, systematic and transect designs.

All coordinates are projected metres.  Every function that draws takes ``rng`` (a numpy
Generator or an integer seed) and returns a :class:`~monitor.design._common.Placement`
carrying the integer ``seed`` that reproduces it (pass it back as ``rng``).

Methods
-------
* Simple random: easting and northing are drawn as random coordinates on a grid of
  resolution ``resolution`` m over the site's bounding box, and a point is kept when its
  quadrat lies wholly inside the site and outside every exclusion zone and it is at least
  ``min_separation`` m from every station already kept.  Each location is thus equally
  likely (points are never "thrown").
* Stratified random: :func:`allocate` splits ``n`` among strata (proportional to area,
  equal, or Neyman :math:`n_h = n A_h S_h / \sum_k A_k S_k`), then simple random within each.
* Balanced Acceptance Sampling (BAS): a random-start Halton sequence in bases 2 and 3 is
  mapped onto the bounding box and points falling inside the usable area are accepted in
  sequence order.  The order is kept: the first ``m`` stations of any BAS sample are
  themselves spatially balanced, so extra stations can be added later
  (:func:`extend_balanced`) without losing the balance.
* Systematic grid: a square grid of ``spacing`` m with a uniformly random start.
* Transect: stations every ``spacing`` m along a line (from a start point and compass
  bearing, or a drawn line), after a random first offset; continuous (contiguous quadrats)
  or interrupted, line or belt of a set width, each with its distance along.

References
----------
Robertson, B. L., Brown, J. A., McDonald, T. and Jaksons, P. (2013). BAS: Balanced
Acceptance Sampling of natural resources. Biometrics 69:776-784.
Cochran, W. G. (1977). Sampling Techniques, 3rd ed. Wiley. Chapter 5 (stratified random
sampling, optimum allocation).
Neyman, J. (1934). On the two different aspects of the representative method. Journal of
the Royal Statistical Society 97:558-625.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping

import numpy as np
import pandas as pd
import shapely
from shapely.geometry import LineString
from shapely.geometry.base import BaseGeometry

from monitor import columns as C
from monitor.design._common import (
    Placement,
    RngLike,
    derive_rng,
    few_stations,
    frame,
    quadrat_fits,
    quadrat_vs_spacing,
    station_codes,
    usable_area,
)
from monitor.design.halton import halton
from monitor.errors import DesignError, Diagnostic

ALLOCATIONS = ("proportional", "equal", "neyman")

#: random-start Halton indices are drawn from [0, HALTON_START_MAX) (Robertson et al. 2013 use a
#: large random integer per dimension; the bound here is ours)
HALTON_START_MAX = 10**7


def _check_n(n: int) -> int:
    if int(n) != n or n < 1:
        raise DesignError(f"number of stations must be a positive whole number, got {n!r}")
    return int(n)


def _separation_filter(cx: np.ndarray, cy: np.ndarray, kept_x: list[float], kept_y: list[float],
                       min_sep: float, limit: int) -> list[int]:
    """Indices of candidates kept in order, each >= min_sep from all kept before (and distinct)."""
    chosen: list[int] = []
    kx = np.array(kept_x, dtype=float)
    ky = np.array(kept_y, dtype=float)
    bufx = list(kx)
    bufy = list(ky)
    for i in range(len(cx)):
        if len(chosen) >= limit:
            break
        if bufx:
            d2 = (np.asarray(bufx) - cx[i]) ** 2 + (np.asarray(bufy) - cy[i]) ** 2
            if min_sep > 0 and np.any(d2 < min_sep**2):
                continue
            if min_sep <= 0 and np.any(d2 == 0.0):
                continue
        chosen.append(i)
        bufx.append(float(cx[i]))
        bufy.append(float(cy[i]))
    return chosen


def _simple_random_xy(area: BaseGeometry, n: int, gen: np.random.Generator, *, resolution: float,
                      min_separation: float, width: float | None, length: float | None,
                      existing: tuple[list[float], list[float]] = ([], []),
                      max_candidates: int | None = None) -> tuple[np.ndarray, np.ndarray, int]:
    xmin, ymin, xmax, ymax = area.bounds
    nx = int(math.floor((xmax - xmin) / resolution)) + 1
    ny = int(math.floor((ymax - ymin) / resolution)) + 1
    frac = max(area.area / max((xmax - xmin) * (ymax - ymin), 1e-12), 1e-6)
    budget = max_candidates or max(2000, 500 * n)
    xs: list[float] = []
    ys: list[float] = []
    drawn = 0
    kept_x = list(existing[0])
    kept_y = list(existing[1])
    while len(xs) < n and drawn < budget:
        batch = int(min(budget - drawn, max(64, math.ceil(2 * (n - len(xs)) / frac))))
        ix = gen.integers(0, nx, size=batch)
        iy = gen.integers(0, ny, size=batch)
        drawn += batch
        cx = xmin + ix * resolution
        cy = ymin + iy * resolution
        ok = quadrat_fits(area, cx, cy, width, length)
        cx, cy = cx[ok], cy[ok]
        chosen = _separation_filter(cx, cy, kept_x, kept_y, min_separation, n - len(xs))
        for i in chosen:
            xs.append(float(cx[i]))
            ys.append(float(cy[i]))
            kept_x.append(float(cx[i]))
            kept_y.append(float(cy[i]))
    return np.array(xs), np.array(ys), drawn


def _placement_diagnostics(n_wanted: int, n_got: int, width: float | None, length: float | None,
                           min_separation: float | None, what: str = "minimum separation") -> list[Diagnostic]:
    diags: list[Diagnostic] = []
    if n_got < n_wanted:
        diags.append(Diagnostic(
            "could_not_place",
            f"only {n_got} of {n_wanted} stations could be placed: the usable area is too small "
            f"for the {what} and quadrat size"))
    diags += few_stations(n_got)
    if min_separation:
        diags += quadrat_vs_spacing(width, length, min_separation, what)
    return diags


def simple_random(
    site: BaseGeometry,
    n: int,
    rng: RngLike,
    *,
    exclusions: Iterable[BaseGeometry] = (),
    min_separation: float = 0.0,
    quadrat_width: float | None = None,
    quadrat_length: float | None = None,
    resolution: float = 0.1,
    prefix: str = "Q",
    first_number: int = 1,
) -> Placement:
    r"""Simple random placement of ``n`` quadrat centres inside a site.

    Parameters
    ----------
    site : shapely Polygon or MultiPolygon
        Site boundary in projected metres.
    n : int
        Stations wanted.
    rng : numpy.random.Generator or int
        Source of randomness, or the seed stored with an earlier placement.
    exclusions : iterable of polygons
        Areas where no quadrat may fall (paths, water, buildings).
    min_separation : float
        Minimum distance between station centres [m].
    quadrat_width, quadrat_length : float, optional
        Quadrat sides [m]; the whole quadrat must lie in the usable area.
    resolution : float
        Grid of candidate coordinates [m].
    prefix, first_number : str, int
        Station codes are ``prefix`` + zero-padded running number.

    Returns
    -------
    Placement
        ``method="random"``; diagnostics when fewer than ``n`` could be placed, fewer than 10
        stations result, or quadrats are not smaller than ``min_separation``.

    Notes
    -----
    Candidate coordinates :math:`(x_{min} + i r, y_{min} + j r)` with :math:`i, j` uniform
    integers; a candidate is accepted when its quadrat lies in
    :math:`S \setminus \bigcup E` and is at least ``min_separation`` from every accepted
    centre (sequential inhibition; with separation 0 this is uniform random sampling of the
    grid nodes without replacement).

    References
    ----------
    Cochran, W. G. (1977). Sampling Techniques, 3rd ed., chapter 2.
    """
    n = _check_n(n)
    if resolution <= 0:
        raise DesignError("resolution must be positive")
    area = usable_area(site, exclusions)
    seed, gen = derive_rng(rng)
    x, y, drawn = _simple_random_xy(area, n, gen, resolution=resolution, min_separation=min_separation,
                                    width=quadrat_width, length=quadrat_length)
    df = frame(station_codes(prefix, len(x), first_number), x, y, C.PLACEMENT_RANDOM,
               quadrat_width, quadrat_length)
    diags = _placement_diagnostics(n, len(x), quadrat_width, quadrat_length, min_separation)
    return Placement(C.PLACEMENT_RANDOM, seed, df,
                     {"n": n, "min_separation": min_separation, "resolution": resolution,
                      "candidates_drawn": drawn}, tuple(diags))


def allocate(sizes: Mapping[str, float], n: int, method: str = "proportional",
             pilot_sd: Mapping[str, float] | None = None, minimum: int = 0) -> dict[str, int]:
    r"""Split ``n`` stations among strata.

    Parameters
    ----------
    sizes : mapping stratum -> area [m^2] (or any size measure :math:`A_h`)
    n : int
        Total stations.
    method : {"proportional", "equal", "neyman"}
    pilot_sd : mapping stratum -> standard deviation :math:`S_h` from a pilot survey
        Required for Neyman allocation.
    minimum : int
        Each stratum gets at least this many (taken from the largest shares).

    Returns
    -------
    dict stratum -> whole number of stations, summing to ``n``.

    Notes
    -----
    Target shares: proportional :math:`n_h^* = n A_h / \sum A_k`; equal :math:`n/H`;
    Neyman :math:`n_h^* = n A_h S_h / \sum_k A_k S_k`, which minimises the variance of the
    stratified mean for a fixed total.  Shares are rounded by largest remainders so they sum
    to ``n``.

    References
    ----------
    Neyman, J. (1934). JRSS 97:558-625.  Cochran, W. G. (1977). Sampling Techniques, 3rd ed.,
    section 5.5 (optimum allocation).
    """
    n = _check_n(n)
    if method not in ALLOCATIONS:
        raise DesignError(f"allocation must be one of {', '.join(ALLOCATIONS)}, got {method!r}")
    keys = list(sizes)
    if not keys:
        raise DesignError("no strata given")
    a = np.array([float(sizes[k]) for k in keys])
    if np.any(a <= 0):
        raise DesignError("every stratum must have a positive size")
    if method == "proportional":
        w = a
    elif method == "equal":
        w = np.ones_like(a)
    else:
        if pilot_sd is None or any(k not in pilot_sd for k in keys):
            missing = [k for k in keys if pilot_sd is None or k not in pilot_sd]
            raise DesignError(f"Neyman allocation needs a pilot standard deviation for stratum {missing[0]}")
        s = np.array([float(pilot_sd[k]) for k in keys])
        if np.any(s < 0) or not np.any(s > 0):
            raise DesignError("pilot standard deviations must be non-negative and not all zero")
        w = a * s
    if minimum * len(keys) > n:
        raise DesignError(f"{n} stations cannot give {minimum} to each of {len(keys)} strata")
    share = n * w / w.sum()
    base = np.floor(share).astype(int)
    rest = n - base.sum()
    order = np.argsort(-(share - base), kind="stable")
    base[order[:rest]] += 1
    # lift strata below the minimum, taking from the strata with the most stations
    while minimum and np.any(base < minimum):
        i = int(np.argmin(base))
        j = int(np.argmax(base))
        base[i] += 1
        base[j] -= 1
    return {k: int(v) for k, v in zip(keys, base, strict=True)}


def stratified_random(
    strata: Mapping[str, BaseGeometry],
    n: int,
    rng: RngLike,
    *,
    allocation: str = "proportional",
    pilot_sd: Mapping[str, float] | None = None,
    exclusions: Iterable[BaseGeometry] = (),
    min_separation: float = 0.0,
    quadrat_width: float | None = None,
    quadrat_length: float | None = None,
    resolution: float = 0.1,
    prefix: str = "Q",
    first_number: int = 1,
) -> Placement:
    r"""Stratified random placement: :func:`allocate`, then :func:`simple_random` per stratum.

    Parameters
    ----------
    strata : mapping stratum code -> polygon [m]
    n : int
        Total stations.
    rng : numpy.random.Generator or int
    allocation : {"proportional", "equal", "neyman"}
        Sizes are the usable stratum areas (exclusions removed).
    pilot_sd : mapping stratum -> pilot standard deviation, for Neyman allocation.
    exclusions, min_separation, quadrat_width, quadrat_length, resolution, prefix, first_number
        As for :func:`simple_random`.

    Returns
    -------
    Placement
        ``method="stratified"``, with a ``stratum`` column and ``params["allocation"]``.

    Notes
    -----
    Neyman allocation :math:`n_h = n A_h S_h / \sum_k A_k S_k`; a warning is recorded for
    any stratum given fewer than 2 stations, since its variance cannot then be estimated.

    References
    ----------
    Cochran, W. G. (1977). Sampling Techniques, 3rd ed., chapter 5.
    """
    n = _check_n(n)
    if not strata:
        raise DesignError("no strata given")
    excl = list(exclusions or ())
    areas = {k: usable_area(g, excl, f"stratum {k} polygon") for k, g in strata.items()}
    alloc = allocate({k: a.area for k, a in areas.items()}, n, allocation, pilot_sd)
    seed, gen = derive_rng(rng)
    frames = []
    diags: list[Diagnostic] = []
    number = first_number
    placed_x: list[float] = []
    placed_y: list[float] = []
    width = max(3, len(str(first_number + n - 1)))
    for k, area in areas.items():
        if alloc[k] == 0:
            diags.append(Diagnostic("empty_stratum", f"stratum {k} was allocated no stations"))
            continue
        x, y, _ = _simple_random_xy(area, alloc[k], gen, resolution=resolution,
                                    min_separation=min_separation, width=quadrat_width,
                                    length=quadrat_length, existing=(placed_x, placed_y))
        placed_x += list(x)
        placed_y += list(y)
        frames.append(frame(station_codes(prefix, len(x), number, width), x, y, C.PLACEMENT_STRATIFIED,
                            quadrat_width, quadrat_length, **{C.STRATUM: k}))
        number += len(x)
        if len(x) < alloc[k]:
            diags.append(Diagnostic("could_not_place",
                                    f"stratum {k}: only {len(x)} of {alloc[k]} stations could be placed"))
        if 0 < alloc[k] < 2:
            diags.append(Diagnostic("one_per_stratum",
                                    f"stratum {k} has a single station: its variance cannot be estimated"))
    df = pd.concat(frames, ignore_index=True)
    diags += few_stations(len(df))
    if min_separation:
        diags += quadrat_vs_spacing(quadrat_width, quadrat_length, min_separation, "minimum separation")
    return Placement(C.PLACEMENT_STRATIFIED, seed, df,
                     {"n": n, "allocation_method": allocation, "allocation": alloc,
                      "pilot_sd": dict(pilot_sd) if pilot_sd else None,
                      "min_separation": min_separation}, tuple(diags))


def _bas_draw(area: BaseGeometry, n: int, start: tuple[int, int], first_index: int, *,
              min_separation: float, width: float | None, length: float | None,
              existing: tuple[list[float], list[float]], max_draws: int,
              bounds: tuple[float, float, float, float] | None = None) -> tuple[list, list, list]:
    # the Halton box is the first placement's; an extension keeps it even when later stations shrink the area
    xmin, ymin, xmax, ymax = bounds if bounds is not None else area.bounds
    xs: list[float] = []
    ys: list[float] = []
    ks: list[int] = []
    kept_x = list(existing[0])
    kept_y = list(existing[1])
    k = first_index
    frac = max(area.area / max((xmax - xmin) * (ymax - ymin), 1e-12), 1e-6)
    while len(xs) < n and k - first_index < max_draws:
        batch = int(min(max_draws - (k - first_index), max(64, math.ceil(2 * (n - len(xs)) / frac))))
        pts = halton(batch, (2, 3), (start[0] + k, start[1] + k))
        cx = xmin + pts[:, 0] * (xmax - xmin)
        cy = ymin + pts[:, 1] * (ymax - ymin)
        ok = np.flatnonzero(quadrat_fits(area, cx, cy, width, length))
        chosen = _separation_filter(cx[ok], cy[ok], kept_x, kept_y, min_separation, n - len(xs))
        for i in chosen:
            j = int(ok[i])
            xs.append(float(cx[j]))
            ys.append(float(cy[j]))
            ks.append(k + j)
            kept_x.append(float(cx[j]))
            kept_y.append(float(cy[j]))
        k += batch
    return xs, ys, ks


def balanced_acceptance(
    site: BaseGeometry,
    n: int,
    rng: RngLike,
    *,
    exclusions: Iterable[BaseGeometry] = (),
    min_separation: float = 0.0,
    quadrat_width: float | None = None,
    quadrat_length: float | None = None,
    prefix: str = "Q",
    first_number: int = 1,
    max_draws: int | None = None,
) -> Placement:
    r"""Spatially balanced placement by Balanced Acceptance Sampling (BAS).

    Parameters
    ----------
    site : polygon [m]
    n : int
        Stations wanted.
    rng : numpy.random.Generator or int
        Draws the two random Halton start indices.
    exclusions, min_separation, quadrat_width, quadrat_length, prefix, first_number
        As for :func:`simple_random`.
    max_draws : int, optional
        Halton points to try before giving up (default ``max(10000, 1000 n)``).

    Returns
    -------
    Placement
        ``method="balanced"``; stations in acceptance order with columns ``order``
        (0-based) and ``halton_index``; ``params["halton_start"]`` holds
        :math:`(u_1, u_2)` so :func:`extend_balanced` can continue the sequence.

    Notes
    -----
    With the bounding box :math:`[x_0, x_1] \times [y_0, y_1]` of the usable area and random
    integers :math:`u_1, u_2`, candidate :math:`k = 0, 1, \dots` is

    .. math:: (x_0 + \phi_2(u_1 + k)(x_1 - x_0),\; y_0 + \phi_3(u_2 + k)(y_1 - y_0))

    and candidates inside the usable area are accepted in order of :math:`k`.  Equal
    inclusion probabilities; any leading run of the sample is itself balanced.

    References
    ----------
    Robertson, B. L., Brown, J. A., McDonald, T. and Jaksons, P. (2013). BAS: Balanced
    Acceptance Sampling of natural resources. Biometrics 69:776-784.
    """
    n = _check_n(n)
    area = usable_area(site, exclusions)
    seed, gen = derive_rng(rng)
    start = (int(gen.integers(0, HALTON_START_MAX)), int(gen.integers(0, HALTON_START_MAX)))
    max_draws = max_draws or max(10000, 1000 * n)
    xs, ys, ks = _bas_draw(area, n, start, 0, min_separation=min_separation, width=quadrat_width,
                           length=quadrat_length, existing=([], []), max_draws=max_draws)
    df = frame(station_codes(prefix, len(xs), first_number), xs, ys, C.PLACEMENT_BALANCED,
               quadrat_width, quadrat_length, order=np.arange(len(xs)), halton_index=np.array(ks, dtype=np.int64))
    diags = _placement_diagnostics(n, len(xs), quadrat_width, quadrat_length, min_separation)
    return Placement(C.PLACEMENT_BALANCED, seed, df,
                     {"n": n, "halton_start": start, "bases": (2, 3), "bounds": tuple(area.bounds),
                      "min_separation": min_separation, "prefix": prefix}, tuple(diags))


def extend_balanced(
    placement: Placement,
    site: BaseGeometry,
    n_more: int,
    *,
    exclusions: Iterable[BaseGeometry] = (),
    avoid: Iterable[tuple[float, float]] = (),
    prefix: str | None = None,
    first_number: int | None = None,
    max_draws: int | None = None,
) -> Placement:
    r"""Add ``n_more`` stations to a BAS placement by continuing its random-start Halton sequence.

    Parameters
    ----------
    placement : Placement
        A balanced placement with ``params["halton_start"]``, ``params["bounds"]`` and a
        ``halton_index`` per station (its earlier extensions included).
    site, exclusions :
        The site and the exclusion zones of the first placement (the Halton box must be the same).
    n_more : int
        Stations to add.
    avoid : iterable of (x, y)
        Stations placed since by other means: new stations keep the minimum separation from them
        too, without changing the Halton box.
    prefix, first_number : codes of the new stations (default: the placement's prefix, next number).

    Returns
    -------
    Placement
        All stations (old first, unchanged), the new ones continuing ``order``; no new random
        numbers are drawn, so with nothing placed since the enlarged sample is exactly the one BAS
        draws with ``n + n_more`` from the start (same site, exclusions and seed).

    Notes
    -----
    Candidates :math:`k = k_{max} + 1, k_{max} + 2, \dots` of the same sequence are accepted as in
    :func:`balanced_acceptance`: inside the usable area and at least ``min_separation`` from every
    station kept.  Any leading run of a BAS order is spatially balanced (Robertson et al. 2013).

    References
    ----------
    Robertson et al. (2013) Biometrics 69:776-784.
    """
    if placement.method != C.PLACEMENT_BALANCED or "halton_start" not in placement.params:
        raise DesignError("only a balanced (BAS) placement can be extended along its sequence")
    n_more = _check_n(n_more)
    area = usable_area(site, exclusions)
    bounds = tuple(float(b) for b in placement.params["bounds"])
    if not np.allclose(tuple(area.bounds), bounds, rtol=0, atol=1e-6):
        raise DesignError("the site or exclusions differ from those of the original balanced placement")
    old = placement.stations
    start = tuple(int(v) for v in placement.params["halton_start"])
    first = int(old["halton_index"].max()) + 1 if len(old) else 0
    width = old.get(C.QUADRAT_WIDTH)
    length = old.get(C.QUADRAT_LENGTH)
    qw = float(width.iloc[0]) if width is not None and len(old) else None
    ql = float(length.iloc[0]) if length is not None and len(old) else None
    sep = float(placement.params.get("min_separation") or 0.0)
    others = list(avoid)
    xs, ys, ks = _bas_draw(area, n_more, start, first, min_separation=sep, width=qw, length=ql,
                           existing=(list(old[C.X]) + [p[0] for p in others], list(old[C.Y]) + [p[1] for p in others]),
                           max_draws=max_draws or max(10000, 1000 * n_more), bounds=bounds)
    pre = prefix if prefix is not None else placement.params.get("prefix", "Q")
    if first_number is None:
        numbers = old[C.STATION].str.extract(r"(\d+)$")[0].dropna().astype(int)
        first_number = int(numbers.max()) + 1 if len(numbers) else 1
    new = frame(station_codes(pre, len(xs), first_number, max(3, len(str(first_number + len(xs))))), xs, ys,
                C.PLACEMENT_BALANCED, qw, ql, order=np.arange(len(old), len(old) + len(xs)),
                halton_index=np.array(ks, dtype=np.int64))
    df = pd.concat([old, new], ignore_index=True)
    diags = _placement_diagnostics(n_more, len(xs), qw, ql, sep)
    params = dict(placement.params)
    params["n"] = len(df)
    return Placement(C.PLACEMENT_BALANCED, placement.seed, df, params, tuple(diags))


def extend_random(
    placement: Placement,
    site: BaseGeometry,
    n_more: int,
    rng: RngLike,
    *,
    exclusions: Iterable[BaseGeometry] = (),
    avoid: Iterable[tuple[float, float]] = (),
    prefix: str = "Q",
    first_number: int = 1,
    resolution: float | None = None,
) -> Placement:
    """Add ``n_more`` simple random stations to a random placement: new draws (their own seed, returned),
    the same quadrat size, resolution and minimum separation from every station kept.

    Returns a Placement of the NEW stations only, ``method="random"``, ``seed`` the extension's.
    """
    n_more = _check_n(n_more)
    area = usable_area(site, exclusions)
    old = placement.stations
    qw, ql = _quadrat_of(old)
    sep = float(placement.params.get("min_separation") or 0.0)
    res = float(resolution or placement.params.get("resolution") or 0.1)
    seed, gen = derive_rng(rng)
    others = list(avoid)
    x, y, drawn = _simple_random_xy(area, n_more, gen, resolution=res, min_separation=sep, width=qw, length=ql,
                                    existing=(list(old[C.X]) + [p[0] for p in others],
                                              list(old[C.Y]) + [p[1] for p in others]))
    df = frame(station_codes(prefix, len(x), first_number), x, y, C.PLACEMENT_RANDOM, qw, ql)
    diags = _placement_diagnostics(n_more, len(x), qw, ql, sep)
    return Placement(C.PLACEMENT_RANDOM, seed, df,
                     {"n": n_more, "min_separation": sep, "resolution": res, "candidates_drawn": drawn},
                     tuple(diags))


def extend_stratified(
    placement: Placement,
    strata: Mapping[str, BaseGeometry],
    n_more: int,
    rng: RngLike,
    *,
    exclusions: Iterable[BaseGeometry] = (),
    avoid: Iterable[tuple[float, float]] = (),
    prefix: str = "Q",
    first_number: int = 1,
) -> Placement:
    r"""Add ``n_more`` stations to a stratified random placement, per stratum.

    The total :math:`n + n_{more}` is allocated again by the placement's own rule (proportional,
    equal or Neyman, :func:`allocate`); each stratum receives its shortfall
    :math:`\max(0, n_h^{new} - n_h^{old})`, the largest shortfalls first when they add up to more
    than ``n_more``, drawn at random within the stratum (new draws, seed returned) with the same
    quadrat size and minimum separation from every station kept.

    Returns a Placement of the NEW stations only, with a ``stratum`` column and
    ``params["allocation"]`` (new stations per stratum).
    """
    n_more = _check_n(n_more)
    excl = list(exclusions or ())
    areas = {k: usable_area(g, excl, f"stratum {k} polygon") for k, g in strata.items()}
    old = placement.stations
    have = old[C.STRATUM].value_counts().to_dict() if C.STRATUM in old else {}
    method = placement.params.get("allocation_method", "proportional")
    target = allocate({k: a.area for k, a in areas.items()}, len(old) + n_more, method,
                      placement.params.get("pilot_sd"))
    short = {k: max(0, target[k] - int(have.get(k, 0))) for k in areas}
    give = {k: 0 for k in areas}
    left = n_more
    while left > 0 and any(short[k] - give[k] > 0 for k in areas):
        k = max(areas, key=lambda h: (short[h] - give[h], areas[h].area))
        give[k] += 1
        left -= 1
    while left > 0:  # every stratum has its share: the rest go by the allocation's own weights
        k = max(areas, key=lambda h: target[h] / max(1, int(have.get(h, 0)) + give[h]))
        give[k] += 1
        left -= 1
    qw, ql = _quadrat_of(old)
    sep = float(placement.params.get("min_separation") or 0.0)
    seed, gen = derive_rng(rng)
    kept_x = list(old[C.X]) + [p[0] for p in avoid]
    kept_y = list(old[C.Y]) + [p[1] for p in avoid]
    frames, diags, number = [], [], first_number
    width = max(3, len(str(first_number + n_more - 1)))
    for k, area in areas.items():
        if give[k] == 0:
            continue
        x, y, _ = _simple_random_xy(area, give[k], gen, resolution=0.1, min_separation=sep, width=qw, length=ql,
                                    existing=(kept_x, kept_y))
        kept_x += list(x)
        kept_y += list(y)
        frames.append(frame(station_codes(prefix, len(x), number, width), x, y, C.PLACEMENT_STRATIFIED, qw, ql,
                            **{C.STRATUM: k}))
        number += len(x)
        if len(x) < give[k]:
            diags.append(Diagnostic("could_not_place", f"stratum {k}: only {len(x)} of {give[k]} stations could be placed"))
    df = pd.concat(frames, ignore_index=True) if frames else frame([], [], [], C.PLACEMENT_STRATIFIED, qw, ql)
    return Placement(C.PLACEMENT_STRATIFIED, seed, df,
                     {"n": n_more, "allocation_method": method, "allocation": give, "target": target,
                      "min_separation": sep}, tuple(diags))


def _quadrat_of(stations: pd.DataFrame) -> tuple[float | None, float | None]:
    if not len(stations):
        return None, None
    w = stations.get(C.QUADRAT_WIDTH)
    ln = stations.get(C.QUADRAT_LENGTH)
    return (float(w.iloc[0]) if w is not None else None, float(ln.iloc[0]) if ln is not None else None)


def systematic_grid(
    site: BaseGeometry,
    spacing: float,
    rng: RngLike,
    *,
    spacing_y: float | None = None,
    exclusions: Iterable[BaseGeometry] = (),
    quadrat_width: float | None = None,
    quadrat_length: float | None = None,
    prefix: str = "Q",
    first_number: int = 1,
) -> Placement:
    r"""Systematic square (or rectangular) grid with a uniformly random start.

    Parameters
    ----------
    site : polygon [m]
    spacing : float
        Distance between grid columns [m] (and rows unless ``spacing_y``).
    rng : numpy.random.Generator or int
        Draws the start offset :math:`(o_x, o_y) \sim U[0, s_x) \times U[0, s_y)`.
    exclusions, quadrat_width, quadrat_length, prefix, first_number
        As for :func:`simple_random`.

    Returns
    -------
    Placement
        ``method="systematic"``; stations row by row from the south-west.

    Notes
    -----
    Nodes :math:`(x_0 + o_x + i s_x,\; y_0 + o_y + j s_y)` whose quadrat lies in the usable
    area.  Every point of the plane has the same inclusion probability
    :math:`a / (s_x s_y)` for a quadrat of area :math:`a`.

    References
    ----------
    Cochran, W. G. (1977). Sampling Techniques, 3rd ed., chapter 8.
    """
    if spacing <= 0 or (spacing_y is not None and spacing_y <= 0):
        raise DesignError("grid spacing must be positive")
    sy = float(spacing_y or spacing)
    sx = float(spacing)
    area = usable_area(site, exclusions)
    seed, gen = derive_rng(rng)
    ox, oy = float(gen.uniform(0, sx)), float(gen.uniform(0, sy))
    xmin, ymin, xmax, ymax = area.bounds
    gx = np.arange(xmin + ox, xmax + 1e-9, sx)
    gy = np.arange(ymin + oy, ymax + 1e-9, sy)
    if gx.size * gy.size > 5_000_000:
        raise DesignError(f"grid spacing {sx:g} m gives too many nodes for this site")
    xx, yy = np.meshgrid(gx, gy)
    xx, yy = xx.ravel(), yy.ravel()
    ok = quadrat_fits(area, xx, yy, quadrat_width, quadrat_length)
    xx, yy = xx[ok], yy[ok]
    df = frame(station_codes(prefix, len(xx), first_number), xx, yy, C.PLACEMENT_SYSTEMATIC,
               quadrat_width, quadrat_length)
    diags = few_stations(len(df)) + quadrat_vs_spacing(quadrat_width, quadrat_length, min(sx, sy), "grid spacing")
    return Placement(C.PLACEMENT_SYSTEMATIC, seed, df,
                     {"spacing": sx, "spacing_y": sy, "offset": (ox, oy)}, tuple(diags))


TRANSECT_LAYOUTS = ("interrupted", "continuous")
TRANSECT_KINDS = ("line", "belt")


def transect(
    site: BaseGeometry,
    rng: RngLike,
    *,
    spacing: float,
    start: tuple[float, float] | None = None,
    bearing: float | None = None,
    length: float | None = None,
    line: LineString | None = None,
    layout: str = "interrupted",
    kind: str = "belt",
    width: float = 1.0,
    quadrat_length: float | None = None,
    random_start: bool = True,
    exclusions: Iterable[BaseGeometry] = (),
    code: str = "T1",
) -> Placement:
    r"""Stations along a transect, each with its distance along.

    Parameters
    ----------
    site : polygon [m]
    rng : numpy.random.Generator or int
        Draws the first station's offset :math:`o \sim U[0, s)` when ``random_start``.
    spacing : float
        Distance between successive station starts [m].  For ``layout="continuous"`` the
        quadrats are contiguous and ``quadrat_length`` defaults to ``spacing``.
    start, bearing, length : optional
        Start point (x, y) [m], compass bearing [degrees clockwise from grid north] and
        length [m] of a straight transect.
    line : shapely LineString, optional
        A drawn transect instead of start/bearing/length.
    layout : {"interrupted", "continuous"}
    kind : {"line", "belt"}
        A line transect records along the line itself (width 0); a belt records a strip of
        ``width`` m centred on the line.
    width : float
        Belt width across the line [m] (ignored for ``kind="line"``).
    quadrat_length : float, optional
        Length of each station along the line [m] (interrupted default: ``width``).
    random_start : bool
        Random first offset (True) or first station at the transect start.
    exclusions : polygons
    code : str
        Transect code; stations are ``code-001``, ``code-002``, ...

    Returns
    -------
    Placement
        ``method="transect"``; columns transect, distance_m (from the transect start to the
        near end of the station), x, y (the station's point on the line), bearing,
        quadrat_width_m, quadrat_length_m.  Stations whose point falls outside the usable
        area are left out and counted in a diagnostic.

    Notes
    -----
    Station :math:`i` starts at :math:`d_i = o + i s` along the line, for
    :math:`d_i + \ell \le L`; on a straight transect its point is
    :math:`(x_0 + d_i \sin\theta,\; y_0 + d_i \cos\theta)` for bearing :math:`\theta`.
    """
    if layout not in TRANSECT_LAYOUTS:
        raise DesignError(f"transect layout must be one of {', '.join(TRANSECT_LAYOUTS)}, got {layout!r}")
    if kind not in TRANSECT_KINDS:
        raise DesignError(f"transect kind must be one of {', '.join(TRANSECT_KINDS)}, got {kind!r}")
    if spacing <= 0:
        raise DesignError("transect spacing must be positive")
    area = usable_area(site, exclusions)
    if line is None:
        if start is None or bearing is None or length is None:
            raise DesignError("a transect needs either a drawn line or a start point, bearing and length")
        if length <= 0:
            raise DesignError("transect length must be positive")
        th = math.radians(float(bearing))
        x0, y0 = float(start[0]), float(start[1])
        line = LineString([(x0, y0), (x0 + length * math.sin(th), y0 + length * math.cos(th))])
    elif not isinstance(line, LineString) or line.is_empty or line.length <= 0:
        raise DesignError("the transect line must be a non-empty LineString")
    if not area.intersects(line):
        raise DesignError(f"transect {code} does not cross the site")
    seed, gen = derive_rng(rng)
    across = 0.0 if kind == "line" else float(width)
    if kind == "belt" and across <= 0:
        raise DesignError("a belt transect needs a positive width")
    if layout == "continuous":
        ql = float(quadrat_length or spacing)
        if ql < spacing - 1e-9:
            raise DesignError("a continuous transect has contiguous stations: quadrat length must equal the spacing")
    else:
        ql = float(quadrat_length if quadrat_length is not None else (across or 1.0))
    total = line.length
    offset = float(gen.uniform(0, spacing)) if random_start else 0.0
    dists = np.arange(offset, total - ql + 1e-9, spacing)
    if dists.size == 0:
        raise DesignError(f"transect {code} is shorter than one station")
    pts = [line.interpolate(d) for d in dists]
    xs = np.array([p.x for p in pts])
    ys = np.array([p.y for p in pts])
    bearings = []
    for d in dists:
        a = line.interpolate(max(d - 1e-6, 0.0))
        b = line.interpolate(min(d + ql, total))
        bearings.append(math.degrees(math.atan2(b.x - a.x, b.y - a.y)) % 360.0)
    inside = shapely.contains_xy(area, xs, ys)
    n_out = int((~inside).sum())
    codes = [f"{code}-{i:03d}" for i in range(1, len(dists) + 1)]
    df = pd.DataFrame({C.STATION: codes, C.X: xs, C.Y: ys, C.TRANSECT: code, C.DISTANCE: dists,
                       "bearing": np.array(bearings)})
    df["placement"] = C.PLACEMENT_TRANSECT
    df[C.QUADRAT_WIDTH] = across
    df[C.QUADRAT_LENGTH] = ql
    df = df[inside].reset_index(drop=True)
    diags: list[Diagnostic] = []
    if n_out:
        diags.append(Diagnostic("outside_site",
                                f"{n_out} station{'s' if n_out > 1 else ''} of transect {code} fell outside the "
                                "site or inside an exclusion zone and were left out"))
    diags += few_stations(len(df))
    if layout == "interrupted":
        diags += quadrat_vs_spacing(None, ql, spacing, "transect spacing")
    return Placement(C.PLACEMENT_TRANSECT, seed, df,
                     {"transect": code, "layout": layout, "kind": kind, "width": across,
                      "spacing": spacing, "offset": offset, "line": line.wkt}, tuple(diags))


def hilbert_order(x: np.ndarray, y: np.ndarray, level: int = 16) -> np.ndarray:
    """Rank of each point along a Hilbert curve over the points' bounding box.

    Used to spread panels over space for designs that have no balanced order of their own:
    points close along the curve are close in space.

    References
    ----------
    Hilbert, D. (1891). Ueber die stetige Abbildung einer Linie auf ein Flaechenstueck.
    Mathematische Annalen 38:459-460.
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if x.size == 0:
        return np.zeros(0, dtype=int)
    side = 2**level
    span = max(x.max() - x.min(), y.max() - y.min(), 1e-12)
    xi = np.minimum(((x - x.min()) / span * (side - 1)).astype(np.int64), side - 1)
    yi = np.minimum(((y - y.min()) / span * (side - 1)).astype(np.int64), side - 1)
    d = np.zeros_like(xi)
    s = side // 2
    while s > 0:
        rx = ((xi & s) > 0).astype(np.int64)
        ry = ((yi & s) > 0).astype(np.int64)
        d += s * s * ((3 * rx) ^ ry)
        # rotate the quadrant
        flip = ry == 0
        swap_x = np.where(flip & (rx == 1), side - 1 - xi, xi)
        swap_y = np.where(flip & (rx == 1), side - 1 - yi, yi)
        xi = np.where(flip, swap_y, swap_x)
        yi = np.where(flip, swap_x, swap_y)
        s //= 2
    return np.argsort(np.argsort(d, kind="stable"), kind="stable")

