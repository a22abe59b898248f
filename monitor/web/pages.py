"""The workspace's pages: each handler reads the request, calls one or two services, and lays the answer out
with a template.  No statistics and no SQL here (the services and stages do that)."""

from __future__ import annotations

import base64
import datetime as dt
import math
import re
import shutil
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pandas as pd

from monitor import columns as C
from monitor.errors import DataError, InputError, InputProblem
from monitor.io.sheets import is_missing
from monitor.security import new_token
from monitor.web import drawing

if TYPE_CHECKING:  # pragma: no cover
    from monitor.web.app import Ctx


# --- small helpers --------------------------------------------------------------------------------------------


def number_text(value: Any) -> str:
    """A cell as text: blanks for missing values, whole numbers without '.0'."""
    if is_missing(value):
        return ""
    if isinstance(value, float):
        if value.is_integer():
            return str(int(value))
        return f"{value:.10g}" if abs(value) >= 1000 else f"{value:.4g}"
    if isinstance(value, dt.datetime):
        return value.strftime("%Y-%m-%d %H:%M")
    if isinstance(value, dt.date):
        return value.isoformat()
    return str(value)


def table(frame: pd.DataFrame, columns: list[str] | None = None) -> dict[str, Any]:
    """A frame as a template table: column names and rows of text."""
    columns = [c for c in (columns or list(frame.columns)) if c in frame.columns]
    rows = [[number_text(v) for v in row] for row in frame[columns].itertuples(index=False, name=None)]
    return {"columns": columns, "rows": rows}


def _int(ctx: Ctx, name: str, default: int | None = None) -> int:
    raw = ctx.form.get(name, ctx.request.query_params.get(name))
    if raw in (None, ""):
        if default is None:
            raise InputError(InputProblem("form", None, name, None, "a whole number"))
        return default
    try:
        return int(str(raw).strip())
    except ValueError:
        raise InputError(InputProblem("form", None, name, raw, "a whole number")) from None


def _text(ctx: Ctx, name: str) -> str:
    return str(ctx.form.get(name, "")).strip()


def _programme(ctx: Ctx) -> str | None:
    return ctx.config.programme


# --- the programme at a glance --------------------------------------------------------------------------------


def overview(ctx: Ctx):
    from monitor.services import quality, schedule, summary, workspace

    db, code = ctx.db, _programme(ctx)
    s = summary.programme_summary(db, code)
    season = workspace.next_season(db, code)
    try:
        due = schedule.due_for_season(db, season, programme_code=code)
        due_counts = due.groupby("reason").size().to_dict()
        outcomes = due.groupby("outcome").size().to_dict()
    except DataError as exc:
        due_counts, outcomes = {}, {"could not work it out": str(exc)}
    flags = quality.list_flags(db, code)
    return ctx.render(
        "web/overview.html", title="The programme at a glance", programme=s["programme"],
        sites=table(s["sites"], [C.SITE, "name", "habitat", "area_m2", "in_service", "retired", "access_until"]),
        stations=s["stations"], visits=table(s["visits_by_year"]),
        species=table(s["species"], [C.SPECIES, "scientific_name", "common_name", C.MEASURE, "n"]),
        open_flags=len(flags), flags_by_kind=flags.groupby("kind").size().to_dict() if len(flags) else {},
        season=season, due_counts=due_counts, outcomes=outcomes)


# --- stations ------------------------------------------------------------------------------------------------


def stations(ctx: Ctx):
    from monitor.services import workspace

    r = workspace.reserve(ctx.db, _programme(ctx))
    st = r["stations"]
    shapes = drawing.reserve_map(r["geometry"], st[[C.STATION, C.X, C.Y, "state"]].to_dict(orient="records"))
    return ctx.render("web/stations.html", title="Stations", map=shapes,
                      stations=table(st, [C.STATION, C.SITE, C.PANEL, "placement", "state", C.TRANSECT,
                                          "established", "last_visit", "visits"]),
                      sites=table(r["sites"], [C.SITE, "name", "habitat", "in_service", "retired"]))


