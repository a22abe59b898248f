"""The demo's programme grows and moves: a balanced panel placed and later extended, and a quadrat moved.

Steps 12 and 13 of ``monitor demo``, after the report so that the seasons analysed are untouched: the
reserve places a balanced (BAS) panel of 8 new quadrats on Woodland Edge, extends it by 4 along the same
Halton order when funds allow (the enlarged panel stays spatially balanced), and records that one
quadrat of Stream Meadow moved 4 m east when the path beside it was widened: a new station continues it.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from typing import Any

from monitor.db import Store, queries
from monitor.services import design, relocation

GROWTH_SITE = "WE"
GROWTH_SEED = 2027
MOVED_STATION = "SM-12"
MOVED_ON = dt.date(2026, 11, 16)


def grow(db: str, code: str, *, echo: Callable[[str], None] = lambda _m: None, step: int = 12) -> dict[str, Any]:
    """Place and extend a balanced panel, then move one quadrat; returns what was done."""
    echo(f"{step}. a balanced panel of 8 new quadrats on Woodland Edge (seed {GROWTH_SEED}, 10 m apart), "
         "then extended by 4 along the same Halton order")
    placed = design.place_stations(db, GROWTH_SITE, "balanced", n=8, seed=GROWTH_SEED, min_separation=10.0,
                                   panel="ANNUAL", programme_code=code)
    extended = design.extend_stations(db, GROWTH_SITE, 4, panel="ANNUAL", programme_code=code)
    store = Store.open(db)
    try:
        old = queries.stations(store, store.programme(code).id).set_index("station").loc[MOVED_STATION]
    finally:
        store.dispose()
    echo(f"{step + 1}. quadrat {MOVED_STATION} moved 4 m east on {MOVED_ON.isoformat()} (path widened): "
         "a new station continues it")
    moved = relocation.move_station(db, MOVED_STATION, to=(float(old["x"]) + 4.0, float(old["y"])),
                                    reason="path beside the quadrat widened", date=MOVED_ON, fix_method="GNSS RTK",
                                    accuracy_m=0.05, who="demo", programme_code=code)
    return {"placed": placed, "extended": extended, "moved": moved}
