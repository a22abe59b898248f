"""The ``monitor`` command: a thin skin over ``monitor.services``.

Every command parses its options, calls one service function and prints
through ``monitor.cli.output``.  Errors of the project's own classes become
one line on stderr and exit code 1 (here, in one place); usage errors are
click's own (exit 2).
"""

from __future__ import annotations

import click

from monitor import __version__
from monitor.errors import MAX_LISTED, InputError, MonitorError


class Context:
    """What every command needs: where the database is and which programme."""

    def __init__(self, db: str | None, programme: str | None):
        self.db = db
        self.programme = programme


@click.group(context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
@click.option(
    "--db",
    envvar="MONITOR_DATABASE_URL",
    default="monitor.sqlite",
    show_default=True,
    help="Database: a file path (SQLite) or a postgresql+psycopg:// URL. Env: MONITOR_DATABASE_URL.",
)
@click.option("--programme", default=None, help="Programme code, when the database holds more than one.")
@click.version_option(__version__, prog_name="monitor")
@click.pass_context
def cli(ctx: click.Context, db: str, programme: str | None) -> None:
    """Plan, record and analyse permanent-quadrat monitoring of plant populations."""
    ctx.obj = Context(db, programme)


def _register() -> None:
    # each command group lives in its own module; importing it attaches it to `cli`
    from monitor.cli import (  # noqa: F401
        commands_admin,
        commands_analysis,
        commands_listings,
        commands_plan,
        commands_records,
        commands_setup,
        commands_web,
    )


_register()


def _set_on_context(name: str):
    def callback(click_ctx: click.Context, _param: click.Parameter, value: str | None) -> None:
        obj = click_ctx.find_object(Context)  # None only when parsed without running (completion, checks)
        if value is not None and obj is not None:
            setattr(obj, name, value)
    return callback


def _accept_anywhere(group: click.Group) -> None:
    """Let ``--db`` and ``--programme`` follow the subcommand too (``monitor init --db X``).

    The group's own options are parsed (and its callback run) before a subcommand's, so a value given
    after the subcommand overrides the one before it or from the environment.
    """
    for name, command in group.commands.items():
        if name == "demo":  # builds a database of its own in --dir
            continue
        names = {p.name for p in command.params}
        if "db" not in names:
            command.params.append(click.Option(
                ["--db"], expose_value=False, callback=_set_on_context("db"), is_eager=True,
                help="Database: a file path (SQLite) or a postgresql+psycopg:// URL; before or after the command."))
        if "programme" not in names:
            command.params.append(click.Option(
                ["--programme"], expose_value=False, callback=_set_on_context("programme"), is_eager=True,
                help="Programme code, when the database holds more than one."))
        if isinstance(command, click.Group):
            _accept_anywhere(command)


_accept_anywhere(cli)


def main(argv: list[str] | None = None) -> int:
    """Entry point: run the CLI and map the project's errors to exit codes."""
    try:
        cli.main(args=argv, prog_name="monitor", standalone_mode=False)
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except click.exceptions.Abort:
        click.echo("aborted", err=True)
        return 1
    except click.ClickException as exc:  # usage errors: click's own message and code (2)
        exc.show()
        return exc.exit_code
    except InputError as exc:
        for problem in exc.problems[:MAX_LISTED]:
            click.echo(f"{'error' if problem.severity == 'error' else 'refused'}: {problem.line()}", err=True)
        if exc.unlisted > 0:
            click.echo(f"error: ... and {exc.unlisted:,} more not listed; {exc.summary()}", err=True)
        return exc.exit_code
    except MonitorError as exc:
        click.echo(f"error: {exc}", err=True)
        return exc.exit_code
    except OSError as exc:  # full disk, read-only folder, missing file: a clear line, not a traceback
        click.echo(f"error: {exc.strerror or exc}{f': {exc.filename}' if exc.filename else ''}", err=True)
        return 1
    return 0

