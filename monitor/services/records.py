"""Field records: import a season's sheets, correct stored values with an audit trail, lock seasons.

An import is all or nothing.  It reads and checks the whole file first (``monitor.io.records`` and
``monitor.io.validate``), compares it with what is stored, and only then writes, in one transaction:

* a file whose bytes were imported before does nothing (content hash in ``import_batch``);
* new visits and values are added;
* a value that differs from the stored one is a correction: refused unless ``correct=True`` with a
  reason, and then every changed value goes to the change log (old, new, reason, who, when);
* a certified (locked) season is not touched until it is unlocked, with a reason that is logged.

Missing is never zero: a missed or inaccessible visit is stored with no observations at all.
"""

from __future__ import annotations

import datetime as dt
import getpass
import json
import os
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from monitor import columns as C
from monitor.db import Session, Store, insert, select
from monitor.db import models as M
from monitor.db.models import utcnow
from monitor.errors import DataError, InputError, InputProblem, LockedError
from monitor.io import headers as H
from monitor.io.hashing import content_hash
from monitor.io.records import read_field_records
from monitor.io.validate import Reference, fill_blank_targets, raise_for_problems, validate_records

KIND_RECORDS = "records"


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


@dataclass
class ImportReport:
    file: str
    layout: str = ""
    already_imported: bool = False
    dry_run: bool = False
    visits_added: int = 0
    observations_added: int = 0
    covariates_added: int = 0
    visits_unchanged: int = 0
    changes: list[Change] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    years: list[int] = field(default_factory=list)

    def to_dict(self) -> dict:
        return {
            "file": self.file, "layout": self.layout, "already_imported": self.already_imported,
            "dry_run": self.dry_run, "visits_added": self.visits_added,
            "observations_added": self.observations_added, "covariates_added": self.covariates_added,
            "visits_unchanged": self.visits_unchanged, "years": self.years,
            "changes": [c.__dict__ for c in self.changes], "warnings": self.warnings,
        }


def current_user() -> str:
    try:
        return os.environ.get("MONITOR_USER") or getpass.getuser()
    except (KeyError, OSError):
        return "unknown"


# --- what the programme holds, for validation ---------------------------------------------------------------


def _settings(programme: M.Programme) -> dict:
    try:
        return json.loads(programme.settings_json or "{}")
    except json.JSONDecodeError:
        return {}


def programme_window(session: Session, programme_id: int, year: int) -> tuple[dt.date, dt.date]:
    """The programme-wide season window for a year (a year-specific window wins over the standing one)."""
    rows = session.exec(select(M.SeasonWindow).where(M.SeasonWindow.programme_id == programme_id,
                                                     M.SeasonWindow.species_id.is_(None))).all()
    chosen = next((w for w in rows if w.year == year), None) or next((w for w in rows if w.year is None), None)
    if chosen is None:
        return dt.date(year, 1, 1), dt.date(year, 12, 31)
    start = dt.date.fromisoformat(f"{year}-{chosen.start_md}")
    end = dt.date.fromisoformat(f"{year}-{chosen.end_md}")
    if end < start:  # wraps the new year: the season runs into the next calendar year
        end = dt.date.fromisoformat(f"{year + 1}-{chosen.end_md}")
    return start, end


