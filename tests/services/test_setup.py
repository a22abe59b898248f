"""Setting a programme up from files: checked before anything is written, one transaction per command."""

from __future__ import annotations

import json
import shutil

import pytest

from monitor.db import Store, queries
from monitor.errors import InputError
from monitor.services import setup
from tests.conftest import table_counts


def test_demo_folder_loads(db_url, demo_source):
    code, report = setup.setup_folder(db_url, demo_source)
    assert code == "HVR"
    assert report.added["stations"] == 64 and report.added["sites"] == 4 and report.added["species"] == 5
    store = Store.open(db_url)
    stations = queries.stations(store, store.programme().id)
    store.dispose()
    retired = stations[stations["state"] == "retired"]
    # lineage: each retired station names its replacement and why
    assert set(retired["station"]) == {"CB-14", "WE-11"}
    assert set(retired["replaced_by"]) == {"CB-14R", "WE-11R"}
    assert retired["retired_reason"].str.len().min() > 10
    transect = stations[stations["transect"] == "SM-T"].sort_values("distance_m")
    assert len(transect) == 10 and list(transect["placement"].unique()) == ["transect"]


def test_quadrat_area_is_width_times_length(db_url, demo_source, tmp_path):
    """A 0.33 m x 0.33 m open quadrat has an area of about 0.1 m^2 (common practice)."""
    folder = tmp_path / "p"
    shutil.copytree(demo_source, folder)
    text = (folder / "stations.csv").read_text()
    lines = text.splitlines()
    header = lines[0].split(",")
    w, h = header.index("quadrat_width_m"), header.index("quadrat_length_m")
    cells = lines[1].split(",")
    cells[w] = cells[h] = "0.33"
    lines[1] = ",".join(cells)
    (folder / "stations.csv").write_text("\n".join(lines) + "\n")
    setup.setup_folder(db_url, folder)
    store = Store.open(db_url)
    stations = queries.stations(store, store.programme().id).set_index("station")
    store.dispose()
    area = stations.loc[cells[0], "quadrat_area_m2"]
    assert area == pytest.approx(0.1, abs=0.011)


def _move_first_station(text: str, x: str) -> str:
    lines = text.splitlines()
    cells = lines[1].split(",")
    cells[2] = x  # column x
    lines[1] = ",".join(cells)
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize(
    "file, edit, expected",
    [
        ("stations.csv", lambda t: t.replace("SM-12,SM,", "SM-11,SM,", 1), "unique"),
        ("stations.csv", lambda t: t.replace(",random,", ",thrown,", 1), "placement"),
        ("stations.csv", lambda t: _move_first_station(t, "999999.00"), "inside"),
        ("species.csv", lambda t: t.replace("frequency,25", "frequency,", 1), "cells or pins"),
        ("programme.json", lambda t: t.replace('"crs_epsg": 32630', '"crs_epsg": 4326'), "project"),
    ],
)
def test_bad_file_writes_nothing(db_url, demo_source, tmp_path, file, edit, expected):
    folder = tmp_path / "p"
    shutil.copytree(demo_source, folder)
    path = folder / file
    path.write_text(edit(path.read_text()))
    before = table_counts(db_url)
    with pytest.raises(InputError) as info:
        setup.setup_folder(db_url, folder)
    assert expected in str(info.value).lower()
    assert file.split(".")[0] in str(info.value) or file in str(info.value)
    assert table_counts(db_url) == before


def test_invalid_site_polygon_is_refused(db_url, demo_source, tmp_path):
    folder = tmp_path / "p"
    shutil.copytree(demo_source, folder)
    doc = json.loads((folder / "sites.geojson").read_text())
    ring = doc["features"][0]["geometry"]["coordinates"][0]
    ring[1], ring[2] = ring[2], ring[1]  # a bow-tie: self-intersecting
    (folder / "sites.geojson").write_text(json.dumps(doc))
    before = table_counts(db_url)
    with pytest.raises(InputError, match="valid polygon"):
        setup.setup_folder(db_url, folder)
    assert table_counts(db_url) == before


def test_loading_the_same_stations_twice_is_refused(db_url, demo_source):
    setup.setup_folder(db_url, demo_source)
    before = table_counts(db_url)
    with pytest.raises(InputError, match="not already in the programme"):
        setup.load_file(db_url, "stations", demo_source / "stations.csv")
    assert table_counts(db_url) == before


@pytest.mark.parametrize("kind, file", [("species", "species.csv"), ("panels", "panels.csv"),
                                        ("observers", "observers.csv")])
def test_loading_codes_the_programme_holds_is_refused(db_url, demo_source, kind, file):
    setup.setup_folder(db_url, demo_source)
    before = table_counts(db_url)
    with pytest.raises(InputError, match="not already in the programme") as info:
        setup.load_file(db_url, kind, demo_source / file)
    assert len(info.value.problems) == len((demo_source / file).read_text().splitlines()) - 1  # every row named
    assert table_counts(db_url) == before
