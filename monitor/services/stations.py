"""Retiring a station, with a reason, a date and an optional replacement, every field logged."""

from __future__ import annotations

import datetime as dt

from monitor.db import Store, select
from monitor.db import models as M
from monitor.db.models import utcnow
from monitor.errors import DataError, InputError, InputProblem
from monitor.services.common import current_user, log_change, need_reason, station_by_code


def retire_station(db: str | None, code: str, *, reason: str | None, replaced_by: str | None = None,
                   date: dt.date | None = None, who: str | None = None, programme_code: str | None = None) -> str:
    """Retire a station (from ``date``, default today), with a reason and an optional replacement; logged.

    Its stored visits stay; imports refuse visits on or after the retirement date.
    """
    label = "station retire"
    reason = need_reason(label, reason, "a reason for retiring the station (it goes to the change log)")
    who = who or current_user()
    date = date or dt.date.today()
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        with store.session() as session:
            st = station_by_code(session, programme.id, code, label)
            if st.state != "in_service":
                raise DataError(f"station {code} is already {st.state} (since {st.retired})")
            if st.established is not None and date < st.established:
                raise InputError(InputProblem(label, None, "--date", date.isoformat(),
                                              f"a date on or after the station was established ({st.established})"))
            later = [v.date for v in session.exec(select(M.Visit).where(M.Visit.station_id == st.id)).all()
                     if v.date >= date]
            if later:
                raise InputError(InputProblem(label, None, "--date", date.isoformat(),
                                              f"a date after the station's last visit ({max(later).isoformat()})"))
            replacement = None
            if replaced_by is not None:
                replacement = station_by_code(session, programme.id, replaced_by, label)
                if replacement.id == st.id:
                    raise InputError(InputProblem(label, None, "--replaced-by", replaced_by, "another station"))
                if replacement.state != "in_service":
                    raise InputError(InputProblem(label, None, "--replaced-by", replaced_by, "a station in service"))
            now = utcnow()
            for field_, old, new in (("state", st.state, "retired"), ("retired", None, date.isoformat()),
                                     ("retired_reason", st.retired_reason or None, reason),
                                     ("replaced_by", None, replaced_by)):
                if old != new:
                    log_change(session, programme.id, "station", st.id, field_, old, new, reason, who, now)
            st.state, st.retired, st.retired_reason = "retired", date, reason
            st.replaced_by_id = replacement.id if replacement is not None else None
            return (f"station {code} retired from {date.isoformat()}"
                    + (f", replaced by {replaced_by}" if replaced_by else ""))
    finally:
        store.dispose()
