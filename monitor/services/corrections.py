"""Correcting stored records from the office: one value of a visit (``records set``), a visit's protocol and
covariates (``records set-visit``).  Each change is checked as an imported one would be, refused in a
certified season, and written to the change log with its reason."""

from __future__ import annotations

import datetime as dt

import pandas as pd

from monitor import columns as C
from monitor.db import Store, select
from monitor.db import models as M
from monitor.db.models import utcnow
from monitor.errors import DataError, InputError, InputProblem, LockedError
from monitor.io import headers as H
from monitor.io._tables import Problems, parse_typed_value
from monitor.io.records import covariate_number
from monitor.io.validate import Reference, validate_records
from monitor.services import faults
from monitor.services.common import (
    Change,
    closest,
    current_user,
    log_change,
    need_reason,
    plain_problems,
    run_with_retries,
    station_by_code,
)
from monitor.settings import programme_settings
from monitor.services.imports import stored_covariates


def set_value(db: str | None, station: str, year: int, species: str, measure: str, value: str, *, reason: str | None,
              repeat_no: int = 0, who: str | None = None, programme_code: str | None = None) -> Change:
    """Add or correct one value of one stored visit, with a reason that goes to the change log.

    The value is checked as an imported one would be (same range rules per measure), the season must not be
    certified, and the visit must be one that carries values (done or partial: missing is never zero).
    Returns the change made (old is None when the value is added).
    """
    label = "records set"
    reason = need_reason(label, reason, "a reason for the change (it goes to the change log)")
    who = who or current_user()
    measure = measure.strip().lower()
    field_ = f"{species}:{measure}"
    if measure not in C.MEASURES:
        raise InputError(InputProblem(label, None, "MEASURE", measure, f"one of {', '.join(C.MEASURES)}"))
    number = parse_typed_value(label, field_, measure, value)
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        # run again from the start when the database reports a transient failure (a deadlock or
        # serialization failure with a concurrent import, a busy SQLite file), as the import does
        return run_with_retries(lambda: _set_value(store, programme, label, station, year, species, measure,
                                                   field_, number, reason, repeat_no, who))
    finally:
        store.dispose()


def _correctable_visit(session, programme: M.Programme, label: str, station: str, year: int,
                       repeat_no: int) -> tuple[M.Station, M.Visit]:
    """The stored visit of ``station`` in the ``year`` round that a correction applies to; refused when
    there is no such visit or its season is certified (locked)."""
    st = station_by_code(session, programme.id, station, label)
    rnd = session.exec(select(M.Round).where(M.Round.programme_id == programme.id, M.Round.year == year)).first()
    visit = None if rnd is None else session.exec(select(M.Visit).where(
        M.Visit.station_id == st.id, M.Visit.round_id == rnd.id, M.Visit.repeat_no == repeat_no)).first()
    if visit is None:
        raise DataError(f"no visit of {station} in the {year} round"
                        + (f" with repeat number {repeat_no}" if repeat_no else "")
                        + "; import the visit from its field sheet first")
    if rnd.status == "certified":
        raise LockedError(f"season {year} is certified (locked); unlock it first with "
                          f"`monitor records unlock {year} --reason \"...\"`")
    return st, visit


def _set_value(store: Store, programme: M.Programme, label: str, station: str, year: int, species: str,
               measure: str, field_: str, number: float, reason: str, repeat_no: int, who: str) -> Change:
    with store.session() as session:
        st, visit = _correctable_visit(session, programme, label, station, year, repeat_no)
        if visit.status not in C.STATUSES_WITH_VALUES:
            raise DataError(f"the {year} visit of {station} is {visit.status}: it carries no values "
                            "(missing is not zero); correct its status from the field sheet first")
        target = session.exec(select(M.Target, M.Species).join(M.Species, M.Species.id == M.Target.species_id)
                              .where(M.Target.programme_id == programme.id, M.Species.code == species,
                                     M.Target.measure == measure)).first()
        if target is None:
            registered = [f"{c}:{m}" for c, m in session.exec(
                select(M.Species.code, M.Target.measure).join(M.Target, M.Target.species_id == M.Species.id)
                .where(M.Species.programme_id == programme.id)).all()]
            raise InputError(InputProblem(label, None, "SPECIES MEASURE", field_,
                                          "a species and measure of the programme" + closest(field_, registered)))
        tgt, sp = target
        _check_range(label, field_, station, visit, sp.code, measure, number, tgt.n)
        obs = session.exec(select(M.Observation).where(M.Observation.visit_id == visit.id,
                                                       M.Observation.species_id == sp.id,
                                                       M.Observation.measure == measure)).first()
        old = None if obs is None else obs.value
        change = Change(station, year, visit.date.isoformat(), field_, old, number)
        if old == number:
            return change
        now = utcnow()
        if obs is None:
            obs = M.Observation(visit_id=visit.id, species_id=sp.id, measure=measure, value=number, n=tgt.n)
            session.add(obs)
        else:
            obs.value, obs.n = number, tgt.n
        session.flush()
        log_change(session, programme.id, "observation", obs.id, "value", old, number, reason, who, now)
        session.flush()
        faults.reached("1 value corrected")
        return change


