"""Design (place stations, panels, waypoints) and season (plan, due, field packs) commands."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import click

from monitor.cli.main import Context, cli
from monitor.cli.output import chosen_format, emit, format_option, say


def _pair(text: str | None, option: str) -> tuple[float, float] | None:
    if text is None:
        return None
    try:
        a, b = (float(v) for v in text.split(","))
    except ValueError:
        raise click.BadParameter(f"expected two numbers separated by a comma, got {text!r}",
                                 param_hint=option) from None
    return a, b


def _pilot(text: str | None) -> dict[str, float] | None:
    if not text:
        return None
    out = {}
    for part in text.split(","):
        code, _, value = part.partition("=")
        try:
            out[code.strip()] = float(value)
        except ValueError:
            raise click.BadParameter(f"expected STRATUM=SD pairs, got {part!r}", param_hint="--pilot-sd") from None
    return out


def _diagnostics(diagnostics) -> None:
    for d in diagnostics:
        say(f"warning: {d.message}")


# --- design ---------------------------------------------------------------------------------------------------


@cli.group("design")
def design_group() -> None:
    """Place stations into sites, set revisit panels, show what is due when, export waypoints."""


@design_group.command("place")
@click.argument("site")
@click.option("--method", type=click.Choice(["random", "stratified", "balanced", "systematic", "transect"]),
              required=True, help="How to choose positions.")
@click.option("--n", "n", type=int, default=None, help="Stations wanted (random, stratified, balanced).")
@click.option("--seed", type=int, default=None, help="Seed; stored with the stations (drawn when not given).")
@click.option("--min-separation", type=float, default=0.0, show_default=True,
              help="Minimum distance between stations, old and new [m].")
@click.option("--exclude", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
              help="GeoJSON polygons (programme CRS) where no quadrat may go: paths, water, buildings.")
@click.option("--spacing", type=float, default=None, help="Grid or transect spacing [m].")
@click.option("--start", "start", default=None, metavar="X,Y", help="Transect start point [m].")
@click.option("--bearing", type=float, default=None, help="Transect bearing [degrees from grid north].")
@click.option("--length", type=float, default=None, help="Transect length [m].")
@click.option("--layout", type=click.Choice(["interrupted", "continuous"]), default="interrupted",
              show_default=True, help="Transect: quadrats apart or contiguous.")
@click.option("--quadrat", default=None, metavar="W,L", help="Quadrat width and length [m] (default: programme's).")
@click.option("--prefix", default=None, help="Station code prefix (transect: the transect code).")
@click.option("--panel", default=None, help="Put the new stations into this stored panel.")
@click.option("--strata", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
              help="Stratified: GeoJSON polygons with a 'code' property (stored as the site's strata).")
@click.option("--allocation", type=click.Choice(["proportional", "equal", "neyman"]), default="proportional",
              show_default=True, help="Stratified: how stations are split among strata.")
@click.option("--pilot-sd", default=None, metavar="A=SD,B=SD", help="Neyman allocation: pilot SD per stratum.")
@click.option("--line", "line_file", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
              help="Transect: a drawn line (GeoJSON LineString, programme CRS) instead of start, bearing, length.")
@click.option("--kind", type=click.Choice(["belt", "line"]), default="belt", show_default=True,
              help="Transect: a belt of quadrats across the line, or points on the line itself.")
@click.option("--dry-run", is_flag=True, help="Show the stations without storing them.")
@format_option
@click.pass_obj
def design_place(ctx: Context, site: str, method: str, n: int | None, seed: int | None, min_separation: float,
                 exclude: Path | None, spacing: float | None, start: str | None, bearing: float | None,
                 length: float | None, layout: str, quadrat: str | None, prefix: str | None, panel: str | None,
                 strata: Path | None, allocation: str, pilot_sd: str | None, line_file: Path | None, kind: str,
                 dry_run: bool, as_json: bool, as_csv: bool) -> None:
    """Place new stations into stored SITE and store them with their method and seed."""
    from monitor.services import design

    fmt = chosen_format(as_json, as_csv)
    result = design.place_stations(
        ctx.db, site, method, n=n, seed=seed, min_separation=min_separation, exclude=exclude, spacing=spacing,
        start=_pair(start, "--start"), bearing=bearing, length=length, layout=layout,
        quadrat=_pair(quadrat, "--quadrat"), prefix=prefix, panel=panel, strata=strata, allocation=allocation,
        pilot_sd=_pilot(pilot_sd), line=line_file, kind=kind, dry_run=dry_run, programme_code=ctx.programme)
    _diagnostics(result.diagnostics)
    columns = [c for c in ("station", "site", "stratum", "transect", "distance_m", "x", "y", "panel")
               if c in result.stations.columns]
    emit(result if fmt == "json" else result.stations, fmt, columns=None if fmt == "json" else columns)
    verb = "would place" if dry_run else "placed"
    say(f"{verb} {len(result.stations)} stations in site {result.site} by {result.method} placement, seed {result.seed}"
        + ("" if dry_run else " (stored)"))


@design_group.command("extend")
@click.argument("site")
@click.option("--n", "n", type=int, required=True, help="Stations to add.")
@click.option("--seed", type=int, default=None, help="Seed of the new draws (random, stratified); stored.")
@click.option("--run", "run_id", type=int, default=None, help="Extend this stored placement run (default: the latest).")
@click.option("--panel", default=None, help="Put the new stations into this stored panel.")
@click.option("--dry-run", is_flag=True, help="Show the new stations without storing them.")
@format_option
@click.pass_obj
def design_extend(ctx: Context, site: str, n: int, seed: int | None, run_id: int | None, panel: str | None,
                  dry_run: bool, as_json: bool, as_csv: bool) -> None:
    """Add N stations to SITE's balanced (continuing its Halton order), stratified or random placement."""
    from monitor.services import design

    fmt = chosen_format(as_json, as_csv)
    result = design.extend_stations(ctx.db, site, n, seed=seed, run=run_id, panel=panel, dry_run=dry_run,
                                    programme_code=ctx.programme)
    _diagnostics(result.diagnostics)
    columns = [c for c in ("station", "site", "stratum", "x", "y", "halton_index") if c in result.stations.columns]
    emit(result if fmt == "json" else result.stations, fmt, columns=None if fmt == "json" else columns)
    say(f"{'would add' if dry_run else 'added'} {len(result.stations)} stations to the {result.method} placement "
        f"of site {result.site} (seed {result.seed}; {result.params['stations_before']} -> "
        f"{result.params['stations_after']} stations)" + ("" if dry_run else " (stored)"))


