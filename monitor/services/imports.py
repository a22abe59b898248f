"""Importing a season's field sheets: read and check the whole file, compare it with what is stored, write.

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
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor.db import Session, Store, queries, select
from monitor.db import models as M
from monitor.db.models import utcnow
from monitor.errors import MAX_LISTED, InputError, InputProblem, LockedError, MonitorError
from monitor.io import headers as H
from monitor.io.hashing import content_hash
from monitor.io.records import FieldRecords, read_field_records
from monitor.io.sheets import cell_text
from monitor.io.validate import Reference, fill_blank_targets, raise_for_problems, validate_records
from monitor.services import faults
from monitor.services.common import (
    Change,
    current_user,
    log_change,
    plain_problems,
    run_with_retries,
)
from monitor.settings import programme_settings

KIND_RECORDS = "records"


OUTCOME_IMPORTED = "imported"              # committed
OUTCOME_WOULD_IMPORT = "would import"      # a dry run that found something to write
OUTCOME_NOTHING = "nothing to apply"       # every visit and value already stored as in the file; no batch recorded
OUTCOME_ALREADY = "already imported"       # these very bytes were imported before
OUTCOME_REFUSED = "refused"                # a problem in the file (or the database refused it); nothing written
OUTCOME_NOT_ATTEMPTED = "not attempted"    # an earlier file of the same command was refused


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
    sheet: str | None = None
    outcome: str = ""
    problems: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        return {
            "file": self.file, "outcome": self.outcome, "problems": self.problems, "sheet": self.sheet,
            "layout": self.layout, "already_imported": self.already_imported,
            "dry_run": self.dry_run, "visits_added": self.visits_added,
            "observations_added": self.observations_added, "covariates_added": self.covariates_added,
            "visits_unchanged": self.visits_unchanged, "years": self.years,
            "changes": [c.__dict__ for c in self.changes], "warnings": self.warnings,
        }


# --- what the programme holds, for validation ---------------------------------------------------------------


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


def season_rule(session: Session, programme_id: int) -> Callable[[dt.date], int]:
    """The season a visit date belongs to.  With a standing programme window that wraps the new year
    (start after end, e.g. 12-01 to 02-28) a date up to the window's end counts to the season that opened
    the year before; otherwise the season is the calendar year."""
    rows = session.exec(select(M.SeasonWindow).where(M.SeasonWindow.programme_id == programme_id,
                                                     M.SeasonWindow.species_id.is_(None),
                                                     M.SeasonWindow.year.is_(None))).all()
    if not rows or rows[0].end_md >= rows[0].start_md:
        return _calendar_year
    end = rows[0].end_md
    return lambda d: d.year - 1 if f"{d.month:02d}-{d.day:02d}" <= end else d.year


def _calendar_year(date: dt.date) -> int:
    return date.year


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
    units = dict(programme_settings(programme).covariate_units)
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
        season_of=season_rule(session, pid),
    )


# --- import -----------------------------------------------------------------------------------------------------

#: Test hook, not for users: when set to a number of seconds, an import that has written its visits, an import
#: that has applied its corrections (and written none), or ``set_value`` once it has written its value and the


def import_records(db: str | None, path: Path, *, programme_code: str | None = None, dry_run: bool = False,
                   correct: bool = False, reason: str | None = None, accept_warnings: bool = False,
                   who: str | None = None, day_first: bool | None = None,
                   sheet: str | None = None) -> ImportReport:
    """Import a season's field records from CSV or .xlsx (wide field-sheet or long layout).

    The whole file is read and checked before anything is written, and everything is written in one
    transaction: a file with any error, or a process killed half-way, leaves the database as it was.
    Every problem is listed at once: the cells that could not be read and what the programme's checks
    find in the rest.  ``sheet`` names the workbook sheet to read (see :mod:`monitor.io._tables`).
    """
    run = import_files(db, [Path(path)], programme_code=programme_code, dry_run=dry_run, correct=correct,
                       reason=reason, accept_warnings=accept_warnings, who=who, day_first=day_first, sheet=sheet)
    if run.error is not None:
        raise run.error
    return run.reports[0]


@dataclass
class ImportRun:
    """The outcome of every file of one import command, in order, and the error that stopped it (if any)."""

    reports: list[ImportReport]
    error: MonitorError | None = None


def import_files(db: str | None, paths: list[Path], *, programme_code: str | None = None, dry_run: bool = False,
                 correct: bool = False, reason: str | None = None, accept_warnings: bool = False,
                 who: str | None = None, day_first: bool | None = None, sheet: str | None = None) -> ImportRun:
    """Import several files in order, each all or nothing; report every file's outcome.

    A real run commits each file in its own transaction and stops at the first file refused: the files
    before it stay imported (their outcome says so), the ones after it are "not attempted".  A dry run
    checks every file against the stored records *and the files before it*: all of them are written in
    one transaction that is then rolled back, so a conflict between two files shows as it would for real.
    """
    paths = [Path(p) for p in paths]
    if correct and not (reason and reason.strip()):
        label = paths[0].name if paths else "records import"
        raise InputError(InputProblem(label, None, "--reason", None, "a reason for the correction"))
    who = who or current_user()
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        if dry_run:
            return run_with_retries(lambda: _dry_run_files(store, programme, paths, correct, reason, accept_warnings,
                                                           who, day_first, sheet))
        reports: list[ImportReport] = []
        for k, path in enumerate(paths):
            try:
                records, digest = _read(path, day_first, sheet)
                report = run_with_retries(lambda records=records, digest=digest, name=path.name: _import(
                    store, programme, records, name, digest, False, correct, reason, accept_warnings, who))
            except MonitorError as exc:
                return _stopped(reports, paths, k, exc)
            reports.append(report)
        return ImportRun(reports)
    finally:
        store.dispose()


def _read(path: Path, day_first: bool | None, sheet: str | None) -> tuple[FieldRecords, str]:
    try:
        return read_field_records(path, day_first=day_first, sheet=sheet, keep_going=True), content_hash(path)
    except InputError as exc:
        raise _plain_error(exc) from exc


def _plain_error(exc: InputError) -> InputError:
    return InputError(plain_problems(exc.problems), total=exc.total, counts=exc.counts)


def _stopped(reports: list[ImportReport], paths: list[Path], k: int, exc: MonitorError) -> ImportRun:
    """The run's outcome when file ``k`` was refused: earlier files as they went, this one refused, the rest not tried."""
    if isinstance(exc, InputError):
        exc = _plain_error(exc)
        lines = [p.line() for p in exc.problems[:MAX_LISTED]]
        if exc.unlisted > 0:
            lines.append(f"... and {exc.unlisted:,} more not listed; {exc.summary()}")
    else:
        lines = [str(exc)]
    reports.append(ImportReport(file=paths[k].name, outcome=OUTCOME_REFUSED, problems=lines))
    reports += [ImportReport(file=p.name, outcome=OUTCOME_NOT_ATTEMPTED) for p in paths[k + 1:]]
    return ImportRun(reports, exc)


