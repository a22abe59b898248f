"""Quality checks on the stored records, kept as flags that someone resolves or accepts.

``run_checks`` reads the stored long table (values with their observers), the visits with their
outcomes, the stations with their panels and the visit covariates, runs
:func:`monitor.quality.quality_flags` on them, and stores what it finds in ``quality_flag``:

* a flag found for the first time is stored open;
* a flag found again keeps its id and state: an open one stays open (its wording brought up to date);
  one already resolved or accepted stays closed, so a value someone has checked is not raised again;
* an open flag the checks no longer find (the value was corrected, the overdue station visited) is
  closed as resolved with a note saying so, and opened again should the checks find it again.

Two flags are the same flag when they have the same kind, station, species and year and concern the
same thing: the measure for a jump, the observer for an observer difference, the covariate and visit for
a missing covariate (the numbers in the wording, such as a robust z, move as seasons are added).

Missing is not zero here either: the checks see only stored values, and a missed or inaccessible visit
has none.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

import pandas as pd

from monitor import columns as C
from monitor.db import Store, queries, select
from monitor.db import models as M
from monitor.db.models import utcnow
from monitor.errors import DataError, InputError, InputProblem
from monitor.io.programme import parse_revisit_rule
from monitor.quality import quality_flags
from monitor.services.common import current_user
from monitor.services.design import as_date
from monitor.settings import programme_settings

#: note on an open flag that the checks stopped finding (it reopens if they find it again)
AUTO_CLEARED = "no longer found by the checks on"
FLAG_TABLE_COLUMNS = ["id", "kind", C.STATION, C.SPECIES, C.YEAR, "severity", "state", "detail"]


@dataclass
class QualityRun:
    """What one run of the checks found and did."""

    open_flags: pd.DataFrame      # every open flag after the run (FLAG_TABLE_COLUMNS and note)
    all_flags: pd.DataFrame       # every stored flag, any state
    found: int                    # flags the checks raised this run
    new: int                      # of which stored for the first time
    already_closed: int           # of which were already resolved or accepted
    cleared: int                  # open flags no longer found, now resolved

    def summary(self) -> str:
        return (f"{self.found} flag{'s' if self.found != 1 else ''} found ({self.new} new, "
                f"{self.already_closed} already resolved or accepted); {self.cleared} open flag"
                f"{'s' if self.cleared != 1 else ''} no longer found and closed; {len(self.open_flags)} open")

    def to_dict(self) -> dict:
        return {"found": self.found, "new": self.new, "already_closed": self.already_closed,
                "cleared": self.cleared, "open_flags": self.open_flags}


def flag_identity(kind: str, station: object, species: object, year: object, detail: str) -> tuple:
    """What makes two flags the same flag (see the module notes)."""
    if kind == "jump":
        subject = detail.split(" ", 1)[0]          # the measure
    elif kind == "observer":
        subject = detail.split(":", 1)[0]          # "observer OBS03"
    elif kind == "overdue":
        subject = ""
    else:
        subject = detail
    none = lambda v: None if v is None or (not isinstance(v, str) and pd.isna(v)) else v  # noqa: E731
    year = none(year)
    return kind, none(station), none(species), None if year is None else int(year), subject


def check_inputs(store: Store, programme: M.Programme) -> dict:
    """The stored tables the checks read, in the frames :func:`monitor.quality.quality_flags` takes."""
    pid = programme.id
    # the columns the checks read, not the whole long table: a national programme holds a million values
    table = queries.observations_long(store, pid, columns=[C.STATION, C.SPECIES, C.MEASURE, C.YEAR, "value",
                                                           C.OBSERVER])
    visits = queries.visit_outcomes(store, pid)
    visits[C.DATE] = [as_date(d) for d in visits[C.DATE]]
    stations = queries.stations(store, pid)
    for column in ("established", "retired"):
        stations[column] = [as_date(d) for d in stations[column]]
    panels = queries.panels(store, pid)
    rules = [parse_revisit_rule(r) or (1, 0) for r in panels["rule"]]
    panels["visit_years"] = [a for a, _ in rules]
    panels["rest_years"] = [b for _, b in rules]
    covariates = queries.visit_covariates(store, pid)
    required = list(programme_settings(programme).required_covariates)
    return {"table": table, "visits": visits, "stations": stations, "panels": panels, "covariates": covariates,
            "required_covariates": required}


def run_checks(db: str | None, programme_code: str | None = None, *, current_year: int | None = None) -> QualityRun:
    """Run every quality check on the stored records and store the flags (see the module notes).

    ``current_year`` is the season in progress (default: this calendar year); its due visits are not yet
    overdue.
    """
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        inputs = check_inputs(store, programme)
        found = quality_flags(inputs["table"], visits=inputs["visits"], stations=inputs["stations"],
                              panels=inputs["panels"], covariates=inputs["covariates"],
                              required_covariates=inputs["required_covariates"],
                              current_year=current_year or dt.date.today().year)
        new = closed = cleared = 0
        with store.session() as session:
            station_ids = dict(session.exec(select(M.Station.code, M.Station.id)
                                            .where(M.Station.programme_id == programme.id)).all())
            species_ids = dict(session.exec(select(M.Species.code, M.Species.id)
                                            .where(M.Species.programme_id == programme.id)).all())
            station_code = {v: k for k, v in station_ids.items()}
            species_code = {v: k for k, v in species_ids.items()}
            stored = {}
            for flag in session.exec(select(M.QualityFlag).where(M.QualityFlag.programme_id == programme.id)
                                     .order_by(M.QualityFlag.id)).all():
                key = flag_identity(flag.kind, station_code.get(flag.station_id), species_code.get(flag.species_id),
                                    flag.year, flag.detail)
                stored.setdefault(key, flag)
            seen = set()
            for f in found.to_dict(orient="records"):
                key = flag_identity(f["kind"], f[C.STATION], f[C.SPECIES], f[C.YEAR], f["detail"])
                if key in seen:
                    continue
                seen.add(key)
                flag = stored.get(key)
                if flag is None:
                    session.add(M.QualityFlag(programme_id=programme.id, kind=f["kind"],
                                              station_id=station_ids.get(key[1]), species_id=species_ids.get(key[2]),
                                              year=key[3], detail=f["detail"], severity=f["severity"], state="open"))
                    new += 1
                elif flag.state == "open":
                    flag.detail, flag.severity = f["detail"], f["severity"]
                elif flag.state == "resolved" and flag.note.startswith(AUTO_CLEARED):
                    # closed only because the checks had stopped finding it: it is back, so open again
                    flag.state, flag.detail, flag.severity = "open", f["detail"], f["severity"]
                    flag.note = ""
                    new += 1
                else:
                    closed += 1
            today = dt.date.today().isoformat()
            for key, flag in stored.items():
                if flag.state == "open" and key not in seen:
                    flag.state = "resolved"
                    flag.note = f"{AUTO_CLEARED} {today}"
                    cleared += 1
        flags = queries.quality_flag_rows(store, programme.id)
        return QualityRun(open_flags=flags[flags["state"] == "open"].reset_index(drop=True), all_flags=flags,
                          found=len(seen), new=new, already_closed=closed, cleared=cleared)
    finally:
        store.dispose()


def list_flags(db: str | None, programme_code: str | None = None, *, states: tuple[str, ...] | None = ("open",)
               ) -> pd.DataFrame:
    """Stored flags (default: the open ones), without running the checks."""
    store = Store.open(db)
    try:
        return queries.quality_flag_rows(store, store.programme(programme_code).id, states=states)
    finally:
        store.dispose()


def resolve_flag(db: str | None, flag_id: int, *, note: str, accept: bool = False, who: str | None = None,
                 programme_code: str | None = None) -> str:
    """Close an open flag: ``resolved`` (the data were fixed) or ``accepted`` (the value is real), with a note
    that is kept on the flag and in the change log."""
    if not (note and note.strip()):
        raise InputError(InputProblem("quality resolve", None, "--note", None, "a note saying what was found"))
    who = who or current_user()
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        with store.session() as session:
            flag = session.get(M.QualityFlag, flag_id)
            if flag is None or flag.programme_id != programme.id:
                raise DataError(f"no quality flag {flag_id} in programme {programme.code}; `monitor quality` lists them")
            if flag.state != "open":
                raise DataError(f"quality flag {flag_id} is already {flag.state} ({flag.note})")
            new_state = "accepted" if accept else "resolved"
            session.add(M.ChangeLog(programme_id=programme.id, table_name="quality_flag", row_id=flag.id,
                                    field="state", old_value=flag.state, new_value=new_state, reason=note.strip(),
                                    changed_by=who, changed_at=utcnow()))
            flag.state, flag.note = new_state, note.strip()
            return f"quality flag {flag_id} {new_state}"
    finally:
        store.dispose()
