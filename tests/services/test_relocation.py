"""Lost and moved quadrats: `monitor station move` adds a NEW station that continues the old one."""

from __future__ import annotations

import datetime as dt
import math

from monitor import columns as C
from monitor.cli.main import main
from monitor.db import Store, queries
from monitor.services import relocation, schedule, setup, trend
from monitor.services.history import station_history
from monitor.services.imports import import_records
from tests.cli.test_plan_cli import _refused


def _stations(db):
    store = Store.open(db)
    try:
        return queries.stations(store, store.programme().id).set_index(C.STATION)
    finally:
        store.dispose()


def test_move_keeps_history_links_and_logs(programme_db, capsys):
    before = _stations(programme_db).loc["SM-12"]
    old_xy = (float(before[C.X]), float(before[C.Y]))
    to = (old_xy[0] + 3.0, old_xy[1] - 4.0)
    assert main(["--db", programme_db, "station", "move", "SM-12", "--to", f"{to[0]},{to[1]}", "--reason",
                 "marker pulled by livestock", "--date", "2026-03-02", "--lost", "--fix", "GNSS RTK"]) == 0
    err = capsys.readouterr().err
    assert "continues as SM-12R" in err and "5.0 m" in err  # 3-4-5 triangle
    st = _stations(programme_db)
    old, new = st.loc["SM-12"], st.loc["SM-12R"]
    # the old station is untouched except its state: position and set-out date are as they were
    assert (float(old[C.X]), float(old[C.Y])) == old_xy and old["established"] == before["established"]
    assert old["state"] == "lost" and str(old["retired"])[:10] == "2026-03-02" and old["replaced_by"] == "SM-12R"
    assert (float(new[C.X]), float(new[C.Y])) == to and new["state"] == "in_service"
    assert str(new["established"])[:10] == "2026-03-02" and new[C.PANEL] == old[C.PANEL]
    assert new["fix_method"] == "GNSS RTK" and "continues SM-12" in new["relocation_notes"]
    store = Store.open(programme_db)
    try:
        pid = store.programme().id
        moves = queries.relocations(store, pid)
        log = store.frame("SELECT field, new_value, reason FROM change_log ORDER BY id")
        chains = relocation.lineage(store, pid)
    finally:
        store.dispose()
    assert list(moves["from_station"]) == ["SM-12"] and list(moves["to_station"]) == ["SM-12R"]
    assert math.isclose(float(moves["distance_m"].iloc[0]), 5.0) and bool(moves["lost"].iloc[0])
    assert {"state", "retired", "retired_reason", "replaced_by", "continues"} <= set(log["field"])
    assert set(log["reason"]) == {"marker pulled by livestock"}
    assert chains["SM-12R"] == "SM-12" == chains["SM-12"]
    # moving the new one again keeps the lineage of the first
    relocation.move_station(programme_db, "SM-12R", to=(to[0], to[1] + 2.0), reason="flood scour",
                            date=dt.date(2026, 4, 1), who="test")
    history = station_history(programme_db, "SM-12R2")
    assert list(history["lineage"]["from_station"]) == ["SM-12", "SM-12R"]
    assert list(history["lineage"]["distance_m"]) == [5.0, 2.0]
    assert main(["--db", programme_db, "station", "history", "SM-12R2"]) == 0
    assert "Lineage" in capsys.readouterr().out


def test_move_refusals_write_nothing(programme_db, capsys):
    x, y = (float(v) for v in _stations(programme_db).loc["CB-03", [C.X, C.Y]])
    base = ["station", "move", "CB-03", "--date", "2026-03-02"]
    _refused(programme_db, [*base, "--to", f"{x + 5},{y}", "--reason", " "], capsys, "--reason")
    # far outside Chalk Bank (512520-512780 E)
    _refused(programme_db, [*base, "--to", f"{x + 900},{y}", "--reason", "r"], capsys, "--to", "inside site CB")
    _refused(programme_db, [*base, "--to", f"{x + 5},{y}", "--reason", "r", "--new-code", "CB-04"], capsys,
             "--new-code", "CB-04")
    _refused(programme_db, ["station", "move", "CB-03", "--date", "2010-01-01", "--to", f"{x + 5},{y}", "--reason",
                            "r"], capsys, "--date")
    # a retired station cannot move: the station that continues it does
    _refused(programme_db, ["station", "move", "CB-14", "--date", "2026-01-01", "--to", f"{x},{y}", "--reason", "r"],
             capsys, "CB-14", "already retired")


def test_trend_treats_the_moved_pair_as_one_station(db_url, demo_source):
    setup.setup_folder(db_url, demo_source)
    for year in range(2015, 2027):
        if year == 2021:
            # WE-03 moves 4 m before the 2021 season; its 2021+ visits are keyed to the new station
            relocation.move_station(db_url, "WE-03", to=_shift(db_url, "WE-03", 4.0), reason="path widened",
                                    date=dt.date(2021, 1, 15), who="test")
        path = demo_source / "records" / f"season_{year}.csv"
        if year >= 2021:
            text = path.read_text().replace("WE-03,", "WE-03R,")
            path = _copy(path, text, db_url)
        import_records(db_url, path)
    fits = {t.species: t for t in trend.fit_programme(db_url, species=["MARVIO"])}
    marvio = fits["MARVIO"]
    # MARVIO grows in SM and WE (truth.json); WE-03 and WE-03R are one station of the model
    store = Store.open(db_url)
    try:
        long = queries.observations_long(store, store.programme().id, species="MARVIO")
    finally:
        store.dispose()
    present = long[long["value"] > 0]
    codes = set(present[C.STATION])
    assert {"WE-03", "WE-03R"} <= codes
    assert marvio.result.n_stations == len(codes) - 1
    assert any(d.code == "relocated_stations" for d in marvio.notes)


def _shift(db, code, dx):
    st = _stations(db).loc[code]
    return float(st[C.X]) + dx, float(st[C.Y])


def _copy(path, text, db_url):
    import tempfile
    from pathlib import Path

    folder = Path(tempfile.mkdtemp())
    out = folder / path.name
    out.write_text(text)
    return out


def test_field_sheet_shows_the_lineage(db_url, demo_source, tmp_path):
    setup.setup_folder(db_url, demo_source)
    import_records(db_url, demo_source / "records" / "season_2026.csv")
    relocation.move_station(db_url, "SM-T03", to=_shift(db_url, "SM-T03", 2.0), reason="bank collapse",
                            date=dt.date(2026, 10, 1), who="test")
    schedule.plan_season(db_url, 2027, teams=2, seed=3)
    plan = schedule.plan_season(db_url, 2027, teams=2, seed=3, dry_run=True).plan
    td = next(t for t in plan.team_days if "SM-T03R" in t.stations)
    schedule.write_field_packs(db_url, 2027, tmp_path, team=td.team, day=td.date)
    sheet = next(tmp_path.glob("*/field_sheet.html")).read_text()
    assert "Continues SM-T03: moved 2026-10-01, 2.0 m from the old position" in sheet
