"""Linking a photo to a station (and to one of its visits), with the bearing and height to frame repeats alike."""

from __future__ import annotations

import datetime as dt

from monitor.db import Store, select
from monitor.db import models as M
from monitor.errors import InputError, InputProblem
from monitor.services.common import station_by_code


def add_photo(db: str | None, station: str, *, path: str, visit_date: dt.date | None = None,
              bearing: float | None = None, height: float | None = None, notes: str = "",
              programme_code: str | None = None) -> int:
    """Link a photo (by file path) to a station, and to its visit on ``visit_date``; return the photo's id.

    Bearing [degrees from north, 0 to < 360] and camera height [m] let repeat photos be framed alike.
    """
    label = "records photo"
    if not path or not path.strip():
        raise InputError(InputProblem(label, None, "--path", path, "the photo's file path"))
    if bearing is not None and not (0 <= bearing < 360):
        raise InputError(InputProblem(label, None, "--bearing", bearing, "a bearing in degrees, 0 to less than 360"))
    if height is not None and not (0 <= height <= 100):
        raise InputError(InputProblem(label, None, "--height", height, "a camera height in metres, 0 to 100"))
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        with store.session() as session:
            st = station_by_code(session, programme.id, station, label)
            visit_id = None
            if visit_date is not None:
                visits = session.exec(select(M.Visit).where(M.Visit.station_id == st.id)).all()
                same_day = [v for v in visits if v.date == visit_date]
                if not same_day:
                    dates = ", ".join(sorted(v.date.isoformat() for v in visits)[-5:]) or "none stored"
                    raise InputError(InputProblem(label, None, "--visit-date", visit_date.isoformat(),
                                                  f"the date of a stored visit of {station} (latest: {dates})"))
                visit_id = min(same_day, key=lambda v: v.repeat_no).id
            photo = M.Photo(station_id=st.id, visit_id=visit_id, path=path.strip(), bearing_deg=bearing,
                            height_m=height, notes=notes or "")
            session.add(photo)
            session.flush()
            return int(photo.id)
    finally:
        store.dispose()
