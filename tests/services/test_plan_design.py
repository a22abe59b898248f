"""Design service: stations placed into a stored site and stored with method and seed, panels due
table against the revisit-design definition, panel assignment, waypoint export."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
from lxml import etree
from pyproj import Transformer
from scipy.spatial.distance import cdist, pdist
from shapely.geometry import Point, box, shape

from monitor import columns as C
from monitor.db import Store, queries
from monitor.errors import DesignError
from monitor.services import design
from tests.conftest import GPX_SCHEMA, table_counts


def _stations(db_url):
    store = Store.open(db_url)
    try:
        return queries.stations(store, store.programme().id)
    finally:
        store.dispose()


def _site_polygon(demo_source, code):
    doc = json.loads((demo_source / "sites.geojson").read_text())
    return next(shape(f["geometry"]) for f in doc["features"] if f["properties"]["code"] == code)


def test_balanced_placement_is_stored_with_method_and_seed_inside_the_site(programme_db, demo_source):
    before = table_counts(programme_db)
    result = design.place_stations(programme_db, "CB", "balanced", n=12, seed=41, min_separation=8.0)
    assert result.stored and result.seed == 41 and len(result.stations) == 12
    stored = _stations(programme_db)
    new = stored[stored[C.STATION].isin(result.stations[C.STATION])]
    assert len(new) == 12 and table_counts(programme_db)["station"] == before["station"] + 12
    assert set(new["placement"]) == {"balanced"} and set(new["placement_seed"]) == {41}
    # every quadrat lies inside the site's polygon (shapely, as the geometry reference)
    site = _site_polygon(demo_source, "CB")
    for x, y, w, ln in zip(new[C.X], new[C.Y], new[C.QUADRAT_WIDTH], new[C.QUADRAT_LENGTH], strict=True):
        assert site.contains(box(x - w / 2, y - ln / 2, x + w / 2, y + ln / 2))
    # the minimum separation holds among the new stations and to the stations already there
    # (scipy.spatial.distance.pdist as the distance reference)
    old = stored[(stored[C.SITE] == "CB") & (stored["state"] == "in_service")
                 & ~stored[C.STATION].isin(new[C.STATION])]
    assert pdist(new[[C.X, C.Y]].to_numpy()).min() >= 8.0 - 1e-9
    assert cdist(new[[C.X, C.Y]].to_numpy(), old[[C.X, C.Y]].to_numpy()).min() >= 8.0 - 1e-9
    # the same seed gives the same stations again (reproducible from the stored seed)
    again = design.place_stations(programme_db, "CB", "balanced", n=12, seed=41, min_separation=8.0,
                                  prefix="CB-B", dry_run=True)
    assert not again.stored and table_counts(programme_db)["station"] == before["station"] + 12


def test_same_seed_same_positions_dry_run_writes_nothing(programme_db):
    before = table_counts(programme_db)
    a = design.place_stations(programme_db, "WE", "random", n=10, seed=5, dry_run=True)
    b = design.place_stations(programme_db, "WE", "random", n=10, seed=5, dry_run=True)
    assert np.allclose(a.stations[[C.X, C.Y]].to_numpy(), b.stations[[C.X, C.Y]].to_numpy())
    assert table_counts(programme_db) == before


def test_transect_stations_are_spaced_along_the_bearing(programme_db):
    result = design.place_stations(programme_db, "SM", "transect", spacing=20.0, start=(512050.0, 5742020.0),
                                   bearing=90.0, length=300.0, seed=2)
    st = result.stations.sort_values(C.DISTANCE)
    # due east (bearing 90 degrees): northing constant, eastings 20 m apart, distance along = easting offset
    assert np.allclose(st[C.Y], 5742020.0)
    assert np.allclose(np.diff(st[C.X]), 20.0) and np.allclose(np.diff(st[C.DISTANCE]), 20.0)
    assert np.allclose(st[C.X] - 512050.0, st[C.DISTANCE])
    stored = _stations(programme_db)
    assert set(stored.loc[stored[C.STATION].isin(st[C.STATION]), C.TRANSECT]) == {"SM-T1"}


def test_exclusions_covering_the_site_are_refused_and_nothing_written(programme_db, tmp_path):
    cover = {"type": "FeatureCollection", "features": [{"type": "Feature", "properties": {},
             "geometry": {"type": "Polygon", "coordinates": [[[512500, 5742000], [512800, 5742000],
                                                              [512800, 5742300], [512500, 5742300],
                                                              [512500, 5742000]]]}}]}
    path = tmp_path / "exclude.geojson"
    path.write_text(json.dumps(cover))
    before = table_counts(programme_db)
    with pytest.raises(DesignError, match="exclusion zones cover the whole site CB"):
        design.place_stations(programme_db, "CB", "random", n=10, seed=1, exclude=path)
    assert table_counts(programme_db) == before


def test_panel_due_table_matches_the_revisit_definition_and_the_demo_sheets(programme_db, demo_source):
    table = design.panel_due_table(programme_db, 6, first_year=2021)
    assert table.notation == "[1-0,1-2]"
    panels = table.panels.set_index(C.PANEL)
    # McDonald (2003): [1-0] visited every year; [1-2] visited one year, rested two (a three-year cycle).
    # ROT1 starts 2015 -> 2015, 2018, 2021, 2024; ROT2 starts 2016 -> 2022, 2025; ROT3 -> 2023, 2026
    assert [y for y in table.years if panels.loc["ANNUAL", y]] == [2021, 2022, 2023, 2024, 2025, 2026]
    assert [y for y in table.years if panels.loc["ROT1", y]] == [2021, 2024]
    assert [y for y in table.years if panels.loc["ROT2", y]] == [2022, 2025]
    assert [y for y in table.years if panels.loc["ROT3", y]] == [2023, 2026]
    # the demo's field sheets (written by demo_programme/generate.py with its own panel rule) list exactly
    # the stations due in each year
    per_station = table.stations.set_index(C.STATION)
    for year in table.years:
        with open(demo_source / "records" / f"season_{year}.csv", newline="") as handle:
            on_sheet = {row["station"] for row in csv.DictReader(handle)}
        assert on_sheet == set(per_station.index[per_station[year]]), year


def test_assign_panels_spreads_new_stations_over_a_split_design(programme_db):
    placed = design.place_stations(programme_db, "SM", "balanced", n=20, seed=11)
    result = design.assign_panels(programme_db, "[1-0,1-3]", start_year=2027)
    assert set(result.stations[C.STATION]) == set(placed.stations[C.STATION])
    assert sorted(result.panels_added) == ["1-0", "1-3/1", "1-3/2", "1-3/3", "1-3/4"]
    sizes = result.stations[C.PANEL].value_counts()
    assert set(sizes) == {4}
    table = design.panel_due_table(programme_db, 4, first_year=2027).panels.set_index(C.PANEL)
    # McDonald (2003) [1-3]: each of the four rotating panels is visited once in any four years,
    # one panel a year; [1-0] every year
    rotating = table.loc[["1-3/1", "1-3/2", "1-3/3", "1-3/4"], [2027, 2028, 2029, 2030]]
    assert (rotating.sum(axis=0) == 1).all() and (rotating.sum(axis=1) == 1).all()
    assert table.loc["1-0", [2027, 2028, 2029, 2030]].all()
    # each panel spreads over the site: stations on both sides of the median easting and northing
    xy = placed.stations.set_index(C.STATION)[[C.X, C.Y]]
    mx, my = xy[C.X].median(), xy[C.Y].median()
    for _, group in result.stations.groupby(C.PANEL):
        pts = xy.loc[group[C.STATION]]
        assert (pts[C.X] < mx).any() and (pts[C.X] > mx).any()
        assert (pts[C.Y] < my).any() and (pts[C.Y] > my).any()


def test_placed_stations_are_not_overdue_for_rounds_before_they_existed(programme_db, demo_source):
    from monitor.services import schedule
    from monitor.services.imports import import_records

    import_records(programme_db, demo_source / "records" / "season_2026.csv")
    placed = design.place_stations(programme_db, "WE", "random", n=3, seed=9, panel="ANNUAL")
    due = schedule.due_for_season(programme_db, 2027).set_index(C.STATION)
    for code in placed.stations[C.STATION]:
        assert due.loc[code, "reason"] == "due" and due.loc[code, "overdue_years"] == 0


def test_waypoints_gpx_validates_and_geojson_round_trips(programme_db, tmp_path):
    gpx = tmp_path / "stations.gpx"
    n = design.export_stations(programme_db, gpx)
    stations = _stations(programme_db)
    in_service = stations[stations["state"] == "in_service"]
    assert n == len(in_service)
    # the official GPX 1.1 schema (TopoGrafix 2004, tests/fixtures/gpx)
    schema = etree.XMLSchema(etree.parse(str(GPX_SCHEMA)))
    doc = etree.parse(str(gpx))
    assert schema.validate(doc), schema.error_log
    assert len(doc.findall("{http://www.topografix.com/GPX/1/1}wpt")) == n
    geo = tmp_path / "stations.geojson"
    design.export_stations(programme_db, geo, site="HH")
    features = json.loads(geo.read_text())["features"]
    # RFC 7946: longitude first, WGS84; back to UTM 30N (EPSG:32630) with pyproj within a millimetre
    back = Transformer.from_crs("EPSG:4326", "EPSG:32630", always_xy=True)
    xy = in_service.set_index(C.STATION)
    for f in features:
        lon, lat = f["geometry"]["coordinates"]
        x, y = back.transform(lon, lat)
        assert Point(x, y).distance(Point(xy.loc[f["id"], C.X], xy.loc[f["id"], C.Y])) < 1e-3
        assert f["properties"][C.SITE] == "HH"
