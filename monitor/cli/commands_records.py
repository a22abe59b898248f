"""Field records: import, correct, certify."""

from __future__ import annotations

from pathlib import Path

import click

from monitor.cli.main import Context, cli
from monitor.cli.output import chosen_format, emit, format_option, say
from monitor.settings import GENERALISE_M


@cli.group("records")
def records_group() -> None:
    """Import a season's field records, correct stored values (audited), certify seasons."""


@records_group.command("import")
@click.argument("files", nargs=-1, required=True, type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--dry-run", is_flag=True,
              help="Check and show what would be added and changed, each file against the stored records and the "
                   "files before it; write nothing.")
@click.option("--correct", is_flag=True, help="Allow the file to change values already stored (needs --reason).")
@click.option("--reason", default=None, help="Why stored values are corrected (goes to the change log).")
@click.option("--accept-warnings", is_flag=True,
              help="Import despite warnings (dates in the future or outside the season window).")
@click.option("--day-first", is_flag=True, default=None, help="Read slash dates as DD/MM/YYYY.")
@click.option("--sheet", default=None,
              help="The workbook sheet to read (needed when several visible sheets hold data; a hidden sheet is "
                   "read only when named).")
@format_option
@click.pass_obj
def import_command(ctx: Context, files: tuple[Path, ...], dry_run: bool, correct: bool, reason: str | None,
                   accept_warnings: bool, day_first: bool | None, sheet: str | None, as_json: bool,
                   as_csv: bool) -> None:
    """Import field records from FILES (CSV or .xlsx, field-sheet or long layout); each file is all or nothing.

    Files are imported in order; the first file refused stops the command (the files before it stay
    imported; every file's outcome is reported, with --json too)."""
    from monitor.services.imports import OUTCOME_REFUSED, import_files

    fmt = chosen_format(as_json, as_csv)
    run = import_files(ctx.db, list(files), programme_code=ctx.programme, dry_run=dry_run,
                               correct=correct, reason=reason, accept_warnings=accept_warnings,
                               day_first=day_first, sheet=sheet)
    if fmt == "table":
        for report in run.reports:
            if report.outcome not in (OUTCOME_REFUSED,):
                say(describe_import(report))
    else:
        emit([r.to_dict() for r in run.reports] if fmt == "json" else
             [{k: v for k, v in r.to_dict().items() if k not in ("changes", "warnings", "problems")}
              for r in run.reports], fmt)
    if run.error is not None:
        raise run.error


def describe_import(report) -> str:
    from monitor.services.imports import OUTCOME_NOT_ATTEMPTED, OUTCOME_NOTHING

    if report.outcome == OUTCOME_NOT_ATTEMPTED:
        return f"{report.file}: not attempted (an earlier file was refused)"
    if report.already_imported:
        return f"{report.file}: already imported, nothing to do ({report.warnings[0]})"
    sheet = f", sheet '{report.sheet}'" if report.sheet else ""
    verb = "would add" if report.dry_run else "added"
    lines = [f"{report.file} ({report.layout} layout{sheet}): {verb} {report.visits_added} visits, "
             f"{report.observations_added} values, {report.covariates_added} covariate values; "
             f"{report.visits_unchanged} visits unchanged; "
             f"{len(report.changes)} stored values {'would change' if report.dry_run else 'corrected'}"
             + ("; nothing to apply, nothing recorded" if report.outcome == OUTCOME_NOTHING else "")]
    lines += [f"  change: {c.line()}" for c in report.changes]
    lines += [f"  accepted warning: {w}" for w in report.warnings]
    return "\n".join(lines)


@records_group.command("certify")
@click.argument("year", type=int)
@click.pass_obj
def certify_command(ctx: Context, year: int) -> None:
    """Certify (lock) season YEAR after review: its records then change only after an unlock."""
    from monitor.services.locks import set_lock

    say(set_lock(ctx.db, year, lock=True, programme_code=ctx.programme))


@records_group.command("unlock")
@click.argument("year", type=int)
@click.option("--reason", required=True, help="Why the certified season must change (logged).")
@click.pass_obj
def unlock_command(ctx: Context, year: int, reason: str) -> None:
    """Unlock a certified season YEAR, with a reason that goes to the change log."""
    from monitor.services.locks import set_lock

    say(set_lock(ctx.db, year, lock=False, reason=reason, programme_code=ctx.programme))


