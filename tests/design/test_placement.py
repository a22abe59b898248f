"""Placement methods: geometry rules, reproducibility, allocation formulas, spatial balance."""

import json
import math

import numpy as np
import pytest
import shapely
from scipy import stats
from shapely.geometry import LineString, MultiPoint, Polygon, box

from monitor.design import (
    allocate,
    balanced_acceptance,
    extend_balanced,
    radical_inverse,
    simple_random,
    stratified_random,
    systematic_grid,
    transect,
)
from monitor.errors import DesignError

# invented site: a pentagon 400 m x 380 m with a 20 m wide track across it
SITE = Polygon([(0, 0), (400, 0), (400, 300), (150, 380), (0, 300)])
TRACK = box(180, -5, 200, 400)


def _codes(placement):
    return {d.code for d in placement.diagnostics}


# --- simple random ---------------------------------------------------------------------


def test_simple_random_respects_site_exclusions_quadrat_and_separation():
    p = simple_random(SITE, 60, np.random.default_rng(3), exclusions=[TRACK], min_separation=15,
                      quadrat_width=2, quadrat_length=2)
    assert p.n == 60
    df = p.stations
    quads = shapely.box(df.x - 1, df.y - 1, df.x + 1, df.y + 1)
    usable = SITE.difference(TRACK)
    assert shapely.contains(usable, quads).all()
    d = np.hypot(df.x.to_numpy()[:, None] - df.x.to_numpy(), df.y.to_numpy()[:, None] - df.y.to_numpy())
    np.fill_diagonal(d, np.inf)
    assert d.min() >= 15
    # coordinates lie on the 0.1 m candidate grid anchored at the bounding box
    assert np.allclose(np.round(df.x * 10), df.x * 10) and np.allclose(np.round(df.y * 10), df.y * 10)


def test_seed_reproduces_placement():
    a = simple_random(SITE, 25, np.random.default_rng(11), exclusions=[TRACK])
    b = simple_random(SITE, 25, a.seed, exclusions=[TRACK])
    assert a.seed == b.seed
    assert a.stations.equals(b.stations)
    assert json.loads(json.dumps(a.to_dict()))["seed"] == a.seed
    c = simple_random(SITE, 25, np.random.default_rng(12), exclusions=[TRACK])
    assert not np.array_equal(a.stations.x, c.stations.x)


def test_simple_random_is_uniform_over_the_area():
    # Uniform placement: the chance of falling in a region is its share of the usable area
    # (definition of simple random sampling over an area, Cochran 1977 ch. 2).  Chi-square
    # test, scipy.stats.chisquare, on 4 vertical bands of unequal area.
    site = box(0, 0, 100, 100)
    xs = np.concatenate([simple_random(site, 50, s).stations.x.to_numpy() for s in range(40)])
    edges = [0, 10, 30, 60, 100.0001]
    observed = np.histogram(xs, bins=edges)[0]
    expected = np.diff([0, 10, 30, 60, 100]) / 100 * len(xs)
    assert stats.chisquare(observed, expected).pvalue > 0.001


def test_cannot_place_all_records_diagnostic():
    p = simple_random(box(0, 0, 50, 50), 30, 1, min_separation=20)
    assert p.n < 30
    assert "could_not_place" in _codes(p)


def test_few_stations_warning():
    # fewer than 10 stations draws a warning (common practice minimum)
    assert "few_stations" in _codes(simple_random(SITE, 6, 1))
    assert "few_stations" not in _codes(simple_random(SITE, 10, 1))


def test_quadrat_larger_than_separation_warns():
    p = simple_random(SITE, 12, 1, min_separation=3, quadrat_width=5)
    assert "quadrat_too_large" in _codes(p)


@pytest.mark.parametrize(
    "bad, message",
    [
        (Polygon([(0, 0), (10, 10), (10, 0), (0, 10)]), "invalid"),  # bow-tie: self-intersecting
        (Polygon(), "empty"),
        (LineString([(0, 0), (1, 1)]), "must be a polygon"),
        (None, "missing"),
    ],
)
def test_bad_site_polygon_is_one_clear_error(bad, message):
    with pytest.raises(DesignError, match=message):
        simple_random(bad, 10, 1)


def test_exclusions_covering_the_site():
    with pytest.raises(DesignError, match="cover the whole"):
        balanced_acceptance(box(0, 0, 10, 10), 10, 1, exclusions=[box(-1, -1, 5, 11), box(4, -1, 11, 11)])


def test_zero_stations_refused():
    with pytest.raises(DesignError, match="positive whole number"):
        simple_random(SITE, 0, 1)