@design_group.command("panels")
@click.option("--years", type=int, default=5, show_default=True, help="How many seasons to show.")
@click.option("--from", "first_year", type=int, default=None, help="First season (default: the next one).")
@click.option("--stations", "per_station", is_flag=True, help="One row per station instead of per panel.")
@format_option
@click.pass_obj
def design_panels(ctx: Context, years: int, first_year: int | None, per_station: bool, as_json: bool,
                  as_csv: bool) -> None:
    """Which panels and stations are due in which year, for the next N years."""
    from monitor.services import design

    fmt = chosen_format(as_json, as_csv)
    table = design.panel_due_table(ctx.db, years, first_year=first_year, programme_code=ctx.programme)
    if fmt == "json":
        emit(table, fmt)
        return
    shown = (table.stations if per_station else table.panels).copy()
    for y in table.years:
        shown[y] = ["X" if v else "" for v in shown[y]]
    shown.columns = [str(c) for c in shown.columns]
    if fmt == "csv":
        emit(shown, fmt)
        return
    click.echo(f"Revisit design {table.notation} (McDonald 2003 notation); X = due")
    emit(shown)
    emit(table.totals, title="\nStations due per season")


@design_group.command("assign-panels")
@click.option("--design", "design_text", required=True, help='Revisit design, e.g. "[1-0,1-3]".')
@click.option("--start-year", type=int, default=None, help="First year of the design (default: the next season).")
@click.option("--dry-run", is_flag=True, help="Show the assignment without storing it.")
@format_option
@click.pass_obj
def design_assign_panels(ctx: Context, design_text: str, start_year: int | None, dry_run: bool, as_json: bool,
                         as_csv: bool) -> None:
    """Assign stations without a panel to the panels of a revisit design, each spread across the reserve."""
    from monitor.services import design

    fmt = chosen_format(as_json, as_csv)
    result = design.assign_panels(ctx.db, design_text, start_year=start_year, dry_run=dry_run,
                                  programme_code=ctx.programme)
    emit(result if fmt == "json" else result.stations, fmt)
    say(f"{'would assign' if dry_run else 'assigned'} {len(result.stations)} stations to revisit design "
        f"{result.design} from {result.start_year}; new panels: {', '.join(result.panels_added) or 'none'}")


@design_group.command("waypoints")
@click.argument("file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--site", default=None, help="Only this site's stations.")
@click.pass_obj
def design_waypoints(ctx: Context, file: Path, site: str | None) -> None:
    """Write the stations in service to FILE: GPX 1.1 waypoints (.gpx) or GeoJSON (.geojson), WGS84."""
    from monitor.services import design

    n = design.export_stations(ctx.db, file, site=site, programme_code=ctx.programme)
    say(f"wrote {n} stations to {file}")


# --- season -------------------------------------------------------------------------------------------------------


