"""A sensitive species' exact positions never leave the database: the report's map figures (PNG, SVG and
the HTML embedding them) and field packs for outside crews get the exports' generalisation.

The demo programme flags the chalk orchidlet (CHAORC) sensitive (demo_programme/species.csv).
"""

from __future__ import annotations

import math

import pytest
from lxml import etree

from monitor.db import Store, queries
from monitor.services import exports, report, schedule, setup
from monitor.services.imports import import_records
from monitor.settings import GENERALISE_M


def _hidden(db: str) -> set[str]:
    store = Store.open(db)
    try:
        programme = store.programme()
        return exports.generalised_stations(queries.observations_table(store, programme.id),
                                            queries.species(store, programme.id))
    finally:
        store.dispose()


def _exact(db: str) -> dict[str, tuple[float, float]]:
    store = Store.open(db)
    try:
        stations = queries.stations(store, store.programme().id)
    finally:
        store.dispose()
    return {s: (float(x), float(y)) for s, x, y in zip(stations["station"], stations["x"], stations["y"], strict=True)}


def _is_cell_centre(x: float, y: float, cell: float = GENERALISE_M) -> bool:
    return math.isclose(x % cell, cell / 2) and math.isclose(y % cell, cell / 2)


def test_report_maps_show_sensitive_stations_generalised(demo_db, tmp_path, monkeypatch):
    import monitor.report.render as render

    drawn = []
    original = render.plot_station_map

    def capture(stations, *args, **kwargs):
        drawn.append(stations.copy())
        return original(stations, *args, **kwargs)

    monkeypatch.setattr(render, "plot_station_map", capture)
    report.write_report(demo_db, 2026, tmp_path / "report")
    hidden, exact = _hidden(demo_db), _exact(demo_db)
    assert hidden and drawn
    for frame in drawn:
        for station, x, y in zip(frame["station"], frame["x"], frame["y"], strict=True):
            if station in hidden:
                assert _is_cell_centre(x, y) and (x, y) != exact[station]
                assert abs(x - exact[station][0]) <= GENERALISE_M / 2 and abs(y - exact[station][1]) <= GENERALISE_M / 2
            else:
                assert (x, y) == exact[station]


@pytest.fixture
def season_db(db_url, demo_source):
    setup.setup_folder(db_url, demo_source)
    for year in (2024, 2025, 2026):
        import_records(db_url, demo_source / "records" / f"season_{year}.csv")
    return db_url


def test_field_packs_for_outside_crews_generalise_sensitive_stations(season_db, tmp_path):
    schedule.plan_season(season_db, 2027, teams=2, seed=5)
    hidden, exact = _hidden(season_db), _exact(season_db)
    ns = {"g": "http://www.topografix.com/GPX/1/1"}

    def waypoints(folder):
        out = {}
        for gpx in folder.rglob("route.gpx"):
            for wpt in etree.parse(str(gpx)).findall("g:wpt", ns):
                out[wpt.findtext("g:name", namespaces=ns)] = (float(wpt.get("lat")), float(wpt.get("lon")))
        return out

    own = waypoints(schedule.write_field_packs(season_db, 2027, tmp_path / "own").folder)
    outside = waypoints(schedule.write_field_packs(season_db, 2027, tmp_path / "outside",
                                                   generalise_sensitive=True).folder)
    shared = set(own) & hidden
    assert shared, "the plan should visit a station where the sensitive species occurs"
    for name in own:
        if name in hidden:
            assert outside[name] != own[name]
        elif name in exact:
            assert outside[name] == own[name]
    for sheet in (tmp_path / "outside").rglob("field_sheet.html"):
        text = sheet.read_text()
        for name in shared:
            assert f"{exact[name][0]:.0f}" not in text or f"{exact[name][1]:.0f}" not in text
