"""Stored analyses: fit once, reuse while the data, the model and the engine stand.

A fit is identified by its species, measure and area, its model specification (every argument of
``services.trend.fit_one`` except the data, defaults included), the engine version (a hash of the trend
code and the numerical libraries' versions, ``monitor.trend.storage.engine_version``) and the SHA-256
fingerprint of the exact table fitted.  ``fit_tasks`` looks each task up in ``stored_fit``: a match is read
back (bit for bit the numbers fitted then), anything else (new data, a correction, a late sheet, another
option, other code) is fitted, by the runner given (this process, a local pool or a Dask cluster), and
stored by this process in one transaction.  Workers never touch the database.
"""

from __future__ import annotations

import contextlib
import contextvars
import dataclasses
import datetime as dt
import hashlib
import inspect
import json
import math
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from monitor.db import Store
from monitor.db import fits as fit_store
from monitor.db.models import utcnow
from monitor.errors import AccessError, MonitorError
from monitor.services.executor import Runner
from monitor.trend import TrendResult
from monitor.trend import storage

AREA_ALL = "all"
AREA_KINDS = ("site", "stratum", "region")


@dataclass(frozen=True)
class FitTask:
    """One fit to make: what it is of, its options (JSON-ready) and the exact table it is fitted to."""

    species: str
    measure: str
    area_kind: str
    area: str
    options: dict
    data: pd.DataFrame = field(repr=False)


@dataclass(frozen=True)
class FitOutcome:
    """What a worker returns: the result, or the problem that stopped the fit, and the time it took."""

    result: TrendResult | None
    error: MonitorError | None
    seconds: float


@dataclass(frozen=True)
class StoredOutcome:
    """A task's result as the caller sees it: fitted now or reused, and when it was made."""

    task: FitTask
    result: TrendResult | None
    error: MonitorError | None
    fit_id: int | None
    fitted_at: dt.datetime | None
    fitted_by: str
    reused: bool
    stored: bool
    key: tuple | None = None   # (species, measure, area_kind, area, spec_hash, engine_version, data_fingerprint)


class _Saved:
    """Fits written when a ``saving_after`` block ends: their ids by identity."""

    def __init__(self) -> None:
        self.pending: list[tuple[str, int, list[dict]]] = []   # (database URL, programme id, rows)
        self.ids: dict[tuple, int] = {}

    def fit_id(self, trend: object) -> int | None:
        """The stored id of a fitted trend (``SpeciesTrend``), once written; None if it was not stored."""
        known = getattr(trend, "fit_id", None)
        if known is not None:
            return known
        key = getattr(trend, "fit_key", None)
        return self.ids.get(key) if key is not None else None


_SAVES: contextvars.ContextVar[_Saved | None] = contextvars.ContextVar("monitor_fit_saves", default=None)


@contextlib.contextmanager
def saving_after() -> Iterator[_Saved]:
    """Fits made inside the block while a read snapshot is open are written when the block ends.

    A snapshot holds a read transaction; on SQLite a write from the same process would wait for it to end,
    so the new fits are kept until then and written in one transaction each per database.  Nested blocks
    write with the outermost.  A block that fails writes nothing.
    """
    outer = _SAVES.get()
    if outer is not None:
        yield outer
        return
    saved = _Saved()
    token = _SAVES.set(saved)
    try:
        yield saved
    finally:
        _SAVES.reset(token)
    for url, programme_id, rows in saved.pending:
        store = Store.open(url)
        try:
            ids = fit_store.save_fits(store, programme_id, rows)
        except (AccessError, MonitorError):
            continue  # a reader's role, or a read-only file: the results stand, unstored
        finally:
            store.dispose()
        saved.ids.update({_identity(row): i for row, i in zip(rows, ids, strict=True)})


def _identity(row: dict) -> tuple:
    return (row["species"], row["measure"], row["area_kind"], row["area"], row["spec_hash"], row["engine_version"],
            row["data_fingerprint"])


def run_fit(task: FitTask) -> FitOutcome:
    """Fit one task (runs in a worker process or on a cluster; top level so it can be sent there)."""
    from monitor.services.trend import fit_one

    start = time.perf_counter()
    try:
        result = fit_one(task.data, task.measure, **task.options)
    except MonitorError as exc:
        return FitOutcome(None, exc, time.perf_counter() - start)
    return FitOutcome(result, None, time.perf_counter() - start)


