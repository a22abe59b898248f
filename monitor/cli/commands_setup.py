"""Creating a database and setting a programme up from the files a user has."""

from __future__ import annotations

import click

from monitor.cli.main import Context, cli
from monitor.cli.output import say


@cli.command("init")
@click.pass_obj
def init_command(ctx: Context) -> None:
    """Create the database, or upgrade its schema to this version of monitor."""
    from monitor.services import setup

    before, after = setup.init_database(ctx.db)
    if before == after:
        say(f"database schema is up to date (revision {after})")
    elif before is None:
        say(f"created a monitor database (schema revision {after})")
    else:
        say(f"upgraded the database schema from revision {before} to {after}")
