"""Zero versus missing through the whole path, for a programme whose blanks mean zero.

The rule (docs/files.md, "field records": blank = not recorded; 0 = recorded absent): a blank cell on a done visit of a programme
that says blanks mean zero is a recorded absence (a stored 0); a partial visit's blank is not recorded; a
missed or inaccessible visit has no values at all, and every table built from the store keeps that meaning.
Invented programme and values.
"""

from __future__ import annotations

import json

from monitor import columns as C
from monitor.db import Store, queries
from monitor.services import exports, setup
from monitor.services.history import station_history
from monitor.services.imports import import_records
from tests.services.test_records_data import HEADER, make_programme, write_sheet


def test_blank_is_zero_only_on_done_visits_and_missing_stays_missing(db_url, tmp_path):
    folder = tmp_path / "programme"
    codes = make_programme(folder, 4, first_year=2000)
    meta = json.loads((folder / "programme.json").read_text())
    meta["blanks_mean_zero"] = True
    (folder / "programme.json").write_text(json.dumps(meta))
    setup.setup_folder(db_url, folder)
    rows = [
        [codes[0], "2020-06-20", "OBS01", "done", "no", "", "", "5", "", "12.5", "3", "4"],   # CHAORC blank -> 0
        [codes[1], "2020-06-21", "OBS02", "partial", "no", "", "rain", "7", "", "", "", ""],  # blanks not recorded
        [codes[2], "2020-06-22", "", "missed", "no", "", "", "", "", "", "", ""],
        [codes[3], "2020-06-22", "", "inaccessible", "no", "", "flooded", "", "", "", "", ""],
    ]
    assert len(rows[0]) == len(HEADER)
    report = import_records(db_url, write_sheet(tmp_path / "s.csv", rows))
    assert report.visits_added == 4 and report.observations_added == 5 + 1
    store = Store.open(db_url)
    try:
        pid = store.programme().id
        long = queries.observations_long(store, pid)
        visits = queries.visits_table(store, pid)
    finally:
        store.dispose()
    done = long[long[C.STATION] == codes[0]].set_index(C.SPECIES)["value"].to_dict()
    assert done == {"MARVIO": 5.0, "CHAORC": 0.0, "GLASED": 12.5, "HEABEL": 3.0, "SILGRA": 4.0}
    partial = long[long[C.STATION] == codes[1]]
    assert list(partial[C.SPECIES]) == ["MARVIO"]
    assert not set(long[C.STATION]) & {codes[2], codes[3]}
    assert set(visits[C.STATION]) == set(codes)  # the missing visits are stored, as visits without values
    history = station_history(db_url, codes[2])
    assert history["visits"][0]["status"] == "missed" and history["visits"][0]["values"] == {}
    paths = exports.export_csv(db_url, tmp_path / "csv")
    lines = paths["observations"].read_text().splitlines()
    assert len(lines) == 1 + 6 and not any(codes[2] in line or codes[3] in line for line in lines)