def _dry_run_files(store: Store, programme: M.Programme, paths: list[Path], correct: bool, reason: str | None,
                   accept_warnings: bool, who: str, day_first: bool | None, sheet: str | None) -> ImportRun:
    reports: list[ImportReport] = []
    at = 0  # the file being read when a refusal stops the run
    try:
        with store.session() as session:
            for at, path in enumerate(paths):  # noqa: B007 (read by the refusal below)
                records, digest = _read(path, day_first, sheet)
                reports.append(_import_in(session, programme, records, path.name, digest, True, correct, reason,
                                          accept_warnings, who))
            session.rollback()  # a dry run: everything written above is undone
    except MonitorError as exc:
        if queries.retryable(exc):
            raise
        return _stopped(reports, paths, at, exc)
    return ImportRun(reports)


def _import(store: Store, programme: M.Programme, records: FieldRecords, file_name: str, digest: str,
            dry_run: bool, correct: bool, reason: str | None, accept_warnings: bool, who: str) -> ImportReport:
    with store.session() as session:
        report = _import_in(session, programme, records, file_name, digest, dry_run, correct, reason,
                            accept_warnings, who)
        if dry_run:
            session.rollback()
    return report


def _import_in(session: Session, programme: M.Programme, records: FieldRecords, file_name: str, digest: str,
               dry_run: bool, correct: bool, reason: str | None, accept_warnings: bool, who: str) -> ImportReport:
    """Check one file and write it inside the caller's transaction (a dry run is rolled back by the caller)."""
    report = ImportReport(file=records.file, layout=records.layout, dry_run=dry_run, sheet=records.sheet)
    batch = session.exec(select(M.ImportBatch).where(
        M.ImportBatch.programme_id == programme.id, M.ImportBatch.kind == KIND_RECORDS,
        M.ImportBatch.content_hash == digest)).first()
    if batch is not None and records.problems is None:
        report.already_imported = True
        report.outcome = OUTCOME_ALREADY
        report.warnings.append(f"this file's content was imported on {batch.imported_at:%Y-%m-%d %H:%M} "
                               f"as {batch.file_name}; nothing to do")
        return report
    visits = records.visits
    season_of = season_rule(session, programme.id)
    if season_of is not _calendar_year:  # a season across the new year: January visits belong to December's round
        visits = visits.assign(**{C.YEAR: [season_of(d) for d in visits[C.DATE]]})
    years = sorted({int(y) for y in visits[C.YEAR]})
    report.years = years
    reference = build_reference(session, programme, years)
    problems = validate_records(visits, records.observations, records.covariates, reference, file=records.file)
    problems = with_reader_problems(records, problems, _protocol_problems(session, programme.id, visits,
                                                                          records.file))
    accepted = raise_for_problems(problems, accept_warnings=accept_warnings)
    report.warnings.extend(p.line() for p in accepted)
    observations = fill_blank_targets(visits, records.observations, reference)
    plan = _plan(session, programme, records.file, visits, observations, records.covariates, report,
                 records.covariate_names)
    if plan.changes and not correct:
        raise InputError([InputProblem(records.file, ch_row, ch.field, ch.new,
                                       f"the stored value {ch.old!r} (this file changes a stored value; "
                                       "use --correct --reason \"...\" to correct it)")
                          for ch, ch_row in plan.changes])
    report.changes = [c for c, _row in plan.changes]
    applied = _write(session, programme, file_name, digest, len(visits), plan, reason, who)
    if dry_run:
        report.outcome = OUTCOME_WOULD_IMPORT if applied else OUTCOME_NOTHING
    else:
        report.outcome = OUTCOME_IMPORTED if applied else OUTCOME_NOTHING
    return report