@cli.group("season")
def season_group() -> None:
    """Plan a season's rounds, list due and overdue stations, write field packs."""


def _day(text: str | None) -> dt.date | None:
    if text is None:
        return None
    try:
        return dt.date.fromisoformat(text)
    except ValueError:
        raise click.BadParameter(f"expected a date YYYY-MM-DD, got {text!r}") from None


@season_group.command("plan")
@click.argument("year", type=int)
@click.option("--teams", type=int, default=None, help="Number of teams, members dealt from the observer register.")
@click.option("--crews", "crews_file", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
              help="Crews file (JSON): teams, members, hours, walking speed, weekdays, blocked dates, start points.")
@click.option("--hours", type=float, default=7.0, show_default=True, help="Working hours a day (with --teams).")
@click.option("--speed", type=float, default=3.0, show_default=True, help="Walking speed [km/h] (with --teams).")
@click.option("--blocked", multiple=True, metavar="YYYY-MM-DD", help="A date nobody works (repeatable).")
@click.option("--window", nargs=2, default=None, metavar="MM-DD MM-DD",
              help="Season window for this plan instead of the stored one.")
@click.option("--seed", type=int, default=None, help="Seed of the randomised site order (stored with the plan).")
@click.option("--randomise-sites", is_flag=True, help="Visit the sites in a random order across the window.")
@click.option("--replace", is_flag=True, help="Replace a plan already stored for YEAR.")
@click.option("--paths", "paths_file", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
              help="The programme's paths (GeoJSON lines, programme CRS): walk the shortest paths over them.")
@click.option("--winding", type=float, default=None,
              help="Without paths: straight lines times this winding factor (>= 1; default 1 or the crews file's).")
@click.option("--dry-run", is_flag=True, help="Plan without storing.")
@format_option
@click.pass_obj
def season_plan(ctx: Context, year: int, teams: int | None, crews_file: Path | None, hours: float, speed: float,
                blocked: tuple[str, ...], window: tuple[str, str] | None, seed: int | None, randomise_sites: bool,
                replace: bool, paths_file: Path | None, winding: float | None, dry_run: bool, as_json: bool,
                as_csv: bool) -> None:
    """Plan season YEAR: due and overdue stations to teams, days and routes, stored as the round's plan."""
    from monitor.services import schedule

    fmt = chosen_format(as_json, as_csv)
    result = schedule.plan_season(
        ctx.db, year, teams=teams, crews_file=crews_file, hours_per_day=hours, walking_speed_kmh=speed,
        blocked=tuple(_day(b) for b in blocked), window=tuple(window) if window else None, seed=seed,
        randomise_sites=randomise_sites, replace=replace, dry_run=dry_run, programme_code=ctx.programme,
        paths=paths_file, winding=winding)
    if fmt == "json":
        emit(result, fmt)
    else:
        emit(result.team_day_table(), fmt, title=None if fmt == "csv" else f"Season {year}: team-days")
        if fmt == "table":
            if not result.plan.held_back.empty:
                emit(result.plan.held_back, title="\nHeld back")
            if not result.plan.unplanned.empty:
                emit(result.plan.unplanned, title="\nDo not fit")
    say(result.summary())
    if not result.fits:
        extra = result.plan.extra_team_days
        say(f"the work does not fit: about {extra} more team-day{'s are' if extra != 1 else ' is'} needed "
            "(add teams or days, or widen the window); the stations that do not fit stay in the plan without a day")
    if dry_run:
        say("dry run: nothing stored")
    else:
        replaced = f", replacing {result.replaced} earlier planned visits" if result.replaced else ""
        say(f"plan for {year} stored (seed {result.plan.seed}{replaced})")


@season_group.command("plans")
@format_option
@click.pass_obj
def season_plans(ctx: Context, as_json: bool, as_csv: bool) -> None:
    """The stored season plans side by side, one row a season: teams, team-days, stations, route, routing."""
    from monitor.services import schedule

    frame = schedule.stored_plans(ctx.db, programme_code=ctx.programme)
    emit(frame, chosen_format(as_json, as_csv))
    say(f"{len(frame)} stored season plan{'s' if len(frame) != 1 else ''}")


@season_group.command("due")
@click.argument("year", type=int)
@click.option("--window", nargs=2, default=None, metavar="MM-DD MM-DD", help="Season window instead of the stored one.")
@format_option
@click.pass_obj
def season_due(ctx: Context, year: int, window: tuple[str, str] | None, as_json: bool, as_csv: bool) -> None:
    """Stations due in YEAR by panel rule and overdue ones, with their planned team, day and outcome."""
    from monitor.services import schedule

    frame = schedule.due_for_season(ctx.db, year, window=tuple(window) if window else None,
                                    programme_code=ctx.programme)
    emit(frame, chosen_format(as_json, as_csv))
    n_over = int((frame["reason"] == "overdue").sum())
    say(f"{len(frame)} stations due in {year}, {n_over} of them overdue")