def set_visit(db: str | None, station: str, year: int, *, reason: str | None, protocol: str | None = None,
              covariates: dict[str, str] | None = None, repeat_no: int = 0, who: str | None = None,
              programme_code: str | None = None) -> list[Change]:
    """Correct a stored visit's protocol and covariates (``{"soil_moisture": "31.5"}``; ``""`` removes one),
    each change logged with the reason.  The season must not be certified.  Returns the changes made."""
    label = "records set-visit"
    reason = need_reason(label, reason, "a reason for the change (it goes to the change log)")
    covariates = dict(covariates or {})
    if protocol is None and not covariates:
        raise InputError(InputProblem(label, None, "--protocol/--covariate", None,
                                      "something to change: --protocol CODE or --covariate NAME=VALUE"))
    who = who or current_user()
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        return run_with_retries(lambda: _set_visit(store, programme, label, station, year, protocol, covariates,
                                                   reason, repeat_no, who))
    finally:
        store.dispose()


def _set_visit(store: Store, programme: M.Programme, label: str, station: str, year: int, protocol: str | None,
               covariates: dict[str, str], reason: str, repeat_no: int, who: str) -> list[Change]:
    with store.session() as session:
        st, visit = _correctable_visit(session, programme, label, station, year, repeat_no)
        now = utcnow()
        changes: list[Change] = []
        when = visit.date.isoformat()
        if protocol is not None:
            codes = dict(session.exec(select(M.ProtocolVersion.code, M.ProtocolVersion.id)
                                      .where(M.ProtocolVersion.programme_id == programme.id)).all())
            if protocol not in codes:
                raise InputError(InputProblem(label, None, "--protocol", protocol,
                                              f"a protocol version of the programme ({', '.join(sorted(codes)) or 'none'})"))
            old_code = next((c for c, i in codes.items() if i == visit.protocol_id), None)
            if old_code != protocol:
                log_change(session, programme.id, "visit", visit.id, "protocol", old_code, protocol, reason, who, now)
                visit.protocol_id = codes[protocol]
                changes.append(Change(station, year, when, "protocol", old_code, protocol))
        if covariates:
            if visit.status not in C.STATUSES_WITH_VALUES:
                raise DataError(f"the {year} visit of {station} is {visit.status}: it carries no values "
                                "(missing is not zero); correct its status from the field sheet first")
            stored = stored_covariates(session, visit.id)
            units = programme_settings(programme).covariate_units
            problems = Problems(label)
            for name, text in covariates.items():
                known = name in stored or name in units
                if not known:
                    problems.add(None, f"cov:{name}", name, "a covariate of the programme"
                                 + closest(name, sorted(set(units) | set(stored))))
                    continue
                unit = stored[name].unit if name in stored else (units.get(name) or "")
                if not text.strip():
                    if name in stored:
                        old = stored[name].value
                        log_change(session, programme.id, "covariate", stored[name].id, f"cov:{name}", old, None, reason,
                             who, now)
                        session.delete(stored[name])
                        changes.append(Change(station, year, when, f"cov:{name}", old, None))
                    continue
                value = covariate_number(text, unit, problems, None, f"cov:{name}")
                if value is None:
                    continue
                if name in stored:
                    old = stored[name].value
                    if old != value:
                        log_change(session, programme.id, "covariate", stored[name].id, f"cov:{name}", old, value, reason,
                             who, now)
                        stored[name].value = value
                        changes.append(Change(station, year, when, f"cov:{name}", old, value))
                else:
                    added = M.Covariate(station_id=st.id, visit_id=visit.id, name=name, unit=unit or "", value=value)
                    session.add(added)
                    session.flush()
                    log_change(session, programme.id, "covariate", added.id, f"cov:{name}", None, value, reason, who, now)
                    changes.append(Change(station, year, when, f"cov:{name}", None, value))
            problems.raise_if_any()
        session.flush()
        return changes


def _check_range(label: str, field_: str, station: str, visit: M.Visit, species: str, measure: str, value: float,
                 n: int | None) -> None:
    """The import's own range rules (monitor.io.validate) applied to one value."""
    visits = pd.DataFrame({C.STATION: [station], C.DATE: [visit.date], C.YEAR: [visit.date.year],
                           H.OBSERVERS: [()], C.VISIT_STATUS: [visit.status], H.REPEAT: [visit.repeat_no > 0],
                           C.PROTOCOL: [None], H.NOTES: [None]})
    observations = pd.DataFrame({C.STATION: [station], C.DATE: [visit.date], C.SPECIES: [species],
                                 C.MEASURE: [measure], H.VALUE: [value], H.N: pd.array([n], dtype="Int64"),
                                 H.SOURCE_FIELD: [field_]})
    reference = Reference(stations=pd.DataFrame({C.STATION: [station], H.RETIRED: [None]}),
                          species=pd.DataFrame({C.SPECIES: [species], C.MEASURE: [measure],
                                                H.N: pd.array([n], dtype="Int64")}),
                          today=dt.date.max)
    covariates = pd.DataFrame(columns=[C.STATION, C.DATE, "name", H.UNIT, H.VALUE])
    errors = [p for p in validate_records(visits, observations, covariates, reference, file=label)
              if p.severity == "error"]
    if errors:
        raise InputError(plain_problems(errors))