def station(ctx: Ctx):
    from monitor.services import workspace
    from monitor.services.history import station_history

    code = ctx.request.path_params["code"]
    history = station_history(ctx.db, code, programme_code=_programme(ctx))
    visits = history["visits"]
    keys = sorted({k for v in visits for k in v["values"]})
    series = []
    for key in keys:
        points = [(v[C.YEAR], v["values"][key]) for v in sorted(visits, key=lambda v: v[C.DATE])
                  if key in v["values"] and v["repeat_no"] == 0]
        series.append({"key": key, "chart": drawing.series_chart(points)})
    visit_rows = [[number_text(v[C.DATE]), v[C.VISIT_STATUS], v["observers"], v["notes"]]
                  + [number_text(v["values"].get(k)) for k in keys] for v in visits]
    info = {k: number_text(v) for k, v in history["station"].items()}
    targets = workspace.targets(ctx.db, _programme(ctx))
    fields = [f"{s}:{m}" for s, m in zip(targets[C.SPECIES], targets[C.MEASURE], strict=True)]
    years = sorted({v[C.YEAR] for v in visits}, reverse=True)
    return ctx.render("web/station.html", title=f"Station {code}", code=code, info=info,
                      visits={"columns": ["date", "status", "observers", "notes", *keys], "rows": visit_rows},
                      series=series, changes=table(history["changes"]), events=table(history["events"]),
                      photos=table(history["photos"]), flags=table(history["quality_flags"]),
                      fields=fields, years=years)


# --- the season ------------------------------------------------------------------------------------------------


def _pack_folder(ctx: Ctx, year: int) -> Path:
    return ctx.config.workdir / "packs" / str(year)


def _pack_files(ctx: Ctx, year: int) -> list[dict[str, str]]:
    folder = _pack_folder(ctx, year)
    base = ctx.config.workdir / "packs"
    if not folder.is_dir():
        return []
    return [{"name": p.relative_to(folder).as_posix(), "href": p.relative_to(base).as_posix()}
            for p in sorted(folder.rglob("*")) if p.is_file()]


def season(ctx: Ctx):
    from monitor.services import schedule, workspace

    db, code = ctx.db, _programme(ctx)
    year = _int(ctx, "year", workspace.next_season(db, code))
    try:
        due = schedule.due_for_season(db, year, programme_code=code)
        due_table = table(due, [C.STATION, C.SITE, C.PANEL, "reason", "overdue_years", "team", "day",
                                "route_order", "outcome"])
        problem = ""
    except DataError as exc:
        due_table, problem = {"columns": [], "rows": []}, str(exc)
    plan = workspace.season_plan(db, year, code)
    team_days = []
    if len(plan):
        planned = plan[plan["day"].notna()]
        for (day, team), rows in planned.groupby(["day", "team"], sort=True):
            team_days.append({"day": day.isoformat(), "team": team, "sites": ", ".join(sorted(set(rows[C.SITE]))),
                              "stations": " > ".join(rows.sort_values("route_order")[C.STATION])})
    return ctx.render("web/season.html", title=f"Season {year}", year=year, due=due_table, problem=problem,
                      team_days=team_days, packs=_pack_files(ctx, year))


def season_plan(ctx: Ctx):
    from monitor.services import schedule

    year = _int(ctx, "year")
    teams = _int(ctx, "teams")
    result = schedule.plan_season(ctx.db, year, teams=teams, replace=bool(ctx.form.get("replace")),
                                  programme_code=_programme(ctx))
    ctx.app.forget()
    ctx.flash("ok", f"Season {year} planned and stored: {result.summary()}"
              + (f" (replaced {result.replaced} planned visits)" if result.replaced else ""))
    return ctx.redirect(f"/season?year={year}")


