"""What the services share: who is working, a transaction run again after a transient failure, a station
looked up by code, the target species asked for, a reason required, a change-log row, and a stored value's
change."""

from __future__ import annotations

import dataclasses
import datetime as dt
import difflib
import getpass
import os
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import TypeVar

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor.db import Session, Store, queries, select
from monitor.db import models as M
from monitor.errors import InputError, InputProblem, MonitorError

T = TypeVar("T")

#: attempts of one transaction when the database reports a transient failure (serialization failure,
#: deadlock, a busy SQLite file, a round or visit created first by a concurrent import)
ATTEMPTS = 6


@dataclass
class Change:
    """One stored value that an import or correction changes."""

    station: str
    year: int
    date: str
    field: str
    old: object
    new: object

    def line(self) -> str:
        return f"{self.station} {self.date}: {self.field} {self.old!r} -> {self.new!r}"


def current_user() -> str:
    try:
        return os.environ.get("MONITOR_USER") or getpass.getuser()
    except (KeyError, OSError):
        return "unknown"


def run_with_retries(work: Callable[[], T], *, attempts: int = ATTEMPTS, first_wait: float = 0.05) -> T:
    """Run one transaction's work, again from the start when it failed for a transient reason.

    The wait doubles after each failed attempt (exponential backoff), offset by the process id so that
    two processes that collided do not retry in step.
    """
    for attempt in range(attempts):
        try:
            return work()
        except MonitorError as exc:
            if attempt == attempts - 1 or not queries.retryable(exc):
                raise
            time.sleep(first_wait * (2 ** attempt) * (1 + (os.getpid() % 11) / 11))
    raise AssertionError("unreachable")  # pragma: no cover


def closest(code: str, choices: list[str]) -> str:
    """``"; closest: A, B"`` naming up to three codes like ``code``, or nothing."""
    close = difflib.get_close_matches(code, choices, n=3, cutoff=0.5)
    return f"; closest: {', '.join(close)}" if close else ""


def station_by_code(session: Session, programme_id: int, code: str, label: str) -> M.Station:
    """The programme's station ``code``; an unknown code is refused naming the closest ones."""
    station = session.exec(select(M.Station).where(M.Station.programme_id == programme_id,
                                                   M.Station.code == code)).first()
    if station is None:
        codes = list(session.exec(select(M.Station.code).where(M.Station.programme_id == programme_id)).all())
        raise InputError(InputProblem(label, None, "STATION", code, "a station of the programme" + closest(code, codes)))
    return station


def target_species(store: Store, programme_id: int, species: list[str] | None) -> pd.DataFrame:
    """The programme's target species and measures (``queries.species`` rows with a measure), only those of
    ``species`` when given; a code that is not a target is refused naming the targets."""
    targets = queries.species(store, programme_id).dropna(subset=[C.MEASURE])
    if species:
        unknown = sorted(set(species) - set(targets[C.SPECIES]))
        if unknown:
            raise InputError(InputProblem("--species", None, None, ", ".join(unknown),
                                          f"a target species code ({', '.join(targets[C.SPECIES])})"))
        targets = targets[targets[C.SPECIES].isin(species)]
    return targets


def need_reason(label: str, reason: str | None, why: str) -> str:
    """The reason given, stripped; a missing or blank one is refused saying ``why`` one is needed."""
    if not (reason and reason.strip()):
        raise InputError(InputProblem(label, None, "--reason", None, why))
    return reason.strip()


def log_change(session: Session, programme_id: int, table: str, row_id: int, field_: str, old: object, new: object,
               reason: str, who: str, when: dt.datetime) -> None:
    """One row of the change log: old and new value as text (None stays None)."""
    session.add(M.ChangeLog(programme_id=programme_id, table_name=table, row_id=row_id, field=field_,
                            old_value=None if old is None else str(old), new_value=None if new is None else str(new),
                            reason=reason, changed_by=who, changed_at=when))


def plain_problems(problems: list[InputProblem]) -> list[InputProblem]:
    """The same problems with numpy scalars shown as plain numbers (``130.0``, not ``np.float64(130.0)``)."""
    out = []
    for p in problems:
        value = p.value.item() if isinstance(p.value, np.generic) else p.value
        out.append(dataclasses.replace(p, value=value) if value is not p.value else p)
    return out
