"""A station's whole history, for the office and the station page."""

from __future__ import annotations

from monitor import columns as C
from monitor.db import Store, queries
from monitor.services.common import station_by_code
from monitor.services.relocation import lineage_history


def station_history(db: str | None, code: str, *, programme_code: str | None = None) -> dict:
    """A station's full history: the station, every visit with its observers and values, corrections
    (change log), management events at the station or its site, photos, quality flags, and the
    relocations of the chain it belongs to (lineage).

    Values are keyed ``SPECIES:measure``; a missed or inaccessible visit has none (missing, not zero).
    """
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        with store.session() as session:
            st = station_by_code(session, programme.id, code, "station history")
        info = queries.stations(store, programme.id)
        info = info[info[C.STATION] == code].drop(columns=["placement_seed"]).iloc[0].to_dict()
        visits = queries.visits_table(store, programme.id, station=code)
        values = queries.observations_table(store, programme.id)
        values = values[values["visit_id"].isin(set(visits["visit_id"]))]
        by_visit: dict[int, dict[str, float]] = {}
        for vid, sp, me, value in zip(values["visit_id"], values[C.SPECIES], values[C.MEASURE], values["value"],
                                      strict=True):
            by_visit.setdefault(int(vid), {})[f"{sp}:{me}"] = float(value)
        visit_rows = [{
            C.YEAR: int(v[C.YEAR]), C.DATE: v[C.DATE], C.VISIT_STATUS: v[C.VISIT_STATUS], "repeat_no": int(v["repeat_no"]),
            C.PROTOCOL: v[C.PROTOCOL], "observers": ";".join(v["observers"]), "notes": v["notes"] or "",
            "values": by_visit.get(int(v["visit_id"]), {}),
        } for v in visits.to_dict(orient="records")]
        flags = queries.quality_flag_rows(store, programme.id)
        flags = flags[flags[C.STATION] == code].drop(columns=[C.STATION])
        return {
            "station": info,
            "visits": visit_rows,
            "changes": queries.station_change_log(store, st.id),
            "events": queries.station_events(store, st.id),
            "photos": queries.station_photos(store, st.id),
            "quality_flags": flags.reset_index(drop=True),
            "lineage": lineage_history(store, programme.id, code),
        }
    finally:
        store.dispose()