def build_reference(session: Session, programme: M.Programme, years: list[int]) -> Reference:
    pid = programme.id
    stations = session.exec(select(M.Station).where(M.Station.programme_id == pid)).all()
    species_rows = session.exec(
        select(M.Species.code, M.Target.measure, M.Target.n).join(M.Target, M.Target.species_id == M.Species.id)
        .where(M.Species.programme_id == pid)).all()
    species = pd.DataFrame(species_rows, columns=[C.SPECIES, C.MEASURE, H.N])
    species[H.N] = species[H.N].astype("Int64")
    windows = {}
    for year in years:
        rnd = session.exec(select(M.Round).where(M.Round.programme_id == pid, M.Round.year == year)).first()
        windows[year] = (rnd.window_start, rnd.window_end) if rnd else programme_window(session, pid, year)
    species_windows = {}
    for w, code in session.exec(select(M.SeasonWindow, M.Species.code).join(
            M.Species, M.Species.id == M.SeasonWindow.species_id).where(M.SeasonWindow.programme_id == pid)).all():
        species_windows[code] = (w.start_md, w.end_md)
    existing = pd.DataFrame(
        session.exec(select(M.Station.code, M.Visit.date, M.Visit.repeat_no).join(
            M.Visit, M.Visit.station_id == M.Station.id).where(M.Station.programme_id == pid)).all(),
        columns=[C.STATION, C.DATE, H.REPEAT])
    existing[H.REPEAT] = existing[H.REPEAT] > 0
    observers = frozenset(session.exec(select(M.Observer.code).where(M.Observer.programme_id == pid)).all())
    units = _settings(programme).get("covariate_units")
    return Reference(
        stations=pd.DataFrame({C.STATION: [s.code for s in stations], H.RETIRED: [s.retired for s in stations]}),
        species=species,
        targets=tuple((s, m) for s, m in zip(species[C.SPECIES], species[C.MEASURE], strict=True)),
        blanks_mean_zero=programme.blanks_mean_zero,
        windows=windows,
        species_windows=species_windows,
        existing_visits=None,  # stored visits are compared below, so a re-import is a correction, not an error
        observers=observers or None,
        covariate_units=units if isinstance(units, dict) and units else None,
        today=dt.date.today(),
    )


# --- import -----------------------------------------------------------------------------------------------------


def _round_for(session: Session, programme_id: int, year: int, cache: dict[int, M.Round]) -> M.Round:
    if year in cache:
        return cache[year]
    rnd = session.exec(select(M.Round).where(M.Round.programme_id == programme_id, M.Round.year == year)).first()
    if rnd is None:
        start, end = programme_window(session, programme_id, year)
        rnd = M.Round(programme_id=programme_id, year=year, window_start=start, window_end=end, status="open")
        session.add(rnd)
        session.flush()
    cache[year] = rnd
    return rnd


def _text(value: object) -> str:
    if value is None:
        return ""
    try:
        if pd.isna(value):
            return ""
    except (TypeError, ValueError):
        pass
    return str(value)


def import_records(db: str | None, path: Path, *, programme_code: str | None = None, dry_run: bool = False,
                   correct: bool = False, reason: str | None = None, accept_warnings: bool = False,
                   who: str | None = None, day_first: bool | None = None) -> ImportReport:
    """Import a season's field records from CSV or .xlsx (wide field-sheet or long layout)."""
    path = Path(path)
    if correct and not (reason and reason.strip()):
        raise InputError(InputProblem(path.name, None, "--reason", None, "a reason for the correction"))
    store = Store.open(db)
    try:
        return _import(store, path, programme_code, dry_run, correct, reason, accept_warnings,
                       who or current_user(), day_first)
    finally:
        store.dispose()


def _import(store: Store, path: Path, programme_code: str | None, dry_run: bool, correct: bool,
            reason: str | None, accept_warnings: bool, who: str, day_first: bool | None) -> ImportReport:
    records = read_field_records(path, day_first=day_first)
    report = ImportReport(file=records.file, layout=records.layout, dry_run=dry_run)
    digest = content_hash(path)
    programme = store.programme(programme_code)
    with store.session() as session:
        batch = session.exec(select(M.ImportBatch).where(
            M.ImportBatch.programme_id == programme.id, M.ImportBatch.kind == KIND_RECORDS,
            M.ImportBatch.content_hash == digest)).first()
        if batch is not None:
            report.already_imported = True
            report.warnings.append(f"this file's content was imported on {batch.imported_at:%Y-%m-%d %H:%M} "
                                   f"as {batch.file_name}; nothing to do")
            return report
        visits = records.visits
        years = sorted({int(y) for y in visits[C.YEAR]})
        report.years = years
        reference = build_reference(session, programme, years)
        problems = validate_records(visits, records.observations, records.covariates, reference, file=records.file)
        accepted = raise_for_problems(problems, accept_warnings=accept_warnings)
        report.warnings.extend(p.line() for p in accepted)
        observations = fill_blank_targets(visits, records.observations, reference)
        plan = _plan(session, programme, records.file, visits, observations, records.covariates, report)
        if plan.changes and not correct:
            raise InputError([InputProblem(records.file, ch_row, ch.field, ch.new,
                                           f"the stored value {ch.old!r} (this file changes a stored value; "
                                           "use --correct --reason \"...\" to correct it)")
                              for ch, ch_row in plan.changes])
        report.changes = [c for c, _row in plan.changes]
        if dry_run:
            session.rollback()
            return report
        _write(session, programme, path.name, digest, len(visits), plan, report, reason, who)
    return report


