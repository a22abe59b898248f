"""Lost and moved quadrats: a relocation is a NEW station that continues the old one, never an edit.

:func:`move_station` retires the old station (state ``lost`` when its marker was lost and the quadrat
re-established, ``retired`` when it was moved on purpose) from the relocation date, adds a new station at
the new position that inherits site, stratum, panel, placement, quadrat size and transect, and records the
relocation (both stations, date, reason, distance moved) in ``station_relocation``.  Every field changed on
the old station goes to the change log with the reason.  The old station's visits and values stay as they
were; imports refuse visits to it on or after the date.

The trend models treat a chain of relocations as one station (see :mod:`monitor.design.lineage` and
DEVELOPERS.md, "Relocated quadrats").
"""

from __future__ import annotations

import datetime as dt
import json
import re
from dataclasses import dataclass
from typing import Any

import pandas as pd
from shapely.geometry import Point, shape

from monitor import columns as C
from monitor.db import Session, Store, queries, select
from monitor.db import models as M
from monitor.db.models import utcnow
from monitor.design.lineage import Relocation, lineage_keys
from monitor.errors import DataError, InputError, InputProblem
from monitor.services.common import current_user, need_reason

LABEL = "station move"
#: a moved quadrat that lands this far outside its site's boundary is refused [m] (a GNSS fix near the edge
#: may fall just outside; common practice)
BOUNDARY_TOLERANCE_M = 5.0


@dataclass
class MoveResult:
    old: str
    new: str
    date: dt.date
    lost: bool
    distance_m: float
    lineage: str

    def to_dict(self) -> dict[str, Any]:
        return {"old": self.old, "new": self.new, "date": self.date.isoformat(), "lost": self.lost,
                "distance_m": self.distance_m, "lineage": self.lineage}

    def message(self) -> str:
        what = "re-established after its marker was lost" if self.lost else "moved"
        return (f"station {self.old} {what} on {self.date.isoformat()}: continues as {self.new}, "
                f"{self.distance_m:.1f} m away (lineage {self.lineage}; logged)")


def _free_code(codes: set[str], old: str) -> str:
    base = re.sub(r"R\d*$", "", old) if re.search(r"R\d*$", old) else old
    for k in range(1, 1000):
        code = f"{base}R" if k == 1 else f"{base}R{k}"
        if code not in codes:
            return code
    raise DataError(f"no free code for the station that continues {old}; give --new-code")


def move_station(db: str | None, code: str, *, to: tuple[float, float], reason: str | None, date: dt.date,
                 lost: bool = False, new_code: str | None = None, fix_method: str = "", accuracy_m: float | None = None,
                 marker: str | None = None, notes: str = "", who: str | None = None,
                 programme_code: str | None = None) -> MoveResult:
    """Record that station ``code`` moved to ``to`` (x, y in the programme CRS [m]) on ``date``.

    Refused, with nothing written, when the reason is blank, the station is not in service, the date is
    before the station was set out or not after its last visit, the new position is outside the site, or
    the new code is taken.
    """
    reason = need_reason(LABEL, reason, "a reason for the move (it goes to the change log)")
    who = who or current_user()
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        with store.session() as session:
            return _move(session, programme, code, to, reason, date, lost, new_code, fix_method, accuracy_m, marker,
                         notes, who)
    finally:
        store.dispose()