def with_reader_problems(records: FieldRecords, problems: list[InputProblem],
                         more: list[InputProblem]) -> list[InputProblem]:
    """The reader's problems (cells that could not be read) with the checks' problems, in row order.

    A check's complaint about a cell the reader already refused (a target "missing" because its cell was
    not a number) is left out: the reader's line says it.
    """
    from monitor.errors import ProblemCounter
    from monitor.io.validate import ProblemList

    reader = records.problems
    if reader is None and not more:
        return problems
    counter = ProblemCounter()
    refused: set[tuple] = set()
    if reader is not None:
        for problem in reader.kept():
            refused.add((problem.row, problem.field))
            counter.add(problem, (-1 if problem.row is None else problem.row, 0), count=False)
        counter.merge_counts(reader)
    for problem in [*problems, *more]:
        if (problem.row, problem.field) in refused:
            continue
        counter.add(problem, (-1 if problem.row is None else problem.row, 1))
    extra = getattr(problems, "total", len(problems)) - len(problems)
    if extra > 0:  # the checks counted more than they listed
        for kind, n in problems.counts.items():
            listed = sum(1 for p in problems if p.kind == kind)
            counter.counts[kind] = counter.counts.get(kind, 0) + n - listed
            counter.total += n - listed
            if not kind.startswith("warning: "):
                counter.errors += n - listed
    return ProblemList.of(counter)