def season_packs(ctx: Ctx):
    from monitor.services import schedule

    year = _int(ctx, "year")
    folder = _pack_folder(ctx, year)
    if folder.exists():
        shutil.rmtree(folder)
    result = schedule.write_field_packs(ctx.db, year, folder, programme_code=_programme(ctx))
    ctx.flash("ok", f"Field packs written for {len(result.team_days)} team-days of {year}.")
    return ctx.redirect(f"/season?year={year}")


def packs_zip(ctx: Ctx):
    year = ctx.request.path_params["year"]
    folder = _pack_folder(ctx, year)
    if not folder.is_dir():
        raise DataError(f"no field packs have been written for {year}; write them first")
    return ctx.app.zip_folder(folder, f"field_packs_{year}.zip")


# --- records -----------------------------------------------------------------------------------------------------


def records(ctx: Ctx):
    from monitor.services import workspace

    seasons = workspace.seasons(ctx.db, _programme(ctx))
    targets = workspace.targets(ctx.db, _programme(ctx))
    return ctx.render("web/records.html", title="Records", seasons=table(seasons),
                      season_rows=seasons.to_dict(orient="records"),
                      fields=[f"{s}:{m}" for s, m in zip(targets[C.SPECIES], targets[C.MEASURE], strict=True)])


_SAFE_NAME = re.compile(r"[^A-Za-z0-9._-]+")


def records_upload(ctx: Ctx):
    upload = ctx.files.get("sheet")
    if upload is None or not upload.filename:
        raise InputError(InputProblem("upload", None, "sheet", None, "a field sheet file (CSV or .xlsx)"))
    name = _SAFE_NAME.sub("_", Path(upload.filename).name).strip("._") or "sheet.csv"
    if Path(name).suffix.lower() not in (".csv", ".xlsx", ".txt"):
        raise InputError(InputProblem(name, None, None, None, "a CSV or .xlsx field sheet"))
    token = new_token(12)
    folder = ctx.config.workdir / "uploads" / token
    folder.mkdir(parents=True)
    data = upload.file.read()
    (folder / name).write_bytes(data)
    correct = bool(ctx.form.get("correct"))
    reason = _text(ctx, "reason")
    if correct and not reason:
        raise InputError(InputProblem(name, None, "reason", None, "a reason for correcting stored values"))
    ctx.session.uploads[token] = {"path": str(folder / name), "name": name, "correct": correct, "reason": reason,
                                  "accept_warnings": bool(ctx.form.get("accept_warnings"))}
    return ctx.redirect(f"/records/check/{token}")


def _pending(ctx: Ctx) -> tuple[str, dict]:
    token = ctx.request.path_params["upload"]
    pending = ctx.session.uploads.get(token)
    if pending is None:
        raise DataError("that upload is not (or no longer) waiting here; upload the sheet again")
    return token, pending


def _preview(path: Path, problems: list[InputProblem]) -> dict[str, Any]:
    from monitor.io.preview import sheet_rows

    rows = sheet_rows(path)
    header = rows[0][1] if rows else []
    by_row: dict[int, list[str]] = {}
    for p in problems:
        if p.row is not None:
            by_row.setdefault(int(p.row), []).append(p.field or "")
    marked = []
    for number, cells in rows[1:]:
        fields = by_row.get(number)
        bad_cols = {i for i, h in enumerate(header) if fields and h.strip() in fields}
        marked.append({"number": number, "bad": fields is not None, "cells": [
            {"text": c, "bad": i in bad_cols} for i, c in enumerate(cells)]})
    return {"header": header, "header_row": rows[0][0] if rows else 1, "rows": marked}


