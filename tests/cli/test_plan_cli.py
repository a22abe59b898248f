"""Design and season commands: refused requests give one line, exit 1 and write nothing; the happy path."""

from __future__ import annotations

import json

from sqlalchemy import create_engine, text

from monitor.cli.main import main
from monitor.config import database_url
from tests.conftest import table_counts


def _refused(db_url, argv, capsys, *expected):
    before = table_counts(db_url)
    capsys.readouterr()
    assert main(["--db", db_url, *argv]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1, err
    for word in expected:
        assert word in err[0], err[0]
    assert "Traceback" not in err[0]
    assert table_counts(db_url) == before
    return err[0]


def _polygon_file(path, ring):
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"code": "A"}, "geometry": {"type": "Polygon", "coordinates": [ring]}}]}))
    return path


def test_design_refusals(programme_db, tmp_path, capsys):
    # a site the programme does not have
    _refused(programme_db, ["design", "place", "NOPE", "--method", "random", "--n", "10", "--seed", "1"], capsys,
             "no site 'NOPE'")
    # exclusion zones covering the whole site (Chalk Bank spans 512520-512780 E, 5742040-5742220 N)
    cover = _polygon_file(tmp_path / "cover.geojson", [[512500, 5742000], [512800, 5742000], [512800, 5742300],
                                                        [512500, 5742300], [512500, 5742000]])
    _refused(programme_db, ["design", "place", "CB", "--method", "balanced", "--n", "10", "--seed", "1",
                            "--exclude", str(cover)], capsys, "exclusion zones cover the whole site CB")
    # missing options for the method
    _refused(programme_db, ["design", "place", "CB", "--method", "transect", "--spacing", "10"], capsys,
             "start point, bearing and length")
    # a revisit design that cannot be read
    _refused(programme_db, ["design", "assign-panels", "--design", "[1-x]"], capsys, "--design")


def test_invalid_stored_site_polygon_is_refused(programme_db, capsys):
    # a self-intersecting ("bow-tie") ring is not a valid polygon (OGC Simple Features)
    bowtie = json.dumps({"type": "Polygon", "coordinates": [[[512520, 5742040], [512780, 5742220],
                                                             [512780, 5742040], [512520, 5742220],
                                                             [512520, 5742040]]]})
    engine = create_engine(database_url(programme_db))
    with engine.begin() as connection:
        connection.execute(text("UPDATE site SET boundary_geojson = :b WHERE code = 'CB'"), {"b": bowtie})
    engine.dispose()
    _refused(programme_db, ["design", "place", "CB", "--method", "random", "--n", "10", "--seed", "1"], capsys,
             "site CB polygon is invalid")


def test_season_plan_refusals(programme_db, tmp_path, capsys):
    _refused(programme_db, ["season", "plan", "2027", "--teams", "0"], capsys, "no teams")
    # 15 September to 1 May wraps the new year (a southern summer) and misses every species' May-September window
    _refused(programme_db, ["season", "plan", "2027", "--teams", "2", "--window", "09-15", "05-01"], capsys,
             "species windows do not overlap the season window")
    far = tmp_path / "crews.json"
    far.write_text(json.dumps({"teams": [{"code": "A", "members": ["OBS01", "OBS02"]}],
                               "start_points": {"SM": [520000.0, 5750000.0]}}))
    _refused(programme_db, ["season", "plan", "2027", "--crews", str(far)], capsys, "outside the reserve")
    lone = tmp_path / "lone.json"
    lone.write_text(json.dumps({"teams": [{"code": "A", "members": ["OBS01"]}]}))
    _refused(programme_db, ["season", "plan", "2027", "--crews", str(lone)], capsys, "lone working")
    # nothing planned yet: no field packs to write
    _refused(programme_db, ["season", "pack", "2027", str(tmp_path / "packs")], capsys, "no plan is stored")
    assert not (tmp_path / "packs").exists()


def test_plan_due_pack_and_waypoints_from_the_command_line(programme_db, tmp_path, capsys):
    assert main(["--db", programme_db, "design", "panels", "--years", "3", "--from", "2027", "--json"]) == 0
    panels = json.loads(capsys.readouterr().out)
    assert panels["design"] == "[1-0,1-2]" and panels["years"] == [2027, 2028, 2029]
    assert main(["--db", programme_db, "season", "plan", "2027", "--teams", "2", "--seed", "4", "--json"]) == 0
    captured = capsys.readouterr()
    plan = json.loads(captured.out)
    assert plan["stored"] and plan["seed"] == 4 and plan["team_days"]
    assert "held back" in captured.err and "plan for 2027 stored" in captured.err
    assert main(["--db", programme_db, "season", "due", "2027", "--json"]) == 0
    due = json.loads(capsys.readouterr().out)
    assert {row["outcome"] for row in due} <= {"planned", "held_back"}
    first = plan["team_days"][0]
    assert main(["--db", programme_db, "season", "pack", "2027", str(tmp_path / "packs"), "--team", first["team"],
                 "--day", first["date"]]) == 0
    folder = tmp_path / "packs" / f"{first['date']}_{first['team']}_{first['site']}"
    assert {p.name for p in folder.iterdir()} == {"field_sheet.html", "entry_sheet.csv", "entry_sheet.xlsx", "route.gpx",
                                                      "phone_sheet.html"}
    assert (tmp_path / "packs" / "season_2027.ics").is_file()
    capsys.readouterr()
    assert main(["--db", programme_db, "design", "waypoints", str(tmp_path / "all.gpx")]) == 0
    assert "wrote 62 stations" in capsys.readouterr().err