def _protocol_problems(session: Session, programme_id: int, visits: pd.DataFrame, file: str) -> list[InputProblem]:
    """A protocol code that the programme does not know is an error (never silently dropped)."""
    if C.PROTOCOL not in visits.columns:
        return []
    known = set(session.exec(select(M.ProtocolVersion.code).where(M.ProtocolVersion.programme_id == programme_id)).all())
    out = []
    for code, row in zip(visits[C.PROTOCOL], visits[H.SOURCE_ROW], strict=True):
        code = cell_text(code)
        if code and code not in known:
            out.append(InputProblem(file, int(row), C.PROTOCOL, code,
                                    f"a protocol version of the programme ({', '.join(sorted(known)) or 'none'})"))
    return out


@dataclass
class _Plan:
    new: pd.DataFrame = field(default_factory=pd.DataFrame)            # new visits (file order), with ids to use
    new_observations: pd.DataFrame = field(default_factory=pd.DataFrame)
    new_covariates: pd.DataFrame = field(default_factory=pd.DataFrame)
    changes: list[tuple[Change, int]] = field(default_factory=list)
    updates: list[tuple[int, dict]] = field(default_factory=list)  # (stored visit id, the file's version)
    locked_years: set[int] = field(default_factory=set)
    windows: dict[int, tuple[dt.date, dt.date]] = field(default_factory=dict)