@records_group.command("compare")
@click.argument("first", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.argument("second", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@format_option
def compare_command(first: Path, second: Path, as_json: bool, as_csv: bool) -> None:
    """Double entry: list every mismatch between two keyings FIRST and SECOND of the same sheets
    (station, date, species, field, both values, both rows).  Nothing is stored; exit 1 if they differ."""
    from monitor.errors import DataError
    from monitor.services.double_entry import compare_files

    mismatches = compare_files(first, second)
    fmt = chosen_format(as_json, as_csv)
    if fmt != "table" or len(mismatches):
        emit(mismatches, fmt)
    if len(mismatches):
        raise DataError(f"{len(mismatches)} mismatch{'es' if len(mismatches) != 1 else ''} between {first.name} and "
                        f"{second.name}; resolve them against the paper sheets before importing")
    say(f"{first.name} and {second.name} agree: no mismatches")


@records_group.command("set", context_settings={"ignore_unknown_options": True})
@click.argument("station")
@click.argument("year", type=int)
@click.argument("species")
@click.argument("measure")
@click.argument("value")
@click.option("--reason", required=True, help="Why the value is added or corrected (goes to the change log).")
@click.option("--repeat-no", type=click.IntRange(min=0), default=0, show_default=True,
              help="Which visit of the round: 0 the visit, 1, 2, ... marked repeats.")
@click.pass_obj
def set_command(ctx: Context, station: str, year: int, species: str, measure: str, value: str, reason: str,
                repeat_no: int) -> None:
    """Add or correct one VALUE of SPECIES (by MEASURE) at STATION's visit in season YEAR, audited.

    The value is checked like an imported one; a certified season must be unlocked first."""
    from monitor.services.corrections import set_value

    change = set_value(ctx.db, station, year, species, measure, value, reason=reason, repeat_no=repeat_no,
                               programme_code=ctx.programme)
    if change.old == change.new:
        say(f"{change.station} {change.date}: {change.field} is already {change.new:g}; nothing changed")
    elif change.old is None:
        say(f"{change.station} {change.date}: {change.field} added: {change.new:g} (logged)")
    else:
        say(f"{change.station} {change.date}: {change.field} corrected {change.old:g} -> {change.new:g} (logged)")


@records_group.command("set-visit")
@click.argument("station")
@click.argument("year", type=int)
@click.option("--protocol", default=None, help="The protocol version the visit followed (a code of the programme).")
@click.option("--covariate", "covariates", multiple=True, metavar="NAME=VALUE",
              help="A covariate's value at the visit, e.g. soil_moisture=31.5 (NAME= removes it); repeatable.")
@click.option("--reason", required=True, help="Why the visit is corrected (goes to the change log).")
@click.option("--repeat-no", type=click.IntRange(min=0), default=0, show_default=True,
              help="Which visit of the round: 0 the visit, 1, 2, ... marked repeats.")
@click.pass_obj
def set_visit_command(ctx: Context, station: str, year: int, protocol: str | None, covariates: tuple[str, ...],
                      reason: str, repeat_no: int) -> None:
    """Correct the protocol or covariates of STATION's visit in season YEAR, audited."""
    from monitor.services.corrections import set_visit

    values = {}
    for item in covariates:
        name, sep, value = item.partition("=")
        if not sep or not name.strip():
            raise click.BadParameter(f"{item!r}: expected NAME=VALUE", param_hint="--covariate")
        values[name.strip()] = value.strip()
    changes = set_visit(ctx.db, station, year, reason=reason, protocol=protocol, covariates=values,
                                repeat_no=repeat_no, programme_code=ctx.programme)
    if not changes:
        say(f"{station} {year}: nothing changed (already as given)")
    for change in changes:
        say(f"{change.station} {change.date}: {change.field} {change.old if change.old is not None else '(none)'} -> "
            f"{change.new if change.new is not None else '(none)'} (logged)")


@records_group.command("photo")
@click.argument("station")
@click.option("--path", "photo_path", required=True, help="The photo's file path (stored as given).")
@click.option("--visit-date", type=click.DateTime(formats=["%Y-%m-%d"]), default=None,
              help="Date of the station's visit the photo belongs to (YYYY-MM-DD).")
@click.option("--bearing", type=float, default=None, help="Camera bearing, degrees from north (0 to < 360).")
@click.option("--height", type=float, default=None, help="Camera height above ground [m].")
@click.option("--notes", default="", help="Framing notes, e.g. 'from the SW pin, quadrat filling the frame'.")
@click.pass_obj
def photo_command(ctx: Context, station: str, photo_path: str, visit_date, bearing: float | None,
                  height: float | None, notes: str) -> None:
    """Link a photo to STATION (and to its visit on --visit-date) with its framing, for repeat photos."""
    from monitor.services.photos import add_photo

    photo_id = add_photo(ctx.db, station, path=photo_path, visit_date=visit_date.date() if visit_date else None,
                                 bearing=bearing, height=height, notes=notes, programme_code=ctx.programme)
    say(f"photo {photo_id} linked to {station}" + (f" (visit of {visit_date:%Y-%m-%d})" if visit_date else ""))


@cli.group("station")
def station_group() -> None:
    """One station: retire it (logged), or show its full history."""


@station_group.command("retire")
@click.argument("code")
@click.option("--reason", required=True, help="Why the station is retired (goes to the change log).")
@click.option("--replaced-by", default=None, help="Code of the station that replaces it.")
@click.option("--date", "when", type=click.DateTime(formats=["%Y-%m-%d"]), default=None,
              help="Retired from this date (YYYY-MM-DD); default today.")
@click.pass_obj
def retire_command(ctx: Context, code: str, reason: str, replaced_by: str | None, when) -> None:
    """Retire station CODE with a reason and an optional replacement; its records stay."""
    from monitor.services.stations import retire_station

    say(retire_station(ctx.db, code, reason=reason, replaced_by=replaced_by,
                               date=when.date() if when else None, programme_code=ctx.programme))


@station_group.command("history")
@click.argument("code")
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
@click.pass_obj
def history_command(ctx: Context, code: str, as_json: bool) -> None:
    """Station CODE's full history: visits with observers and values, corrections, management events,
    photos and quality flags."""
    from monitor.services.history import station_history

    history = station_history(ctx.db, code, programme_code=ctx.programme)
    if as_json:
        emit(history, "json")
        return
    s = history["station"]
    retired = s["retired"] if isinstance(s["retired"], str) or hasattr(s["retired"], "isoformat") else None
    click.echo(f"Station {s['station']} (site {s['site']}, panel {s['panel'] or '-'}, {s['state']}"
               + (f" since {str(retired)[:10]}: {s['retired_reason']}" if retired else "")
               + (f", replaced by {s['replaced_by']}" if isinstance(s.get("replaced_by"), str) else "") + ")")
    rows = []
    for v in history["visits"]:
        row = {k: v[k] for k in ("year", "date", "status", "repeat_no", "protocol", "observers")}
        row.update(v["values"])
        row["notes"] = v["notes"]
        rows.append(row)
    emit(rows, title="\nVisits (blank = not recorded; missed and inaccessible visits carry no values)")
    emit(history["changes"], title="\nChanges")
    emit(history["events"], title="\nManagement events")
    emit(history["photos"], title="\nPhotos")
    emit(history["quality_flags"], columns=["id", "kind", "species", "year", "state", "detail"],
         title="\nQuality flags")
    if len(history["lineage"]):
        emit(history["lineage"], title="\nLineage (relocations of this quadrat's series; the new station continues "
                                       "the old one)")


@cli.group("quality", invoke_without_command=True)
@click.option("--all", "show_all", is_flag=True, help="List every stored flag, resolved and accepted ones too.")
@format_option
@click.pass_context
def quality_group(click_ctx: click.Context, show_all: bool, as_json: bool, as_csv: bool) -> None:
    """Check the stored records: values far from a station's own history, overdue stations, observers
    who differ from others, missing covariates.  Stores the flags; lists the open ones."""
    if click_ctx.invoked_subcommand is not None:
        return
    from monitor.services import quality

    ctx: Context = click_ctx.obj
    result = quality.run_checks(ctx.db, ctx.programme)
    fmt = chosen_format(as_json, as_csv)
    flags = result.all_flags if show_all else result.open_flags
    if fmt == "table":
        say(result.summary())
    emit(flags, fmt, columns=None if fmt == "json" else quality.FLAG_TABLE_COLUMNS)


@quality_group.command("resolve")
@click.argument("flag_id", type=int)
@click.option("--note", required=True, help="What was found (goes with the flag and to the change log).")
@click.option("--accept", is_flag=True, help="Mark it accepted (the value is real), not resolved (fixed).")
@click.pass_obj
def resolve_command(ctx: Context, flag_id: int, note: str, accept: bool) -> None:
    """Close quality flag FLAG_ID with a note: resolved (fixed) or, with --accept, accepted as real."""
    from monitor.services import quality

    say(quality.resolve_flag(ctx.db, flag_id, note=note, accept=accept, programme_code=ctx.programme))


@cli.group("export")
def export_group() -> None:
    """Export the stored records: tidy CSV, GeoJSON of stations, Darwin Core Archive."""


@export_group.command("csv")
@click.argument("folder", type=click.Path(file_okay=False, path_type=Path))
@click.pass_obj
def export_csv_command(ctx: Context, folder: Path) -> None:
    """Write tidy visits.csv, observations.csv and covariates.csv into FOLDER (RFC 4180, UTF-8)."""
    from monitor.services import exports

    for name, path in exports.export_csv(ctx.db, folder, programme_code=ctx.programme).items():
        say(f"wrote {name}: {path}")


@export_group.command("geojson")
@click.argument("file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--generalise-m", type=click.FloatRange(min=1), default=GENERALISE_M, show_default=True,
              help="Grid cell [m] for stations where a sensitive species occurs.")
@click.pass_obj
def export_geojson_command(ctx: Context, file: Path, generalise_m: float) -> None:
    """Write the stations to FILE as GeoJSON (RFC 7946, WGS84 longitude/latitude); sensitive ones generalised."""
    from monitor.services import exports

    path, generalised = exports.export_geojson(ctx.db, file, programme_code=ctx.programme, generalise_m=generalise_m)
    say(f"wrote {path} ({generalised} station{'s' if generalised != 1 else ''} generalised)")


@export_group.command("dwca")
@click.argument("file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--generalise-m", type=click.FloatRange(min=1), default=GENERALISE_M, show_default=True,
              help="Grid cell [m] for stations where a sensitive species occurs.")
@click.pass_obj
def export_dwca_command(ctx: Context, file: Path, generalise_m: float) -> None:
    """Write a Darwin Core Archive (.zip) of sampling events: event core, occurrences, measurements, EML."""
    from monitor.services import exports

    say(f"wrote {exports.export_dwca(ctx.db, file, programme_code=ctx.programme, generalise_m=generalise_m)}")
