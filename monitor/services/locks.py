"""Certifying a season after review (a lock no import or correction passes), and unlocking it with a reason."""

from __future__ import annotations

from monitor.db import Store, select
from monitor.db import models as M
from monitor.db.models import utcnow
from monitor.errors import DataError, InputError, InputProblem
from monitor.services.common import current_user


def set_lock(db: str | None, year: int, *, lock: bool, reason: str | None = None, who: str | None = None,
             programme_code: str | None = None) -> str:
    """Certify (lock) a season after review, or unlock it with a reason (logged)."""
    who = who or current_user()
    if not lock and not (reason and reason.strip()):
        raise InputError(InputProblem("--reason", None, None, None, "a reason to unlock a certified season"))
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        with store.session() as session:
            rnd = session.exec(select(M.Round).where(M.Round.programme_id == programme.id, M.Round.year == year)).first()
            if rnd is None:
                raise DataError(f"no round for season {year} in programme {programme.code}")
            old = rnd.status
            new = "certified" if lock else "open"
            if old == new:
                return f"season {year} is already {'certified' if lock else 'open'}"
            rnd.status = new
            rnd.certified_by = who if lock else None
            rnd.certified_at = utcnow() if lock else None
            session.add(M.ChangeLog(programme_id=programme.id, table_name="round", row_id=rnd.id, field="status",
                                    old_value=old, new_value=new, reason=reason or "certified after review",
                                    changed_by=who, changed_at=utcnow()))
            return f"season {year} {'certified (locked)' if lock else 'unlocked'}"
    finally:
        store.dispose()


# --- office commands: one value, one photo, one station -------------------------------------------------------