def _plan(session: Session, programme: M.Programme, file: str, visits: pd.DataFrame, observations: pd.DataFrame,
          covariates: pd.DataFrame, report: ImportReport, covariate_names: tuple[str, ...] = ()) -> _Plan:
    """Sort the file's visits into new ones (written in bulk) and stored ones (compared value by value)."""
    pid = programme.id
    station_ids = dict(session.exec(select(M.Station.code, M.Station.id).where(M.Station.programme_id == pid)).all())
    species_ids = dict(session.exec(select(M.Species.code, M.Species.id).where(M.Species.programme_id == pid)).all())
    observer_ids = dict(session.exec(select(M.Observer.code, M.Observer.id).where(M.Observer.programme_id == pid)).all())
    protocol_ids = dict(session.exec(select(M.ProtocolVersion.code, M.ProtocolVersion.id)
                                     .where(M.ProtocolVersion.programme_id == pid)).all())
    years = sorted({int(y) for y in visits[C.YEAR]})
    rounds = {r.year: r for r in session.exec(select(M.Round).where(M.Round.programme_id == pid,
                                                                     M.Round.year.in_(years))).all()}
    protocol_default = _default_protocol(session, pid)

    team_ids: dict[tuple, list[int]] = {}

    def ids_of(team: object) -> list[int]:
        key = tuple(team) if isinstance(team, (tuple, list)) else ()
        if key not in team_ids:
            team_ids[key] = [observer_ids[o] for o in key if o in observer_ids]
        return team_ids[key]

    v = pd.DataFrame({
        C.STATION: visits[C.STATION].to_numpy(dtype=object),
        "station_id": visits[C.STATION].map(station_ids).to_numpy(dtype=object),
        C.YEAR: visits[C.YEAR].astype(int).to_numpy(),
        C.DATE: visits[C.DATE].to_numpy(dtype=object),
        "status": visits[C.VISIT_STATUS].to_numpy(dtype=object),
        "repeat": visits[H.REPEAT].fillna(False).astype(bool).to_numpy(),
        "notes": [x if isinstance(x, str) else cell_text(x) for x in visits[H.NOTES]],
        "observer_ids": [ids_of(team) for team in visits[H.OBSERVERS]],
        "source_row": visits[H.SOURCE_ROW].astype(int).to_numpy(),
    })
    v["protocol_id"] = [protocol_ids.get(code) if code else protocol_default.get(year)
                        for code, year in zip((cell_text(x) for x in visits[C.PROTOCOL]), v[C.YEAR], strict=True)]
    v["existing_id"] = pd.array([None] * len(v), dtype="Int64")

    stored = pd.DataFrame(columns=["id", "station_id", "round_id", "date", "repeat_no"])
    if rounds:
        year_of = {r.id: y for y, r in rounds.items()}
        stored = pd.DataFrame(session.exec(select(M.Visit.id, M.Visit.station_id, M.Visit.round_id, M.Visit.date,
                                                  M.Visit.repeat_no)
                                           .where(M.Visit.round_id.in_(list(year_of)))).all(),
                              columns=["id", "station_id", "round_id", "date", "repeat_no"])
        stored[C.YEAR] = stored["round_id"].map(year_of)
    if len(stored) and len(v):
        # the same visit: same station, round and date; or, for a visit not marked repeat, the round's first visit
        by_date = dict(zip(zip(stored["station_id"], stored[C.YEAR], stored["date"]), stored["id"]))
        first = stored[stored["repeat_no"] == 0]
        by_round = dict(zip(zip(first["station_id"], first[C.YEAR]), first["id"]))
        matched = []
        for sid, year, date, repeat in zip(v["station_id"], v[C.YEAR], v[C.DATE], v["repeat"], strict=True):
            hit = by_date.get((sid, year, date))
            if hit is None and not repeat:
                hit = by_round.get((sid, year))
            matched.append(hit)
        v["existing_id"] = pd.array(matched, dtype="Int64")

    plan = _Plan()
    is_new = v["existing_id"].isna().to_numpy()
    new = v[is_new].copy()
    for year in sorted(set(new[C.YEAR])):
        if year in rounds and rounds[year].status == "certified":
            plan.locked_years.add(int(year))
        plan.windows[int(year)] = ((rounds[year].window_start, rounds[year].window_end) if year in rounds
                                   else programme_window(session, pid, int(year)))
    # repeat numbers: 0 for the round's visit; marked repeats count on from what the round holds
    new["repeat_no"] = 0
    if new["repeat"].any():
        stored_max = (stored.groupby(["station_id", C.YEAR])["repeat_no"].max().to_dict() if len(stored) else {})
        reps = new[new["repeat"]]
        order = reps.groupby(["station_id", C.YEAR]).cumcount() + 1
        new.loc[reps.index, "repeat_no"] = [int(stored_max.get((s, y), 0)) + int(k)
                                            for s, y, k in zip(reps["station_id"], reps[C.YEAR], order, strict=True)]
    plan.new = new

    # each value and covariate by the position of its visit in the file, kept when that visit is new
    if len(observations):
        at = _visit_positions(visits, observations)
        keep = is_new[at]
        o = observations[keep]
        plan.new_observations = pd.DataFrame({
            "at": at[keep],
            "species_id": o[C.SPECIES].map(species_ids).to_numpy(dtype=object),
            "measure": o[C.MEASURE].to_numpy(dtype=object),
            "value": o[H.VALUE].astype(float).to_numpy(),
            "n": pd.Series([None if pd.isna(x) else int(x) for x in o[H.N]], dtype=object),
        })
    if len(covariates):
        at = _visit_positions(visits, covariates)
        keep = is_new[at]
        c = covariates[keep]
        plan.new_covariates = pd.DataFrame({
            "at": at[keep],
            "name": c["name"].to_numpy(dtype=object),
            "unit": [cell_text(u) for u in c[H.UNIT]],
            "value": c[H.VALUE].astype(float).to_numpy(),
        })

    matched_rows = v[~is_new]
    if len(matched_rows):
        _plan_stored(session, matched_rows, observations, covariates, species_ids, observer_ids, protocol_ids, rounds,
                     plan, report, covariate_names, visits)
    if plan.locked_years:
        years_text = ", ".join(str(y) for y in sorted(plan.locked_years))
        raise LockedError(f"{file}: season {years_text} is certified (locked); "
                          f"unlock it first with `monitor records unlock YEAR --reason \"...\"`")
    report.visits_added = len(plan.new)
    report.observations_added = len(plan.new_observations)
    report.covariates_added = len(plan.new_covariates)
    return plan