def records_check(ctx: Ctx):
    from monitor.services.imports import import_records

    token, pending = _pending(ctx)
    path = Path(pending["path"])
    try:
        report = import_records(
            ctx.db, path, programme_code=_programme(ctx), dry_run=True, correct=pending["correct"],
            reason=pending["reason"] or None, accept_warnings=pending["accept_warnings"], who=ctx.who)
    except InputError as exc:
        problems = exc.problems
        return ctx.render("web/records_check.html", title=f"Check of {pending['name']}", token=token,
                          pending=pending, problems=[_problem_row(p) for p in problems], report=None,
                          preview=_preview(path, problems), status=200)
    return ctx.render("web/records_check.html", title=f"Check of {pending['name']}", token=token, pending=pending,
                      problems=[], report=report, preview=_preview(path, []))


def _problem_row(p: InputProblem) -> dict[str, str]:
    return {"row": "" if p.row is None else str(p.row), "field": p.field or "",
            "value": "" if p.value is None else number_text(p.value), "expected": p.expected,
            "severity": p.severity, "line": p.line()}


def records_import(ctx: Ctx):
    from monitor.services.imports import import_records

    token, pending = _pending(ctx)
    report = import_records(
        ctx.db, Path(pending["path"]), programme_code=_programme(ctx), correct=pending["correct"],
        reason=pending["reason"] or None, accept_warnings=pending["accept_warnings"], who=ctx.who)
    ctx.session.uploads.pop(token, None)
    shutil.rmtree(Path(pending["path"]).parent, ignore_errors=True)  # stored now; the import batch keeps its hash
    ctx.app.forget()
    if report.already_imported:
        ctx.flash("ok", f"{pending['name']}: already imported, nothing to do.")
    else:
        ctx.flash("ok", f"{pending['name']} imported: {report.visits_added} visits and {report.observations_added} "
                        f"values added, {len(report.changes)} stored values corrected.")
    return ctx.redirect("/records")


def records_correct(ctx: Ctx):
    from monitor.services.corrections import set_value

    station = _text(ctx, "station")
    field = _text(ctx, "field")
    species, _, measure = field.partition(":")
    change = set_value(ctx.db, station, _int(ctx, "year"), species, measure, _text(ctx, "value"),
                                       reason=_text(ctx, "reason"), who=ctx.who, programme_code=_programme(ctx))
    ctx.app.forget()
    if change.old == change.new:
        ctx.flash("ok", f"{change.station} {change.date}: {change.field} is already {change.new:g}; nothing changed.")
    elif change.old is None:
        ctx.flash("ok", f"{change.station} {change.date}: {change.field} added: {change.new:g} (logged).")
    else:
        ctx.flash("ok", f"{change.station} {change.date}: {change.field} corrected {change.old:g} -> "
                        f"{change.new:g} (logged).")
    back = _text(ctx, "back")
    return ctx.redirect(back if back in ("/records",) else f"/stations/{station}")


def records_certify(ctx: Ctx):
    from monitor.services.locks import set_lock

    ctx.flash("ok", set_lock(ctx.db, _int(ctx, "year"), lock=True, who=ctx.who,
                                             programme_code=_programme(ctx)))
    return ctx.redirect("/records")


def records_unlock(ctx: Ctx):
    from monitor.services.locks import set_lock

    ctx.flash("ok", set_lock(ctx.db, _int(ctx, "year"), lock=False, reason=_text(ctx, "reason"),
                                             who=ctx.who, programme_code=_programme(ctx)))
    return ctx.redirect("/records")


# --- quality --------------------------------------------------------------------------------------------------


def quality(ctx: Ctx):
    from monitor.services import quality as quality_service

    flags = quality_service.list_flags(ctx.db, _programme(ctx), states=None)
    open_flags = flags[flags["state"] == "open"]
    closed = flags[flags["state"] != "open"]
    return ctx.render("web/quality.html", title="Quality",
                      open_flags=[{k: number_text(v) for k, v in r.items()} for r in open_flags.to_dict(orient="records")],
                      closed=table(closed, ["id", "kind", C.STATION, C.SPECIES, C.YEAR, "detail", "state", "note"]))