def _move(session: Session, programme: M.Programme, code: str, to: tuple[float, float], reason: str, date: dt.date,
          lost: bool, new_code: str | None, fix_method: str, accuracy_m: float | None, marker: str | None, notes: str,
          who: str) -> MoveResult:
    pid = programme.id
    stations = session.exec(select(M.Station).where(M.Station.programme_id == pid)).all()
    by_code = {s.code: s for s in stations}
    old = by_code.get(code)
    if old is None:
        raise InputError(InputProblem(LABEL, None, "CODE", code, "a station of the programme"))
    if old.state != "in_service":
        raise DataError(f"station {code} is already {old.state} (since {old.retired}); move the station that "
                        "continues it instead")
    if old.established is not None and date < old.established:
        raise InputError(InputProblem(LABEL, None, "--date", date.isoformat(),
                                      f"a date on or after the station was set out ({old.established})"))
    later = [v.date for v in session.exec(select(M.Visit).where(M.Visit.station_id == old.id)).all() if v.date >= date]
    if later:
        raise InputError(InputProblem(LABEL, None, "--date", date.isoformat(),
                                      f"a date after the station's last visit ({max(later).isoformat()})"))
    site = session.get(M.Site, old.site_id)
    if site.boundary_geojson:
        boundary = shape(json.loads(site.boundary_geojson))
        if boundary.distance(Point(to)) > BOUNDARY_TOLERANCE_M:
            raise InputError(InputProblem(LABEL, None, "--to", f"{to[0]:g},{to[1]:g}",
                                          f"a position inside site {site.code} (programme CRS EPSG:{programme.crs_epsg})"))
    new_code = (new_code or "").strip() or _free_code(set(by_code), code)
    if new_code in by_code:
        raise InputError(InputProblem(LABEL, None, "--new-code", new_code, "a station code not already in the programme"))
    relocation = Relocation(code, new_code, date.isoformat(), reason, lost, (old.x, old.y), (float(to[0]), float(to[1])))
    new = M.Station(
        programme_id=pid, code=new_code, site_id=old.site_id, stratum_id=old.stratum_id, panel_id=old.panel_id,
        placement=old.placement, placement_seed=old.placement_seed, x=float(to[0]), y=float(to[1]),
        crs_epsg=old.crs_epsg, fix_method=fix_method or old.fix_method, accuracy_m=accuracy_m,
        quadrat_width_m=old.quadrat_width_m, quadrat_length_m=old.quadrat_length_m, transect=old.transect,
        distance_m=old.distance_m, established=date, marker=old.marker if marker is None else marker,
        relocation_notes="; ".join(x for x in (relocation.note(), notes.strip()) if x))
    session.add(new)
    session.flush()
    now = utcnow()
    state = "lost" if lost else "retired"
    for field_, before, after in (("state", old.state, state), ("retired", None, date.isoformat()),
                                  ("retired_reason", old.retired_reason or None, reason),
                                  ("replaced_by", None, new_code)):
        session.add(M.ChangeLog(programme_id=pid, table_name="station", row_id=old.id, field=field_,
                                old_value=None if before is None else str(before), new_value=after, reason=reason,
                                changed_by=who, changed_at=now))
    session.add(M.ChangeLog(programme_id=pid, table_name="station", row_id=new.id, field="continues", old_value=None,
                            new_value=f"{code} ({relocation.distance_m:.1f} m)", reason=reason, changed_by=who,
                            changed_at=now))
    old.state, old.retired, old.retired_reason, old.replaced_by_id = state, date, reason, new.id
    session.add(M.StationRelocation(programme_id=pid, from_station_id=old.id, to_station_id=new.id, date=date,
                                    reason=reason, lost=lost, distance_m=relocation.distance_m, recorded_by=who,
                                    recorded_at=now))
    session.flush()
    root = _lineage_of(session, pid).get(code, code)
    return MoveResult(code, new_code, date, lost, relocation.distance_m, root)


def _lineage_of(session: Session, programme_id: int) -> dict[str, str]:
    codes = dict(session.exec(select(M.Station.id, M.Station.code).where(M.Station.programme_id == programme_id)).all())
    moves = session.exec(select(M.StationRelocation).where(M.StationRelocation.programme_id == programme_id)).all()
    frame = _link_frame(list(codes.values()), {codes[r.from_station_id]: codes[r.to_station_id] for r in moves})
    return lineage_keys(frame).to_dict()


def _link_frame(codes: list[str], links: dict[str, str]) -> pd.DataFrame:
    return pd.DataFrame({C.STATION: codes, "replaced_by": [links.get(c) for c in codes]})


def lineage(store: Store, programme_id: int) -> pd.Series:
    """Every station's lineage (first station of its relocation chain), from the recorded relocations."""
    codes = store.frame("SELECT code FROM station WHERE programme_id = :p", p=programme_id)["code"].tolist()
    moves = queries.relocations(store, programme_id)
    return lineage_keys(_link_frame(codes, dict(zip(moves["from_station"], moves["to_station"], strict=True))))


def lineage_history(store: Store, programme_id: int, code: str) -> pd.DataFrame:
    """The relocations of the chain ``code`` belongs to (oldest first): from, to, date, lost, distance, reason."""
    keys = lineage(store, programme_id)
    root = keys.get(code, code)
    members = set(keys[keys == root].index)
    moves = queries.relocations(store, programme_id)
    moves = moves[moves["from_station"].isin(members)].reset_index(drop=True)
    moves["lost"] = moves["lost"].astype(bool)
    return moves[["from_station", "to_station", "date", "lost", "distance_m", "reason", "recorded_by"]]


def lineage_notes(store: Store, programme_id: int) -> dict[str, str]:
    """For each station that continues another: a line for the field sheet (what it continues, how far, when)."""
    moves = queries.relocations(store, programme_id)
    keys = lineage(store, programme_id)
    out = {}
    for r in moves.to_dict(orient="records"):
        day = str(r["date"])[:10]
        why = "marker lost" if bool(r["lost"]) else "moved"
        root = keys.get(r["to_station"], r["from_station"])
        chain = f" (series of {root})" if root != r["from_station"] else ""
        out[str(r["to_station"])] = (f"Continues {r['from_station']}{chain}: {why} {day}, "
                                     f"{float(r['distance_m']):.1f} m from the old position")
    return out