def specification(measure: str, options: dict) -> dict:
    """The full model specification of a fit: every argument of ``fit_one`` but the data, defaults applied.

    An option added to ``fit_one`` later enters every specification by itself (with its default), so a
    fit stored before is never taken for one made with the new option.
    """
    from monitor.services.trend import fit_one

    bound = inspect.signature(fit_one).bind(None, measure, **options)
    bound.apply_defaults()
    return {k: _plain(v) for k, v in bound.arguments.items() if k != "data"}


def _plain(value: object) -> object:
    """An option as JSON-ready values: an options object (``ModelChoices``) as its class and every field."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {"__class__": type(value).__qualname__,
                **{f.name: _plain(getattr(value, f.name)) for f in dataclasses.fields(value)}}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    return value


def engine_version() -> str:
    """The trend engine's version, with the service code that sets the fit's options."""
    from monitor.services import trend

    h = hashlib.sha256(Path(trend.__file__).read_bytes()).hexdigest()[:12]
    return f"{storage.engine_version()}; options {h}"


def _row(task: FitTask, outcome: FitOutcome, spec_json: str, spec_digest: str, engine: str, fingerprint: str,
         who: str, when: dt.datetime) -> dict:
    r = outcome.result
    assert r is not None
    ac = r.annual_change
    return {
        "species": task.species, "measure": task.measure, "area_kind": task.area_kind, "area": task.area,
        "spec_json": spec_json, "spec_hash": spec_digest, "engine_version": engine, "data_fingerprint": fingerprint,
        "result_json": storage.dumps_result(r), "n_obs": int(r.n_obs), "first_year": int(r.years[0]),
        "last_year": int(r.years[1]), "call": r.call, "annual_change": _finite(ac.estimate),
        "annual_lower": _finite(ac.lower), "annual_upper": _finite(ac.upper),
        "fit_seconds": float(outcome.seconds), "fitted_by": who, "fitted_at": when,
    }


def _finite(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(float(x)) else float(x)


def fit_tasks(store: Store, programme_id: int, tasks: list[FitTask], runner: Runner, *, who: str,
              refit: bool = False, save: bool = True,
              progress: Callable[[int, int], None] | None = None) -> list[StoredOutcome]:
    """Results for every task, in the order given: stored fits reused where they match, the rest fitted.

    Parameters
    ----------
    refit : bool
        Fit everything again (the new fits are stored beside the old; identical ones are not duplicated).
    save : bool
        Store the new fits (the submitting process writes them; workers never do).  A database role that
        may not write (a reader) gets its results all the same, unstored.
    """
    engine = engine_version()
    specs = [specification(t.measure, t.options) for t in tasks]
    spec_texts = [json.dumps(s, sort_keys=True, default=str) for s in specs]
    digests = [storage.spec_hash(s) for s in specs]
    prints = [storage.data_fingerprint(t.data) for t in tasks]
    found: dict[int, tuple[TrendResult, int, dt.datetime, str]] = {}
    if not refit:
        index = fit_store.stored_fit_index(store, programme_id, engine)
        keyed = {tuple(r[k] for k in fit_store.IDENTITY): r for r in index.to_dict(orient="records")}
        matches = {}
        for i, t in enumerate(tasks):
            row = keyed.get((t.species, t.measure, t.area_kind, t.area, digests[i], prints[i]))
            if row is not None:
                matches[i] = row
        texts = fit_store.stored_results(store, [r["id"] for r in matches.values()])
        for i, row in matches.items():
            try:
                result = storage.loads_result(texts[int(row["id"])])
            except storage.StoredResultError:
                continue  # written by code whose result no longer reads back: fit again
            if isinstance(result, TrendResult):
                found[i] = (result, int(row["id"]), _utc(row["fitted_at"]), row["fitted_by"])
    todo = [i for i in range(len(tasks)) if i not in found]
    outcomes = runner.map(run_fit, [tasks[i] for i in todo], progress=progress)
    when = utcnow()
    fresh = [(i, o) for i, o in zip(todo, outcomes, strict=True) if o.result is not None]
    ids: dict[int, int] = {}
    stored = False
    rows = [_row(tasks[i], o, spec_texts[i], digests[i], engine, prints[i], who, when) for i, o in fresh]
    keys = {i: _identity(r) for (i, _), r in zip(fresh, rows, strict=True)}
    if save and rows:
        saves = _SAVES.get()
        if store.connection is not None:
            # inside a read snapshot: written when it ends (by the enclosing ``saving_after``), never through it
            if saves is not None:
                saves.pending.append((store.engine.url.render_as_string(hide_password=False), programme_id, rows))
                stored = True
        else:
            try:
                ids = dict(zip([i for i, _ in fresh], fit_store.save_fits(store, programme_id, rows), strict=True))
                stored = True
            except (AccessError, MonitorError):
                # a reader's role, or a read-only file: the results stand, unstored (and say so)
                stored = False
    by_index = dict(zip(todo, outcomes, strict=True))
    out = []
    for i, task in enumerate(tasks):
        if i in found:
            result, fit_id, fitted_at, fitted_by = found[i]
            out.append(StoredOutcome(task, result, None, fit_id, fitted_at, fitted_by, reused=True, stored=True,
                                     key=(task.species, task.measure, task.area_kind, task.area, digests[i], engine,
                                          prints[i])))
        else:
            o = by_index[i]
            out.append(StoredOutcome(task, o.result, o.error, ids.get(i), when if o.result is not None else None,
                                     who, reused=False, stored=stored and o.result is not None, key=keys.get(i)))
    return out


def record_report(store: Store, programme_id: int, year: int, fit_ids: list[int], *, folder: str, who: str) -> int | None:
    """Record the report written and the fits it showed; None where the role may not write."""
    try:
        return fit_store.record_report(store, programme_id, year, fit_ids, folder=folder, issued_by=who,
                                       issued_at=utcnow())
    except (AccessError, MonitorError):
        return None


def previous_report(store: Store, programme_id: int, year: int) -> dict | None:
    """The last report written for ``year`` as the comparison reads it (``report.json``'s summary shape),
    from the database; None when no report for that season is recorded."""
    frame = fit_store.call_history(store, programme_id, year=year, with_results=True)
    frame = frame[frame["area_kind"] == AREA_ALL]
    if frame.empty:
        return None
    summary = []
    for r in frame.to_dict(orient="records"):
        entry = {"species": r["species"], "measure": r["measure"], "call": r["call"],
                 "years": [int(r["first_year"]), int(r["last_year"])], "n_obs": int(r["n_obs"]),
                 "annual_change": {"estimate": r["annual_change"], "lower": r["annual_lower"],
                                   "upper": r["annual_upper"]}}
        try:
            result = storage.loads_result(r["result_json"])
            entry["family"], entry["margin"] = result.family, result.margin  # type: ignore[attr-defined]
        except storage.StoredResultError:
            pass
        summary.append(entry)
    issued = pd.Timestamp(frame["issued_at"].iloc[0])
    return {"season": int(year), "generated": issued.isoformat(), "summary": summary, "source": "database"}


def history(db: str | None, species: str, *, programme_code: str | None = None,
            areas: bool = False) -> pd.DataFrame:
    """What each year's report told the managers about a species: the call, the annual change and when
    the fit was made, one row per season (and per area with ``areas``)."""
    from monitor.errors import InputError, InputProblem

    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        known = store.frame("SELECT code FROM species WHERE programme_id = :p", p=programme.id)["code"]
        if species not in set(known):
            raise InputError(InputProblem("SPECIES", None, None, species, "a species code of the programme"))
        frame = fit_store.call_history(store, programme.id, species)
    finally:
        store.dispose()
    if not areas:
        frame = frame[frame["area_kind"] == AREA_ALL]
    out = pd.DataFrame({
        "report_year": frame["report_year"].astype(int),
        "species": frame["species"],
        "measure": frame["measure"],
        "area": [AREA_ALL if k == AREA_ALL else f"{k} {a}" for k, a in zip(frame["area_kind"], frame["area"], strict=True)],
        "call": frame["call"],
        "annual_change": frame["annual_change"],
        "lower": frame["annual_lower"],
        "upper": frame["annual_upper"],
        "years": [f"{a}-{b}" for a, b in zip(frame["first_year"], frame["last_year"], strict=True)],
        "fitted_at": [_stamp(x) for x in frame["fitted_at"]],
        "reported_at": [_stamp(x) for x in frame["issued_at"]],
    })
    return out.reset_index(drop=True)


def _utc(value: object) -> dt.datetime:
    """A stored time as an aware UTC datetime (SQLite gives it back without its zone)."""
    stamp = pd.Timestamp(value)
    stamp = stamp.tz_localize("UTC") if stamp.tzinfo is None else stamp.tz_convert("UTC")
    return stamp.to_pydatetime()


def _stamp(value: object) -> str:
    return _utc(value).strftime("%Y-%m-%d %H:%M UTC")
