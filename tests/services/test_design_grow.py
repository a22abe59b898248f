"""Growing a programme from the command line: `design extend` and transects along a drawn line."""

from __future__ import annotations

import json

import numpy as np
import pytest
from shapely.geometry import LineString, Point

from monitor import columns as C
from monitor.cli.main import main
from monitor.db import Store, queries
from monitor.design import balanced_acceptance
from monitor.services import design
from tests.cli.test_plan_cli import _refused


def _stations(db):
    store = Store.open(db)
    try:
        return queries.stations(store, store.programme().id)
    finally:
        store.dispose()


def test_balanced_extension_from_the_command_line(programme_db, capsys, tmp_path):
    # Hilltop Heath: 512560-512720 E, 5742320-5742460 N (sites.geojson); a pond excluded
    pond = tmp_path / "pond.geojson"
    pond.write_text(json.dumps({"type": "Feature", "properties": {},
                                "geometry": Point(512600, 5742400).buffer(15).__geo_interface__}))
    assert main(["--db", programme_db, "design", "place", "HH", "--method", "balanced", "--n", "6", "--seed", "41",
                 "--exclude", str(pond), "--min-separation", "8"]) == 0
    assert main(["--db", programme_db, "design", "extend", "HH", "--n", "5"]) == 0
    err = capsys.readouterr().err
    assert "6 -> 11 stations" in err
    st = _stations(programme_db)
    ours = st[st[C.STATION].str.startswith("HH-B")].sort_values(C.STATION)
    assert len(ours) == 11 and set(ours["placement_seed"]) == {41}
    xy = ours[[C.X, C.Y]].to_numpy()
    # every new station keeps the 8 m separation from all stations in the site, old and new
    site = st[st[C.SITE] == "HH"][[C.X, C.Y]].to_numpy()
    for p in xy[6:]:
        d = np.hypot(site[:, 0] - p[0], site[:, 1] - p[1])
        assert np.sort(d)[1] >= 8.0
        assert Point(p).distance(Point(512600, 5742400)) > 15
    # and they continue the Halton order of the first run: a second extension continues it again
    assert main(["--db", programme_db, "design", "extend", "HH", "--n", "2", "--dry-run"]) == 0
    assert len(_stations(programme_db)) == len(st)


def test_extension_equals_a_fresh_placement_when_nothing_else_is_in_the_site(programme_db):
    # no separation and nothing else placed: the extension equals BAS(n + m) of the same seed
    first = design.place_stations(programme_db, "CB", "balanced", n=5, seed=8, prefix="CB-B")
    more = design.extend_stations(programme_db, "CB", 4)
    store = Store.open(programme_db)
    try:
        from monitor.services.design import site_geometry

        with store.session() as session:
            _site, geometry = site_geometry(session, store.programme().id, "CB")
    finally:
        store.dispose()
    fresh = balanced_acceptance(geometry, 9, 8, quadrat_width=1, quadrat_length=1)
    got = np.vstack([first.stations[[C.X, C.Y]].to_numpy(), more.stations[[C.X, C.Y]].to_numpy()])
    np.testing.assert_allclose(got, fresh.stations[[C.X, C.Y]].to_numpy())
    assert list(more.stations[C.STATION]) == ["CB-B006", "CB-B007", "CB-B008", "CB-B009"]


def test_random_and_stratified_extensions_store_their_seed(programme_db, tmp_path):
    design.place_stations(programme_db, "SM", "random", n=4, seed=3, min_separation=5.0)
    more = design.extend_stations(programme_db, "SM", 3, seed=99)
    assert more.seed == 99 and len(more.stations) == 3
    st = _stations(programme_db).set_index(C.STATION)
    assert set(st.loc[list(more.stations[C.STATION]), "placement_seed"]) == {99}
    strata = tmp_path / "strata.geojson"
    strata.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"code": "N"},
         "geometry": {"type": "Polygon", "coordinates": [[[512080, 5742420], [512380, 5742420], [512380, 5742480],
                                                          [512080, 5742480], [512080, 5742420]]]}},
        {"type": "Feature", "properties": {"code": "S"},
         "geometry": {"type": "Polygon", "coordinates": [[[512080, 5742360], [512380, 5742360], [512380, 5742420],
                                                          [512080, 5742420], [512080, 5742360]]]}}]}))
    design.place_stations(programme_db, "WE", "stratified", n=4, seed=5, strata=strata, allocation="equal")
    grown = design.extend_stations(programme_db, "WE", 4, seed=6)
    # equal allocation of 8 over two strata: 4 each, so 2 new per stratum
    assert sorted(grown.stations[C.STRATUM]) == ["N", "N", "S", "S"]


def test_extension_refusals(programme_db, capsys):
    _refused(programme_db, ["design", "extend", "HH", "--n", "3"], capsys, "no stored balanced")
    _refused(programme_db, ["design", "extend", "NOPE", "--n", "3"], capsys, "NOPE")
    _refused(programme_db, ["design", "extend", "HH", "--n", "0"], capsys, "--n")