@dataclass
class _Plan:
    new_visits: list[dict] = field(default_factory=list)        # visit rows with their observations
    changes: list[tuple[Change, int]] = field(default_factory=list)
    updates: list[tuple[int, dict]] = field(default_factory=list)  # (stored visit id, the file's version)
    locked_years: set[int] = field(default_factory=set)


def _plan(session: Session, programme: M.Programme, file: str, visits: pd.DataFrame, observations: pd.DataFrame,
          covariates: pd.DataFrame, report: ImportReport) -> _Plan:
    pid = programme.id
    station_ids = dict(session.exec(select(M.Station.code, M.Station.id).where(M.Station.programme_id == pid)).all())
    species_ids = dict(session.exec(select(M.Species.code, M.Species.id).where(M.Species.programme_id == pid)).all())
    observer_ids = dict(session.exec(select(M.Observer.code, M.Observer.id).where(M.Observer.programme_id == pid)).all())
    protocol_ids = dict(session.exec(select(M.ProtocolVersion.code, M.ProtocolVersion.id)
                                     .where(M.ProtocolVersion.programme_id == pid)).all())
    years = sorted({int(y) for y in visits[C.YEAR]})
    rounds = {r.year: r for r in session.exec(select(M.Round).where(M.Round.programme_id == pid,
                                                                     M.Round.year.in_(years))).all()}
    # stored visits of these rounds, keyed (station, year, date) and (station, year) for first visits
    stored: dict[tuple[str, int, dt.date], M.Visit] = {}
    first_visit: dict[tuple[str, int], M.Visit] = {}
    code_of = {v: k for k, v in station_ids.items()}
    year_of = {r.id: y for y, r in rounds.items()}
    if rounds:
        for visit in session.exec(select(M.Visit).where(M.Visit.round_id.in_([r.id for r in rounds.values()]))).all():
            key = (code_of[visit.station_id], year_of[visit.round_id])
            stored[(*key, visit.date)] = visit
            if visit.repeat_no == 0:
                first_visit[key] = visit

    obs_by_visit = {k: g for k, g in observations.groupby([C.STATION, C.DATE], sort=False)} if len(observations) else {}
    cov_by_visit = {k: g for k, g in covariates.groupby([C.STATION, C.DATE], sort=False)} if len(covariates) else {}
    plan = _Plan()
    protocol_default = _default_protocol(session, pid)
    for v in visits.to_dict(orient="records"):
        station, date, year = v[C.STATION], v[C.DATE], int(v[C.YEAR])
        rows_obs = obs_by_visit.get((station, date))
        rows_cov = cov_by_visit.get((station, date))
        protocol = _text(v.get(C.PROTOCOL)) or None
        new_obs = [] if rows_obs is None else [
            {"species_id": species_ids[o[C.SPECIES]], "species": o[C.SPECIES], "measure": o[C.MEASURE],
             "value": float(o[H.VALUE]), "n": None if pd.isna(o[H.N]) else int(o[H.N])}
            for o in rows_obs.to_dict(orient="records")]
        new_cov = [] if rows_cov is None else [
            {"name": c["name"], "unit": _text(c.get(H.UNIT)), "value": float(c[H.VALUE])}
            for c in rows_cov.to_dict(orient="records")]
        row = {
            "station": station, "station_id": station_ids[station], "year": year, "date": date,
            "status": v[C.VISIT_STATUS], "repeat": bool(v[H.REPEAT]), "notes": _text(v.get(H.NOTES)),
            "protocol_id": protocol_ids.get(protocol) if protocol else protocol_default.get(year),
            "observer_ids": [observer_ids[o] for o in (v.get(H.OBSERVERS) or ()) if o in observer_ids],
            "observations": new_obs, "covariates": new_cov, "source_row": int(v[H.SOURCE_ROW]),
        }
        existing = stored.get((station, year, date))
        if existing is None and not row["repeat"]:
            existing = first_visit.get((station, year))
        if existing is None:
            plan.new_visits.append(row)
            if year in rounds and rounds[year].status == "certified":
                plan.locked_years.add(year)
            continue
        changes = _compare(session, existing, row, species_ids, observer_ids)
        if not changes:
            report.visits_unchanged += 1
            continue
        if rounds[year].status == "certified":
            plan.locked_years.add(year)
        for ch in changes:
            plan.changes.append((ch, row["source_row"]))
        plan.updates.append((existing.id, row))
    if plan.locked_years:
        years_text = ", ".join(str(y) for y in sorted(plan.locked_years))
        raise LockedError(f"{file}: season {years_text} is certified (locked); "
                          f"unlock it first with `monitor records unlock YEAR --reason \"...\"`")
    report.visits_added = len(plan.new_visits)
    report.observations_added = sum(len(r["observations"]) for r in plan.new_visits)
    report.covariates_added = sum(len(r["covariates"]) for r in plan.new_visits)
    return plan