def _visit_positions(visits: pd.DataFrame, rows: pd.DataFrame) -> np.ndarray:
    """For each row (a value or covariate), the position in ``visits`` of its visit (same station and date).

    Integer codes of the (station, date) pairs make this a fast join; every row belongs to a visit of the
    file (the reader and the validation see to that).
    """
    n = len(visits)
    stations, _ = pd.factorize(np.concatenate([visits[C.STATION].to_numpy(dtype=object),
                                               rows[C.STATION].to_numpy(dtype=object)]))
    dates, date_values = pd.factorize(np.concatenate([visits[C.DATE].to_numpy(dtype=object),
                                                      rows[C.DATE].to_numpy(dtype=object)]))
    key = stations.astype(np.int64) * (len(date_values) + 1) + dates
    at = pd.Index(key[:n]).get_indexer(key[n:]) if pd.Index(key[:n]).is_unique else \
        pd.Series(np.arange(n), index=key[:n]).groupby(level=0).first().reindex(key[n:]).to_numpy()
    at = np.asarray(at, dtype=np.int64)
    if (at < 0).any():  # pragma: no cover - the validation refuses values without a visit
        raise AssertionError("a value without its visit in the file")
    return at


def _plan_stored(session: Session, matched: pd.DataFrame, observations: pd.DataFrame, covariates: pd.DataFrame,
                 species_ids: dict, observer_ids: dict, protocol_ids: dict, rounds: dict, plan: _Plan,
                 report: ImportReport, covariate_names: tuple[str, ...], visits: pd.DataFrame) -> None:
    """Compare the file's version of visits already stored with what is stored: values, covariates, date,
    status, protocol, observers and notes alike."""
    obs_by_visit = {k: g for k, g in observations.groupby([C.STATION, C.DATE], sort=False)} if len(observations) else {}
    cov_by_visit = {k: g for k, g in covariates.groupby([C.STATION, C.DATE], sort=False)} if len(covariates) else {}
    stated_protocol = [bool(cell_text(code)) for code in visits[C.PROTOCOL]]  # by position, as matched's index
    for index, r in zip(matched.index, matched.to_dict(orient="records"), strict=True):
        station, date, year = r[C.STATION], r[C.DATE], int(r[C.YEAR])
        rows_obs = obs_by_visit.get((station, date))
        rows_cov = cov_by_visit.get((station, date))
        row = {
            "station": station, "station_id": r["station_id"], "year": year, "date": date, "status": r["status"],
            "repeat": bool(r["repeat"]), "notes": r["notes"], "protocol_id": r["protocol_id"],
            "protocol_stated": stated_protocol[int(index)],
            "observer_ids": r["observer_ids"], "source_row": int(r["source_row"]),
            "observations": [] if rows_obs is None else [
                {"species_id": species_ids[o[C.SPECIES]], "species": o[C.SPECIES], "measure": o[C.MEASURE],
                 "value": float(o[H.VALUE]), "n": None if pd.isna(o[H.N]) else int(o[H.N])}
                for o in rows_obs.to_dict(orient="records")],
            "covariates": {} if rows_cov is None else {
                c["name"]: (float(c[H.VALUE]), cell_text(c[H.UNIT])) for c in rows_cov.to_dict(orient="records")},
            "covariate_names": set(covariate_names),
        }
        existing = session.get(M.Visit, int(r["existing_id"]))
        changes = _compare(session, existing, row, species_ids, observer_ids, protocol_ids)
        if not changes:
            report.visits_unchanged += 1
            continue
        if rounds[year].status == "certified":
            plan.locked_years.add(year)
        for ch in changes:
            plan.changes.append((ch, row["source_row"]))
        plan.updates.append((existing.id, row))


def _default_protocol(session: Session, programme_id: int) -> dict[int, int]:
    """The protocol in force in each year (the latest whose effective date is on or before mid-year)."""
    protos = sorted(session.exec(select(M.ProtocolVersion).where(M.ProtocolVersion.programme_id == programme_id)).all(),
                    key=lambda p: p.effective_from)

    class _ByYear(dict):
        def get(self, year, default=None):  # noqa: A003 - a dict with computed lookups
            chosen = None
            for p in protos:
                if p.effective_from <= dt.date(int(year), 7, 1):
                    chosen = p.id
            return chosen if chosen is not None else default

    return _ByYear()


def stored_covariates(session: Session, visit_id: int) -> dict[str, M.Covariate]:
    return {c.name: c for c in session.exec(select(M.Covariate).where(M.Covariate.visit_id == visit_id)).all()}