def test_transect_along_a_drawn_line(programme_db, tmp_path, capsys):
    # a stream-side line bending through Stream Meadow (512000-512420 E, 5742000-5742260 N)
    line = LineString([(512020, 5742020), (512150, 5742080), (512260, 5742060), (512390, 5742200)])
    path = tmp_path / "stream.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection",
                                "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32630"}},
                                "features": [{"type": "Feature", "properties": {"name": "stream"},
                                              "geometry": line.__geo_interface__}]}))
    assert main(["--db", programme_db, "design", "place", "SM", "--method", "transect", "--line", str(path),
                 "--spacing", "20", "--seed", "2", "--kind", "line", "--prefix", "SM-S"]) == 0
    st = _stations(programme_db)
    ours = st[st[C.TRANSECT] == "SM-S"].sort_values(C.DISTANCE)
    n_expected = len(np.arange(ours[C.DISTANCE].iloc[0], line.length - 1.0 + 1e-9, 20.0))
    assert len(ours) == n_expected >= 20
    for _, r in ours.iterrows():
        # each station lies on the line at its recorded distance (shapely 2 project/interpolate)
        assert line.distance(Point(r[C.X], r[C.Y])) < 1e-6
        assert abs(line.project(Point(r[C.X], r[C.Y])) - r[C.DISTANCE]) < 1e-6
    assert np.allclose(np.diff(ours[C.DISTANCE]), 20.0)
    # continuous belt quadrats along the same line: contiguous 5 m stations
    capsys.readouterr()
    assert main(["--db", programme_db, "design", "place", "SM", "--method", "transect", "--line", str(path),
                 "--spacing", "5", "--seed", "2", "--layout", "continuous", "--prefix", "SM-C", "--dry-run",
                 "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    d = [s["distance_m"] for s in out["stations"]]
    assert np.allclose(np.diff(d), 5.0) and all(s["quadrat_length_m"] == 5.0 for s in out["stations"])
    # a file that is not a line is refused with the file and feature named
    bad = tmp_path / "bad.geojson"
    bad.write_text(json.dumps({"type": "Feature", "properties": {}, "geometry": Point(1, 1).__geo_interface__}))
    _refused(programme_db, ["design", "place", "SM", "--method", "transect", "--line", str(bad), "--spacing", "5"],
             capsys, "bad.geojson", "LineString")


def test_season_plan_over_paths_and_plans_compared(programme_db, tmp_path, capsys):
    from monitor.services import schedule
    from monitor.services.imports import import_records
    from tests.conftest import REPO_ROOT

    import_records(programme_db, REPO_ROOT / "demo_programme" / "records" / "season_2026.csv")
    # an invented track network joining the four sites' car parks (sites.geojson base points) and crossing them
    track = LineString([(511985, 5741990), (512200, 5742130), (512505, 5742030), (512650, 5742130),
                        (512545, 5742310), (512640, 5742390), (512065, 5742350), (512230, 5742420)])
    spur = LineString([(512200, 5742130), (512200, 5742250)])
    paths = tmp_path / "paths.geojson"
    paths.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": n}, "geometry": g.__geo_interface__}
        for n, g in (("track", track), ("spur", spur))]}))
    assert main(["--db", programme_db, "season", "plan", "2027", "--teams", "2", "--seed", "3", "--winding",
                 "1.25"]) == 0
    straight = schedule.plan_season(programme_db, 2027, teams=2, seed=3, dry_run=True).plan
    assert main(["--db", programme_db, "season", "plan", "2028", "--teams", "2", "--seed", "3", "--paths",
                 str(paths)]) == 0
    capsys.readouterr()
    assert main(["--db", programme_db, "season", "plans", "--json"]) == 0
    table = json.loads(capsys.readouterr().out)
    assert [r["year"] for r in table] == [2027, 2028]
    assert [r["routing"] for r in table] == ["straight", "paths"]
    assert table[0]["path_factor"] == 1.25
    # with the winding factor the stored route is 1.25 times the straight-line route of the same plan
    assert table[0]["route_km"] == pytest.approx(1.25 * straight.total_route_m / 1000, abs=0.01)
    store = Store.open(programme_db)
    try:
        record = queries.season_plan_record(store, store.programme().id, 2028)
    finally:
        store.dispose()
    details = json.loads(record["plan"]["details_json"])
    assert details["paths"]["file"] == "paths.geojson"
    assert details["paths"]["length_m"] == pytest.approx(track.length + spur.length)
    # the crossings must be given as lines: a polygon file is refused with its name
    bad = tmp_path / "area.geojson"
    bad.write_text(json.dumps({"type": "Feature", "properties": {}, "geometry": Point(0, 0).buffer(5).__geo_interface__}))
    _refused(programme_db, ["season", "plan", "2029", "--teams", "2", "--paths", str(bad)], capsys, "area.geojson")
