"""The browser workspace: ``monitor serve``, and the people who may sign in to a shared one."""

from __future__ import annotations

from pathlib import Path

import click

from monitor.cli.main import Context, cli
from monitor.cli.output import chosen_format, emit, format_option, say


def start_workspace(db: str, *, host: str, port: int, workdir: Path | None, programme: str | None,
                    https_cert: Path | None = None, https_key: Path | None = None, open_browser: bool = False) -> None:
    from monitor.services.web_users import check_database
    from monitor.web import server

    check_database(db, programme)
    https = https_cert is not None
    config = server.configure(db, workdir=workdir, programme=programme, host=host, https=https)
    if open_browser:
        import threading
        import webbrowser

        threading.Timer(1.0, webbrowser.open, args=(server.opening_url(config, host, port, https),)).start()
    server.serve(config, host=host, port=port, https=https, certfile=str(https_cert) if https_cert else None,
                 keyfile=str(https_key) if https_key else None, say=say)


@cli.command("serve")
@click.option("--host", default="127.0.0.1", show_default=True,
              help="Address to listen on; an SQLite programme listens on loopback only.")
@click.option("--port", type=int, default=8765, show_default=True, help="Port to listen on.")
@click.option("--dir", "workdir", type=click.Path(file_okay=False, path_type=Path), default=None,
              help="Folder for uploads, field packs and reports (default: monitor_web/ beside the SQLite file, "
                   "or in the current folder).")
@click.option("--https-cert", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
              help="Serve over https with this certificate (PEM); cookies are then marked Secure.")
@click.option("--https-key", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
              help="The certificate's private key (PEM).")
@click.option("--open", "open_browser", is_flag=True, help="Open the workspace in this machine's browser.")
@click.pass_obj
def serve_command(ctx: Context, host: str, port: int, workdir: Path | None, https_cert: Path | None,
                  https_key: Path | None, open_browser: bool) -> None:
    """Open the programme in the browser: overview, stations map, season plans and packs, records upload with
    a checked preview, quality flags, trends and the annual report.  SQLite: one user on this machine, opened by
    a one-time link printed here.  PostgreSQL: people sign in (each added with the web-user add command)."""
    if (https_cert is None) != (https_key is None):
        raise click.UsageError("--https-cert and --https-key go together")
    start_workspace(ctx.db, host=host, port=port, workdir=workdir, programme=ctx.programme, https_cert=https_cert,
                    https_key=https_key, open_browser=open_browser)


@cli.group("web-user")
def web_user_group() -> None:
    """People who sign in to the browser workspace of a shared (PostgreSQL) programme."""


@web_user_group.command("add")
@click.argument("login")
@click.argument("role", type=click.Choice(["reader", "recorder", "owner"]))
@click.option("--password", prompt=True, hide_input=True, confirmation_prompt=True,
              help="The password (asked for when not given; at least 10 characters).")
@click.option("--replace", is_flag=True, help="Give an existing person this role and password.")
@click.pass_obj
def web_user_add(ctx: Context, login: str, role: str, password: str, replace: bool) -> None:
    """Let LOGIN sign in to the workspace as a reader, recorder or owner (the rights of that database group)."""
    from monitor.services import web_users

    say(web_users.add_user(ctx.db, login, role, password, replace=replace))


@web_user_group.command("list")
@format_option
@click.pass_obj
def web_user_list(ctx: Context, as_json: bool, as_csv: bool) -> None:
    """The people who may sign in, with their roles (never their passwords)."""
    from monitor.services import web_users

    emit(web_users.list_users(ctx.db), chosen_format(as_json, as_csv))
