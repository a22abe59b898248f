"""The file reference (docs/files.md) is made from the same definitions the readers check files with.

The behavioural checks below are what make "the doc matches the readers" testable: a file written from
the documented example row loads; leaving out a documented required column is refused naming it; a
column the reference does not document is refused; a value outside the documented allowed values is
refused.
"""

from __future__ import annotations

import csv
import json

import pytest

from monitor.errors import InputError
from monitor.io import filespec as FS
from monitor.io.blank import blank_files, write_blank_setup
from monitor.io.events import read_management_events_csv
from monitor.io.programme import (
    read_observers_csv,
    read_panels_csv,
    read_season_windows_csv,
    read_sites_geojson,
    read_species_csv,
    read_stations_csv,
)
from monitor.io.records import read_field_records
from monitor.io.settings import read_programme_json
from tests.conftest import REPO_ROOT

TABLE_READERS = {
    "stations": lambda p: read_stations_csv(p, epsg=32630),
    "species": read_species_csv,
    "panels": read_panels_csv,
    "windows": read_season_windows_csv,
    "observers": read_observers_csv,
    "events": read_management_events_csv,
    "records": lambda p: read_field_records(p, layout="wide"),
}
SPECS = {s.key: s for s in FS.ALL_FILES}


def test_committed_reference_is_the_generated_one():
    committed = (REPO_ROOT / "docs" / "files.md").read_text(encoding="utf-8")
    assert committed == FS.reference_markdown(), "regenerate: python -m monitor.io.filespec > docs/files.md"


def test_reference_names_every_field_of_every_file():
    text = FS.reference_markdown()
    for spec in FS.ALL_FILES:
        assert f"## {spec.name}" in text
        for f in spec.fields:
            assert f"| `{f.name}` |" in text


def _write(path, spec, row: dict[str, str], drop: str | None = None, extra: str | None = None):
    names = [f.name for f in spec.fields if f.name != drop and ":" not in f.name]
    if spec.key == "records":
        names.append("MARVIO:count")
        row = {**row, "MARVIO:count": "12"}
    if extra:
        names.append(extra)
        row = {**row, extra: "x"}
    with path.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.DictWriter(handle, fieldnames=names, extrasaction="ignore")
        writer.writeheader()
        writer.writerow(row)


@pytest.mark.parametrize("key", sorted(TABLE_READERS))
def test_the_documented_example_row_reads(tmp_path, key):
    spec = SPECS[key]
    path = tmp_path / "f.csv"
    _write(path, spec, spec.example_row())
    frame = TABLE_READERS[key](path) if key != "records" else TABLE_READERS[key](path).visits
    assert len(frame) == 1


@pytest.mark.parametrize("key,column", [(k, c) for k in sorted(TABLE_READERS) for c in SPECS[k].required()
                                        if ":" not in c])
def test_a_documented_required_column_is_required(tmp_path, key, column):
    spec = SPECS[key]
    path = tmp_path / "f.csv"
    _write(path, spec, spec.example_row(), drop=column)
    with pytest.raises(InputError) as err:
        TABLE_READERS[key](path)
    assert column in str(err.value)


@pytest.mark.parametrize("key", sorted(k for k in TABLE_READERS if k != "records"))
def test_a_column_the_reference_does_not_document_is_refused(tmp_path, key):
    spec = SPECS[key]
    path = tmp_path / "f.csv"
    _write(path, spec, spec.example_row(), extra="colour_of_the_sky")
    with pytest.raises(InputError) as err:
        TABLE_READERS[key](path)
    assert "colour_of_the_sky" in str(err.value)


@pytest.mark.parametrize("key,column", [(k, f.name) for k in sorted(TABLE_READERS) for f in SPECS[k].fields
                                        if f.allowed])
def test_documented_allowed_values_are_the_readers(tmp_path, key, column):
    spec = SPECS[key]
    allowed = spec.field(column).allowed
    for value in allowed:  # every documented value is read ...
        row = spec.example_row() | {column: value}
        if key == "species" and value in ("frequency", "pin_hits"):
            row["n"] = "25"
        if key == "records" and value in ("missed", "inaccessible"):
            continue  # values with a missed visit are refused by the checks against the programme, not here
        path = tmp_path / f"{value}.csv"
        _write(path, spec, row)
        TABLE_READERS[key](path)
    path = tmp_path / "bad.csv"  # ... and one outside them is refused naming the column
    _write(path, spec, spec.example_row() | {column: "zzz-not-allowed"})
    with pytest.raises(InputError) as err:
        TABLE_READERS[key](path)
    assert column in str(err.value) or "zzz-not-allowed" in str(err.value)


def test_programme_keys_are_the_readers(tmp_path):
    doc = json.loads(blank_files()["programme.json"])
    assert set(doc) == {f.name for f in FS.PROGRAMME.fields}
    (tmp_path / "programme.json").write_text(json.dumps(doc))
    assert read_programme_json(tmp_path / "programme.json")["time_zone"] == "Europe/London"
    for name in FS.PROGRAMME.required():
        (tmp_path / "p.json").write_text(json.dumps({k: v for k, v in doc.items() if k != name}))
        with pytest.raises(InputError, match=name):
            read_programme_json(tmp_path / "p.json")
    (tmp_path / "p.json").write_text(json.dumps(doc | {"colour": 1}))
    with pytest.raises(InputError, match="colour"):
        read_programme_json(tmp_path / "p.json")
    (tmp_path / "p.json").write_text(json.dumps(doc | {"time_zone": "Mars/Olympus"}))
    with pytest.raises(InputError, match="time_zone"):
        read_programme_json(tmp_path / "p.json")


def test_site_properties_are_read(tmp_path):
    (tmp_path / "sites.geojson").write_text(blank_files()["sites.geojson"])
    frame = read_sites_geojson(tmp_path / "sites.geojson")
    for f in FS.SITES.fields:
        column = "site" if f.name == "code" else f.name
        assert column in frame.columns
    assert frame.loc[0, "name"] == FS.SITES.field("name").example


def test_trigger_kinds_are_the_reports():
    from monitor.report.triggers import TRIGGER_KINDS

    assert tuple(TRIGGER_KINDS) == FS.TRIGGER_KINDS


def test_crews_keys_are_the_readers(tmp_path):
    from monitor.services.schedule import read_crews_file

    team = {f.name: json.loads(f.example) if f.example.startswith("[") else f.example for f in FS.CREW_TEAM.fields}
    team["hours_per_day"], team["walking_speed_kmh"] = 7, 3
    doc = {"teams": [team], "start_points": {"SM": [512100, 5742000]}, "day_start": "08:30",
           "blocked_dates": ["2024-06-21"], "path_factor": 1.2}
    assert set(doc) == {f.name for f in FS.CREWS.fields}
    (tmp_path / "crews.json").write_text(json.dumps(doc))
    assert read_crews_file(tmp_path / "crews.json")["teams"][0].code == "A"
    (tmp_path / "crews.json").write_text(json.dumps(doc | {"lunch": "12:00"}))
    with pytest.raises(InputError, match="lunch"):
        read_crews_file(tmp_path / "crews.json")


def test_blank_folder_is_refused_when_files_exist(tmp_path):
    write_blank_setup(tmp_path / "new")
    before = (tmp_path / "new" / "stations.csv").read_bytes()
    with pytest.raises(InputError):
        write_blank_setup(tmp_path / "new")
    assert (tmp_path / "new" / "stations.csv").read_bytes() == before