def quality_check(ctx: Ctx):
    from monitor.services import quality as quality_service

    run = quality_service.run_checks(ctx.db, _programme(ctx))
    ctx.flash("ok", f"Checks run: {run.found} findings, {run.new} new flags, {len(run.open_flags)} open.")
    return ctx.redirect("/quality")


def quality_resolve(ctx: Ctx):
    from monitor.services import quality as quality_service

    ctx.flash("ok", quality_service.resolve_flag(ctx.db, _int(ctx, "flag"), note=_text(ctx, "note"),
                                                 accept=ctx.form.get("accept") == "yes", who=ctx.who,
                                                 programme_code=_programme(ctx)))
    return ctx.redirect("/quality")


# --- trends and the report ------------------------------------------------------------------------------------


def _reports(ctx: Ctx) -> list[dict[str, Any]]:
    base = ctx.config.workdir / "reports"
    out = []
    for folder in sorted((p for p in base.iterdir() if p.is_dir() and p.name.isdigit()), reverse=True):
        files = [{"name": p.name, "href": p.relative_to(base).as_posix()}
                 for p in sorted(folder.iterdir()) if p.is_file() and p.suffix in (".html", ".pdf", ".json")]
        out.append({"year": folder.name, "files": files})
    return out


def trends(ctx: Ctx):
    from monitor.services import workspace

    targets = workspace.targets(ctx.db, _programme(ctx))
    seasons = workspace.seasons(ctx.db, _programme(ctx))
    recorded = seasons[seasons["visits"] > 0]["year"]
    return ctx.render("web/trends.html", title="Trends",
                      species=[{k: number_text(v) for k, v in r.items()} for r in targets.to_dict(orient="records")],
                      last_year=int(recorded.max()) if len(recorded) else dt.date.today().year,
                      reports=_reports(ctx))


def _fit(ctx: Ctx, species: str):
    from monitor.services import trend as trend_service
    from monitor.services import workspace

    def compute():
        return trend_service.fit_programme(ctx.db, programme_code=_programme(ctx), species=[species])

    # reused until the stored records change (through the workspace or the command line)
    return ctx.app.cached(("trend", species, workspace.records_fingerprint(ctx.db, _programme(ctx))), compute)


def trend(ctx: Ctx):
    from monitor.report import figures, wording

    species = ctx.request.path_params["species"]
    fits = _fit(ctx, species)
    shown = []
    for t in fits:
        r = t.result
        fig = figures.plot_indices(r.indices, r.fitted_trend, title=None)
        png = base64.b64encode(figures.figure_png(fig)).decode("ascii")
        ac = r.annual_change
        shown.append({
            "measure": t.measure, "common_name": t.common_name, "call": r.call, "call_reason": r.call_reason,
            "rate": wording.rate_with_interval(ac.estimate, ac.lower, ac.upper) if all(
                math.isfinite(x) for x in (ac.estimate, ac.lower, ac.upper)) else "not estimable",
            "margin": f"{100 * r.margin:.1f}", "years": f"{r.years[0]}-{r.years[1]}", "n_stations": r.n_stations,
            "n_obs": r.n_obs, "chart": f"data:image/png;base64,{png}",
            "indices": table(r.indices, ["year", "index", "lower", "upper"]),
            "notes": [d.message for d in (*r.diagnostics, *t.notes)],
        })
    return ctx.render("web/trend.html", title=f"Trend of {species}", species=species, fits=shown)


def trends_report(ctx: Ctx):
    from monitor.services import report as report_service

    year = _int(ctx, "year")
    base = ctx.config.workdir / "reports"
    folder = base / str(year)
    written = report_service.write_report(ctx.db, year, folder, programme_code=_programme(ctx))
    made = ", ".join(p.name for p in sorted(written.iterdir()) if p.suffix in (".html", ".pdf"))
    ctx.flash("ok", f"The {year} report is built ({made}).")
    return ctx.redirect("/trends")