def _covariate_changes(stored: dict[str, M.Covariate], row: dict) -> list[tuple[str, object, object, str]]:
    """(name, old, new, new unit) for each covariate the file states differently from what is stored.

    Only covariates the file has a column for are compared: a file without the column says nothing about
    them; a blank cell in the column means "not recorded" and removes a stored value (a change, as for values).
    """
    out = []
    for name in sorted(set(row["covariates"]) | (set(stored) & row["covariate_names"])):
        old, new = stored.get(name), row["covariates"].get(name)
        if old is None:
            out.append((name, None, new[0], new[1]))
        elif new is None:
            out.append((name, old.value, None, old.unit))
        elif old.value != new[0] or (old.unit or "") != (new[1] or ""):
            out.append((name, old.value, new[0], new[1]))
    return out


def _compare(session: Session, visit: M.Visit, row: dict, species_ids: dict, observer_ids: dict,
             protocol_ids: dict) -> list[Change]:
    """The differences between a stored visit (with its values and covariates) and the same visit in a file."""
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
    if row["protocol_stated"] and visit.protocol_id != row["protocol_id"]:
        code = {v: k for k, v in protocol_ids.items()}
        change("protocol", code.get(visit.protocol_id), code.get(row["protocol_id"]))
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
    for name, old, new, _unit in _covariate_changes(stored_covariates(session, visit.id), row):
        change(f"cov:{name}", old, new)
    stored_observers = set(session.exec(select(M.VisitObserver.observer_id)
                                        .where(M.VisitObserver.visit_id == visit.id)).all())
    if stored_observers != set(row["observer_ids"]):
        code = {v: k for k, v in observer_ids.items()}
        change("observers", ";".join(sorted(code[i] for i in stored_observers)),
               ";".join(sorted(code[i] for i in row["observer_ids"])))
    return out


def _write(session: Session, programme: M.Programme, file_name: str, digest: str, n_rows: int, plan: _Plan,
           reason: str | None, who: str) -> bool:
    """Write the plan; False (and no import batch recorded) when there is nothing to apply."""
    if not len(plan.new) and not plan.updates:
        return False
    now = utcnow()
    batch = M.ImportBatch(programme_id=programme.id, kind=KIND_RECORDS, file_name=file_name, content_hash=digest,
                          row_count=n_rows, imported_by=who, imported_at=now)
    session.add(batch)
    session.flush()
    new = plan.new
    if len(new):
        # rounds in year order, so two imports creating rounds at once never wait on each other in a cycle
        round_ids = {year: queries.ensure_round(session, programme.id, year, *plan.windows[year])
                     for year in sorted(plan.windows)}
        new_round = [round_ids[int(y)] for y in new[C.YEAR]]
        queries.insert_rows(session, "visit", ["station_id", "round_id", "date", "status", "repeat_no", "protocol_id",
                                               "notes", "import_batch_id"],
                            list(zip([int(s) for s in new["station_id"]], new_round,
                                     [d.isoformat() for d in new[C.DATE]], new["status"].tolist(),
                                     [int(x) for x in new["repeat_no"]],
                                     [None if x is None or pd.isna(x) else int(x) for x in new["protocol_id"]],
                                     new["notes"].tolist(), [batch.id] * len(new), strict=True)))
        faults.reached(f"{len(new)} visits written")
        id_of = {(s, r, k): i for i, s, r, k in queries.batch_visits(session, batch.id)}
        id_at = np.zeros(int(new.index.max()) + 1, dtype=np.int64)  # visit id by position in the file
        id_at[new.index.to_numpy()] = [id_of[(int(s), r, int(k))] for s, r, k in
                                       zip(new["station_id"], new_round, new["repeat_no"], strict=True)]
        obs = plan.new_observations
        if len(obs):
            queries.insert_rows(session, "observation", ["visit_id", "species_id", "measure", "value", "n"],
                                list(zip(id_at[obs["at"].to_numpy()].tolist(), [int(x) for x in obs["species_id"]],
                                         obs["measure"].tolist(), obs["value"].tolist(), obs["n"].tolist(),
                                         strict=True)))
        queries.insert_rows(session, "visit_observer", ["visit_id", "observer_id"],
                            [(vid, int(oid)) for vid, team in zip(id_at[new.index.to_numpy()].tolist(),
                                                                  new["observer_ids"], strict=True)
                             for oid in dict.fromkeys(team)])
        cov = plan.new_covariates
        if len(cov):
            station_at = dict(zip(new.index.tolist(), new["station_id"], strict=True))
            queries.insert_rows(session, "covariate", ["station_id", "visit_id", "name", "unit", "value"],
                                list(zip([int(station_at[a]) for a in cov["at"]], id_at[cov["at"].to_numpy()].tolist(),
                                         cov["name"].tolist(), cov["unit"].tolist(), cov["value"].tolist(),
                                         strict=True)))
    for visit_id, row in plan.updates:
        _apply_update(session, programme.id, visit_id, row, reason or "", who, now)
    session.flush()
    if plan.updates and not len(new):
        faults.reached(f"{len(plan.updates)} visits corrected")
    new_years = {int(y) for y in plan.new[C.YEAR].unique()} if len(plan.new) else set()
    _refresh_planned_outcomes(session, programme.id, sorted(new_years | {int(r["year"]) for _i, r in plan.updates}))
    return True