@season_group.command("pack")
@click.argument("year", type=int)
@click.argument("folder", type=click.Path(file_okay=False, path_type=Path))
@click.option("--team", default=None, help="Only this team's days.")
@click.option("--day", default=None, metavar="YYYY-MM-DD", help="Only this day.")
@click.option("--no-pdf", "no_pdf", is_flag=True, help="Skip field_sheet.pdf (the sheet ready to print).")
@format_option
@click.pass_obj
def season_pack(ctx: Context, year: int, folder: Path, team: str | None, day: str | None, no_pdf: bool,
                as_json: bool, as_csv: bool) -> None:
    """Write field packs for YEAR's planned team-days into FOLDER: field sheet (HTML and a PDF to print),
    entry sheets (.xlsx with drop-down lists, and CSV), GPX, iCalendar in the programme's time zone."""
    from monitor.services import schedule

    result = schedule.write_field_packs(ctx.db, year, folder, team=team, day=_day(day), programme_code=ctx.programme,
                                        pdf=not no_pdf)
    fmt = chosen_format(as_json, as_csv)
    emit(result if fmt == "json" else result.team_days, fmt)
    say(f"wrote {len(result.team_days)} field pack(s) and the calendar {result.calendar}")


# --- station move ---------------------------------------------------------------------------------------------

from monitor.cli.commands_records import station_group  # noqa: E402  (the station group lives with records)


@station_group.command("move")
@click.argument("code")
@click.option("--to", "to", required=True, metavar="X,Y", help="New position in the programme's CRS [m].")
@click.option("--reason", required=True, help="Why it moved (goes to the change log and the relocation record).")
@click.option("--date", "when", required=True, metavar="YYYY-MM-DD", help="Date of the move; the new station starts then.")
@click.option("--lost", is_flag=True, help="The marker was lost and the quadrat re-established (old station: lost).")
@click.option("--new-code", default=None, help="Code of the new station (default: CODE with an R suffix).")
@click.option("--fix", "fix_method", default="", help="How the new position was fixed, e.g. 'GNSS RTK'.")
@click.option("--accuracy", type=float, default=None, help="Accuracy of the new fix [m].")
@click.option("--marker", default=None, help="The new permanent marker (default: as the old one).")
@click.option("--notes", default="", help="How to find the new marker (added to its relocation notes).")
@format_option
@click.pass_obj
def station_move(ctx: Context, code: str, to: str, reason: str, when: str, lost: bool, new_code: str | None,
                 fix_method: str, accuracy: float | None, marker: str | None, notes: str, as_json: bool,
                 as_csv: bool) -> None:
    """Record that station CODE moved (or lost its marker): a NEW station continues it; nothing is rewritten."""
    from monitor.services import relocation

    result = relocation.move_station(ctx.db, code, to=_pair(to, "--to"), reason=reason, date=_day(when), lost=lost,
                                     new_code=new_code, fix_method=fix_method, accuracy_m=accuracy, marker=marker,
                                     notes=notes, programme_code=ctx.programme)
    fmt = chosen_format(as_json, as_csv)
    if fmt == "json":
        emit(result, fmt)
    elif fmt == "csv":
        emit([result.to_dict()], fmt)
    say(result.message())


def show_southern_demo(folder: Path) -> None:
    """Run the southern-summer demo variant and print its plan across the new year."""
    from monitor.services.demo_southern import run_southern_demo

    steps = dict(run_southern_demo(folder, echo=say))
    plan = steps["plan"]
    click.echo(f"\nSeason {plan.year} (December {plan.year} to February {plan.year + 1}): {plan.summary()}")
    emit(plan.team_day_table())
    pack = steps["field_pack"]
    for day in pack.team_days:
        click.echo(f"\nField pack for team {day['team']} on {day['date']} ({day['site']}, {day['stations']} "
                   f"stations): {day['folder']}")
    click.echo(f"Calendar: {pack.calendar}")


def show_growth(result: dict) -> None:
    """Print the demo's growth steps: the balanced panel placed and extended, and the quadrat moved."""
    placed, extended, moved = result["placed"], result["extended"], result["moved"]
    click.echo(f"\nBalanced panel on site {placed.site}: {len(placed.stations)} quadrats placed (seed {placed.seed}), "
               f"extended by {len(extended.stations)} along the same Halton order "
               f"({extended.params['stations_before']} -> {extended.params['stations_after']})")
    emit(extended.stations, columns=[c for c in ("station", "site", "x", "y", "halton_index")
                                     if c in extended.stations.columns])
    click.echo(f"\nRelocated quadrat: {moved.message()}")