# --- allocation ------------------------------------------------------------------------


def test_proportional_and_equal_allocation_closed_form():
    # proportional n_h = n A_h / sum A (Cochran 1977 section 5.4): 20 * (1, 3) / 4 = (5, 15)
    assert allocate({"a": 1.0, "b": 3.0}, 20, "proportional") == {"a": 5, "b": 15}
    assert allocate({"a": 1.0, "b": 3.0, "c": 9.0}, 9, "equal") == {"a": 3, "b": 3, "c": 3}


def test_neyman_allocation_closed_form():
    # Neyman (1934); Cochran (1977) section 5.5: n_h = n A_h S_h / sum A_k S_k.
    # A = (10, 20, 30), S = (6, 2, 1): A*S = (60, 40, 30), sum 130; n = 26 -> (12, 8, 6) exactly.
    got = allocate({"a": 10, "b": 20, "c": 30}, 26, "neyman", {"a": 6, "b": 2, "c": 1})
    assert got == {"a": 12, "b": 8, "c": 6}


def test_allocation_rounding_sums_to_n_and_is_largest_remainder():
    # Hamilton's largest-remainder rounding: shares 10*(1,1,1)/3 = 3.33 each -> (4, 3, 3)
    got = allocate({"a": 1, "b": 1, "c": 1}, 10)
    assert sum(got.values()) == 10 and sorted(got.values()) == [3, 3, 4]


def test_neyman_needs_pilot_sd():
    with pytest.raises(DesignError, match="pilot standard deviation"):
        allocate({"a": 1, "b": 2}, 10, "neyman", {"a": 1.0})


def test_stratified_random_places_inside_each_stratum():
    strata = {"wet": box(0, 0, 100, 100), "dry": box(100, 0, 400, 100)}
    p = stratified_random(strata, 40, np.random.default_rng(5), allocation="proportional")
    counts = p.stations.groupby("stratum").size().to_dict()
    assert counts == {"wet": 10, "dry": 30}
    for code, poly in strata.items():
        sub = p.stations[p.stations.stratum == code]
        assert shapely.contains_xy(poly, sub.x, sub.y).all()
    assert p.stations.station.is_unique


# --- balanced acceptance sampling --------------------------------------------------------


def _voronoi_area_variance(xy: np.ndarray, region) -> float:
    cells = shapely.voronoi_polygons(MultiPoint(xy), extend_to=region)
    areas = [c.intersection(region).area for c in cells.geoms]
    return float(np.var(np.array(areas) / region.area))


def test_bas_more_evenly_spread_than_simple_random():
    # Stevens & Olsen (2004) JASA 99:262-278 measure spatial balance by the variance of the
    # Voronoi polygon sizes of the sample: lower is more even.  Over 20 seeds BAS must beat
    # simple random on average and in most paired draws.
    region = Polygon([(0, 0), (500, 0), (500, 200), (250, 400), (0, 200)])
    bas, srs = [], []
    for seed in range(20):
        b = balanced_acceptance(region, 40, seed).stations[["x", "y"]].to_numpy()
        s = simple_random(region, 40, seed).stations[["x", "y"]].to_numpy()
        bas.append(_voronoi_area_variance(b, region))
        srs.append(_voronoi_area_variance(s, region))
    bas, srs = np.array(bas), np.array(srs)
    assert bas.mean() < 0.6 * srs.mean()
    assert (bas < srs).sum() >= 17


def test_bas_points_are_the_mapped_random_start_halton_points():
    # Robertson et al. (2013): on a rectangle every Halton point is accepted, so station k is
    # (x0 + phi_2(u1 + k) W, y0 + phi_3(u2 + k) H).
    rect = box(1000, 2000, 1400, 2300)
    p = balanced_acceptance(rect, 30, 9)
    u1, u2 = p.params["halton_start"]
    k = np.arange(30)
    assert (p.stations.halton_index.to_numpy() == k).all()
    assert p.stations.x.to_numpy() == pytest.approx(1000 + 400 * radical_inverse(u1 + k, 2))
    assert p.stations.y.to_numpy() == pytest.approx(2000 + 300 * radical_inverse(u2 + k, 3))


def test_bas_extension_equals_larger_first_draw():
    a = balanced_acceptance(SITE, 20, 4, exclusions=[TRACK])
    more = extend_balanced(a, SITE, 15, exclusions=[TRACK])
    full = balanced_acceptance(SITE, 35, 4, exclusions=[TRACK])
    assert more.stations[["x", "y", "halton_index"]].equals(full.stations[["x", "y", "halton_index"]])
    assert list(more.stations.station[:20]) == list(a.stations.station)
    assert more.stations.station.is_unique
    assert list(more.stations.order) == list(range(35))