def _refresh_planned_outcomes(session: Session, programme_id: int, years: list[int]) -> None:
    """Stored season plans learn each planned station's outcome as its records arrive."""
    if not years:
        return
    planned = session.exec(select(M.PlannedVisit.id).join(M.Round, M.Round.id == M.PlannedVisit.round_id)
                           .where(M.Round.programme_id == programme_id, M.Round.year.in_(years)).limit(1)).first()
    if planned is None:
        return
    from monitor.services.schedule import refresh_outcomes

    refresh_outcomes(session, programme_id, years)


def _apply_update(session: Session, programme_id: int, visit_id: int, row: dict, reason: str, who: str,
                  now: dt.datetime) -> None:
    """Bring a stored visit to the file's version, logging every changed value."""
    visit = session.get(M.Visit, visit_id)

    def log(table: str, row_id: int, field_: str, old: object, new: object) -> None:
        log_change(session, programme_id, table, row_id, field_, old, new, reason, who, now)

    for field_ in ("date", "status", "notes"):
        old, new = getattr(visit, field_), row[field_]
        if (old or "") != (new or ""):
            log("visit", visit.id, field_, old, new)
            setattr(visit, field_, new)
    if row.get("protocol_stated") and visit.protocol_id != row["protocol_id"]:
        codes = dict(session.exec(select(M.ProtocolVersion.id, M.ProtocolVersion.code)).all())
        log("visit", visit.id, "protocol", codes.get(visit.protocol_id), codes.get(row["protocol_id"]))
        visit.protocol_id = row["protocol_id"]
    stored_cov = stored_covariates(session, visit.id)
    for name, old, new, unit in _covariate_changes(stored_cov, row):
        if old is None:
            added = M.Covariate(station_id=visit.station_id, visit_id=visit.id, name=name, unit=unit or "", value=new)
            session.add(added)
            session.flush()
            log("covariate", added.id, f"cov:{name}", None, new)
        elif new is None:
            log("covariate", stored_cov[name].id, f"cov:{name}", old, None)
            session.delete(stored_cov[name])
        else:
            log("covariate", stored_cov[name].id, f"cov:{name}", old, new)
            stored_cov[name].value, stored_cov[name].unit = new, unit or ""
    stored = {(o.species_id, o.measure): o for o in session.exec(
        select(M.Observation).where(M.Observation.visit_id == visit.id)).all()}
    new_obs = {(o["species_id"], o["measure"]): o for o in row["observations"]}
    for key, obs in stored.items():
        if key not in new_obs:
            log("visit", visit.id, f"{_species_code(session, obs.species_id)}:{obs.measure}", obs.value, None)
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


def _species_code(session: Session, species_id: int) -> str:
    species = session.get(M.Species, species_id)
    return species.code if species is not None else str(species_id)


# --- certification ------------------------------------------------------------------------------------------