def _default_protocol(session: Session, programme_id: int) -> dict[int, int]:
    """The protocol in force in each year (the latest whose effective date is on or before mid-year)."""
    protos = sorted(session.exec(select(M.ProtocolVersion).where(M.ProtocolVersion.programme_id == programme_id)).all(),
                    key=lambda p: p.effective_from)

    class _ByYear(dict):
        def get(self, year, default=None):  # noqa: A003 - a dict with computed lookups
            chosen = None
            for p in protos:
                if p.effective_from <= dt.date(year, 7, 1):
                    chosen = p.id
            return chosen if chosen is not None else default

    return _ByYear()


def _compare(session: Session, visit: M.Visit, row: dict, species_ids: dict, observer_ids: dict) -> list[Change]:
    """The differences between a stored visit (with its values) and the same visit in a file."""
    out = []
    key = (row["station"], row["year"], visit.date.isoformat())

    def change(field_: str, old: object, new: object) -> None:
        out.append(Change(key[0], key[1], key[2], field_, old, new))

    if visit.date != row["date"]:
        change("date", visit.date.isoformat(), row["date"].isoformat())
    if visit.status != row["status"]:
        change("status", visit.status, row["status"])
    if (visit.notes or "") != row["notes"]:
        change("notes", visit.notes, row["notes"])
    stored_obs = {(o.species_id, o.measure): o for o in session.exec(
        select(M.Observation).where(M.Observation.visit_id == visit.id)).all()}
    species_code = {v: k for k, v in species_ids.items()}
    new_obs = {(o["species_id"], o["measure"]): o for o in row["observations"]}
    for k in sorted(set(stored_obs) | set(new_obs), key=str):
        label = f"{species_code[k[0]]}:{k[1]}"
        old = stored_obs.get(k)
        new = new_obs.get(k)
        if old is None:
            change(label, None, new["value"])
        elif new is None:
            change(label, old.value, None)
        elif old.value != new["value"] or (old.n or None) != (new["n"] or None):
            change(label, old.value, new["value"])
    stored_observers = set(session.exec(select(M.VisitObserver.observer_id)
                                        .where(M.VisitObserver.visit_id == visit.id)).all())
    if stored_observers != set(row["observer_ids"]):
        code = {v: k for k, v in observer_ids.items()}
        change("observers", ";".join(sorted(code[i] for i in stored_observers)),
               ";".join(sorted(code[i] for i in row["observer_ids"])))
    return out


