"""The demo's growth steps: a balanced panel placed and extended, one quadrat moved."""

from __future__ import annotations

from monitor import columns as C
from monitor.db import Store, queries
from monitor.services.demo_growth import GROWTH_SEED, MOVED_STATION, grow


def test_demo_growth(programme_db):
    done = grow(programme_db, None)
    placed, extended = done["placed"], done["extended"]
    assert len(placed.stations) == 8 and len(extended.stations) == 4
    # the extension continues the first run's Halton order: every new index is beyond the first run's
    assert extended.stations["halton_index"].min() > placed.stations["halton_index"].max()
    store = Store.open(programme_db)
    try:
        pid = store.programme().id
        st = queries.stations(store, pid)
        moves = queries.relocations(store, pid)
    finally:
        store.dispose()
    panel = st[st[C.STATION].str.startswith("WE-B")]
    assert len(panel) == 12 and set(panel["placement_seed"]) == {GROWTH_SEED} and set(panel[C.PANEL]) == {"ANNUAL"}
    assert list(moves["from_station"]) == [MOVED_STATION] and float(moves["distance_m"].iloc[0]) == 4.0