def test_bas_leading_runs_are_balanced():
    # any leading run of a BAS sample is balanced (Robertson et al. 2013): the first 16 of a
    # sample in a square put 4 in each quadrant, since phi_2 and phi_3 stratify [0,1) evenly
    # within 2 and 4 consecutive indices respectively (van der Corput property)
    p = balanced_acceptance(box(0, 0, 100, 100), 64, 21)
    first = p.stations.iloc[:16]
    quadrant = (first.x > 50).astype(int) * 2 + (first.y > 50).astype(int)
    counts = np.bincount(quadrant, minlength=4)
    assert counts.min() >= 3 and counts.max() <= 5


# --- systematic grid ---------------------------------------------------------------------


def test_systematic_grid_spacing_and_random_start():
    site = box(0, 0, 300, 200)
    p = systematic_grid(site, 25, np.random.default_rng(2))
    ox, oy = p.params["offset"]
    assert 0 <= ox < 25 and 0 <= oy < 25
    xs = np.unique(np.round(p.stations.x, 9))
    ys = np.unique(np.round(p.stations.y, 9))
    assert np.allclose(np.diff(xs), 25) and np.allclose(np.diff(ys), 25)
    # expected count = area / spacing^2 = 60000 / 625 = 96 (exact for a rectangle of whole multiples)
    assert p.n == 96


def test_systematic_quadrat_too_large_warns():
    p = systematic_grid(box(0, 0, 100, 100), 4, 1, quadrat_width=5)
    assert "quadrat_too_large" in _codes(p)


# --- transects -------------------------------------------------------------------------


def test_transect_from_start_and_bearing():
    site = box(0, 0, 1000, 1000)
    p = transect(site, np.random.default_rng(1), start=(100, 100), bearing=90, length=200, spacing=20,
                 width=2, quadrat_length=2)
    df = p.stations
    off = p.params["offset"]
    assert 0 <= off < 20
    # bearing 90 degrees (east): x = x0 + d, y = y0
    assert df.distance_m.to_numpy() == pytest.approx(off + 20 * np.arange(len(df)))
    assert df.x.to_numpy() == pytest.approx(100 + df.distance_m.to_numpy())
    assert df.y.to_numpy() == pytest.approx(100)
    assert (df.bearing.round(6) == 90).all()
    # stations start at off + 20 i and must end (2 m later) within the 200 m line
    assert len(df) == math.floor((200 - 2 - off) / 20) + 1
    assert list(df.station[:2]) == ["T1-001", "T1-002"]


def test_transect_north_bearing_and_drawn_line():
    site = box(-100, -100, 1000, 1000)
    p = transect(site, 1, start=(0, 0), bearing=0, length=55, spacing=10, random_start=False, kind="line")
    assert p.stations.y.to_numpy() == pytest.approx([0, 10, 20, 30, 40, 50][: p.n])
    assert (p.stations.quadrat_width_m == 0).all()
    bent = LineString([(0, 0), (30, 0), (30, 40)])  # 70 m long, 30 m east then 40 m north
    q = transect(site, 1, line=bent, spacing=10, layout="continuous", random_start=False)
    assert q.stations.distance_m.tolist() == [0, 10, 20, 30, 40, 50, 60]
    assert q.stations.iloc[4][["x", "y"]].tolist() == pytest.approx([30, 10])
    assert q.stations.iloc[4].bearing == pytest.approx(0)


def test_transect_warnings_and_errors():
    site = box(0, 0, 100, 100)
    p = transect(site, 1, start=(0, 50), bearing=90, length=200, spacing=5, quadrat_length=6, width=1)
    codes = _codes(p)
    assert "outside_site" in codes and "quadrat_too_large" in codes
    with pytest.raises(DesignError, match="does not cross"):
        transect(site, 1, start=(500, 500), bearing=0, length=10, spacing=2)
    with pytest.raises(DesignError, match="drawn line or a start point"):
        transect(site, 1, spacing=2)


def test_transect_geometry_against_trigonometry():
    # compass bearing theta clockwise from north: (dx, dy) = d (sin theta, cos theta)
    site = box(-500, -500, 500, 500)
    p = transect(site, 1, start=(0, 0), bearing=30, length=100, spacing=25, random_start=False)
    last = p.stations.iloc[-1]
    assert last.x == pytest.approx(last.distance_m * math.sin(math.radians(30)))
    assert last.y == pytest.approx(last.distance_m * math.cos(math.radians(30)))