def _write(session: Session, programme: M.Programme, file_name: str, digest: str, n_rows: int, plan: _Plan,
           report: ImportReport, reason: str | None, who: str) -> None:
    now = utcnow()
    batch = M.ImportBatch(programme_id=programme.id, kind=KIND_RECORDS, file_name=file_name, content_hash=digest,
                          row_count=n_rows, imported_by=who, imported_at=now)
    session.add(batch)
    session.flush()
    rounds: dict[int, M.Round] = {}
    visit_rows = []
    repeat_next: dict[tuple[int, int], int] = {}
    for r in plan.new_visits:
        rnd = _round_for(session, programme.id, r["year"], rounds)
        repeat_no = 0
        if r["repeat"]:
            key = (r["station_id"], rnd.id)
            if key not in repeat_next:
                stored_max = session.exec(select(M.Visit.repeat_no).where(
                    M.Visit.station_id == r["station_id"], M.Visit.round_id == rnd.id)).all()
                repeat_next[key] = (max(stored_max) + 1) if stored_max else 1
            repeat_no = repeat_next[key]
            repeat_next[key] += 1
        r["round_id"], r["repeat_no"] = rnd.id, repeat_no
        visit_rows.append({"station_id": r["station_id"], "round_id": rnd.id, "date": r["date"], "status": r["status"],
                           "repeat_no": repeat_no, "protocol_id": r["protocol_id"], "notes": r["notes"],
                           "import_batch_id": batch.id})
    if visit_rows:
        session.execute(insert(M.Visit), visit_rows)
        ids = {(s, rd, rp): i for i, s, rd, rp in session.exec(
            select(M.Visit.id, M.Visit.station_id, M.Visit.round_id, M.Visit.repeat_no)
            .where(M.Visit.import_batch_id == batch.id)).all()}
        obs_rows, observer_rows, cov_rows = [], [], []
        for r in plan.new_visits:
            vid = ids[(r["station_id"], r["round_id"], r["repeat_no"])]
            obs_rows.extend({"visit_id": vid, "species_id": o["species_id"], "measure": o["measure"],
                             "value": o["value"], "n": o["n"]} for o in r["observations"])
            observer_rows.extend({"visit_id": vid, "observer_id": o} for o in dict.fromkeys(r["observer_ids"]))
            cov_rows.extend({"station_id": r["station_id"], "visit_id": vid, **c} for c in r["covariates"])
        if obs_rows:
            session.execute(insert(M.Observation), obs_rows)
        if observer_rows:
            session.execute(insert(M.VisitObserver), observer_rows)
        if cov_rows:
            session.execute(insert(M.Covariate), cov_rows)
    for visit_id, row in plan.updates:
        _apply_update(session, programme.id, visit_id, row, reason or "", who, now)
    session.flush()


def _apply_update(session: Session, programme_id: int, visit_id: int, row: dict, reason: str, who: str,
                  now: dt.datetime) -> None:
    """Bring a stored visit to the file's version, logging every changed value."""
    visit = session.get(M.Visit, visit_id)

    def log(table: str, row_id: int, field_: str, old: object, new: object) -> None:
        session.add(M.ChangeLog(programme_id=programme_id, table_name=table, row_id=row_id, field=field_,
                                old_value=None if old is None else str(old), new_value=None if new is None else str(new),
                                reason=reason, changed_by=who, changed_at=now))

    for field_ in ("date", "status", "notes"):
        old, new = getattr(visit, field_), row[field_]
        if (old or "") != (new or ""):
            log("visit", visit.id, field_, old, new)
            setattr(visit, field_, new)
    stored = {(o.species_id, o.measure): o for o in session.exec(
        select(M.Observation).where(M.Observation.visit_id == visit.id)).all()}
    new_obs = {(o["species_id"], o["measure"]): o for o in row["observations"]}
    for key, obs in stored.items():
        if key not in new_obs:
            log("observation", obs.id, f"{obs.species_id}:{obs.measure}:value", obs.value, None)
            session.delete(obs)
        elif obs.value != new_obs[key]["value"] or (obs.n or None) != (new_obs[key]["n"] or None):
            log("observation", obs.id, "value", obs.value, new_obs[key]["value"])
            obs.value, obs.n = new_obs[key]["value"], new_obs[key]["n"]
    session.flush()
    for key, o in new_obs.items():
        if key not in stored:
            added = M.Observation(visit_id=visit.id, species_id=o["species_id"], measure=o["measure"], value=o["value"],
                                  n=o["n"])
            session.add(added)
            session.flush()
            log("observation", added.id, "value", None, o["value"])
    stored_observers = set(session.exec(select(M.VisitObserver.observer_id)
                                         .where(M.VisitObserver.visit_id == visit.id)).all())
    if stored_observers != set(row["observer_ids"]):
        log("visit", visit.id, "observers", sorted(stored_observers), sorted(set(row["observer_ids"])))
        for link in session.exec(select(M.VisitObserver).where(M.VisitObserver.visit_id == visit.id)).all():
            session.delete(link)
        session.flush()
        for oid in dict.fromkeys(row["observer_ids"]):
            session.add(M.VisitObserver(visit_id=visit.id, observer_id=oid))


# --- certification ------------------------------------------------------------------------------------------


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
