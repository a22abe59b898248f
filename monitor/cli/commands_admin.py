"""Looking after the database: backup and restore (also to move a programme between engines)."""

from __future__ import annotations

from pathlib import Path

import click

from monitor.cli.main import Context, cli
from monitor.cli.output import say


@cli.command("backup")
@click.argument("folder", type=click.Path(file_okay=False, path_type=Path))
@click.pass_obj
def backup_command(ctx: Context, folder: Path) -> None:
    """Dump the whole database to FOLDER: one CSV per table and a manifest with checksums and schema revision."""
    from monitor.services import backup

    manifest = backup.backup_database(ctx.db, folder)
    rows = sum(t["rows"] for t in manifest["tables"].values())
    say(f"backed up {rows} rows in {len(manifest['tables'])} tables (schema revision {manifest['schema_revision']}) "
        f"to {folder}")


@cli.command("restore")
@click.argument("folder", type=click.Path(exists=True, file_okay=False, path_type=Path))
@click.pass_obj
def restore_command(ctx: Context, folder: Path) -> None:
    """Restore a backup FOLDER into an empty database (SQLite or PostgreSQL), checking every checksum first."""
    from monitor.services import backup

    loaded, revision = backup.restore_database(ctx.db, folder)
    say(f"restored {sum(loaded.values())} rows in {len(loaded)} tables; schema now at revision {revision}")


@cli.group("access")
def access_group() -> None:
    """Roles for a shared PostgreSQL programme: reader, recorder, owner."""


@access_group.command("setup")
@click.pass_obj
def access_setup(ctx: Context) -> None:
    """Create the reader, recorder and owner group roles of this database and grant what each may do."""
    from monitor.services import backup

    for line in backup.setup_access(ctx.db):
        say(line)


@access_group.command("grant")
@click.argument("login")
@click.argument("group", type=click.Choice(["reader", "recorder", "owner"]))
@click.pass_obj
def access_grant(ctx: Context, login: str, group: str) -> None:
    """Make the PostgreSQL login role LOGIN a reader, recorder or owner of this programme database."""
    from monitor.services import backup

    say(f"{login} is now a member of {backup.grant_access(ctx.db, login, group)}")
