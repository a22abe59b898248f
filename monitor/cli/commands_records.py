"""Field records: import, correct, certify."""

from __future__ import annotations

from pathlib import Path

import click

from monitor.cli.main import Context, cli
from monitor.cli.output import chosen_format, emit, format_option, say


@cli.group("records")
def records_group() -> None:
    """Import a season's field records, correct stored values (audited), certify seasons."""


@records_group.command("import")
@click.argument("files", nargs=-1, required=True, type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--dry-run", is_flag=True, help="Check and show what would be added and changed; write nothing.")
@click.option("--correct", is_flag=True, help="Allow the file to change values already stored (needs --reason).")
@click.option("--reason", default=None, help="Why stored values are corrected (goes to the change log).")
@click.option("--accept-warnings", is_flag=True,
              help="Import despite warnings (dates in the future or outside the season window).")
@click.option("--day-first", is_flag=True, default=None, help="Read slash dates as DD/MM/YYYY.")
@format_option
@click.pass_obj
def import_command(ctx: Context, files: tuple[Path, ...], dry_run: bool, correct: bool, reason: str | None,
                   accept_warnings: bool, day_first: bool | None, as_json: bool, as_csv: bool) -> None:
    """Import field records from FILES (CSV or .xlsx, field-sheet or long layout); each file is all or nothing."""
    from monitor.services import records

    fmt = chosen_format(as_json, as_csv)
    reports = []
    for path in files:
        report = records.import_records(ctx.db, path, programme_code=ctx.programme, dry_run=dry_run,
                                        correct=correct, reason=reason, accept_warnings=accept_warnings,
                                        day_first=day_first)
        reports.append(report)
        if fmt == "table":
            say(describe_import(report))
    if fmt != "table":
        emit([r.to_dict() for r in reports] if fmt == "json" else
             [{k: v for k, v in r.to_dict().items() if k not in ("changes", "warnings")} for r in reports], fmt)


def describe_import(report) -> str:
    if report.already_imported:
        return f"{report.file}: already imported, nothing to do ({report.warnings[0]})"
    verb = "would add" if report.dry_run else "added"
    lines = [f"{report.file} ({report.layout} layout): {verb} {report.visits_added} visits, "
             f"{report.observations_added} values, {report.covariates_added} covariate values; "
             f"{report.visits_unchanged} visits unchanged; "
             f"{len(report.changes)} stored values {'would change' if report.dry_run else 'corrected'}"]
    lines += [f"  change: {c.line()}" for c in report.changes]
    lines += [f"  accepted warning: {w}" for w in report.warnings]
    return "\n".join(lines)


@records_group.command("certify")
@click.argument("year", type=int)
@click.pass_obj
def certify_command(ctx: Context, year: int) -> None:
    """Certify (lock) season YEAR after review: its records then change only after an unlock."""
    from monitor.services import records

    say(records.set_lock(ctx.db, year, lock=True, programme_code=ctx.programme))


@records_group.command("unlock")
@click.argument("year", type=int)
@click.option("--reason", required=True, help="Why the certified season must change (logged).")
@click.pass_obj
def unlock_command(ctx: Context, year: int, reason: str) -> None:
    """Unlock a certified season YEAR, with a reason that goes to the change log."""
    from monitor.services import records

    say(records.set_lock(ctx.db, year, lock=False, reason=reason, programme_code=ctx.programme))
