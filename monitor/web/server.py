"""Start the workspace: work out who may come in, print how to open it, and serve it with uvicorn."""

from __future__ import annotations

import ipaddress
from collections.abc import Callable
from pathlib import Path
from urllib.parse import quote

from monitor.config import database_url, is_sqlite
from monitor.errors import InputError, InputProblem
from monitor.services import web_users
from monitor.web.app import WebConfig, create_app, one_time_token


def _loopback(host: str) -> bool:
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def configure(db: str, *, workdir: Path | None = None, programme: str | None = None, host: str = "127.0.0.1",
              https: bool = False) -> WebConfig:
    """The workspace's configuration for this database.

    SQLite: single user, loopback only, opened by a one-time token.  PostgreSQL: sign-in, each person working
    under the database role of their group (the groups of ``monitor access setup`` must exist)."""
    url = database_url(db)
    if workdir is None:
        workdir = (Path(url.removeprefix("sqlite:///")).parent if is_sqlite(url) else Path.cwd()) / "monitor_web"
    workdir = Path(workdir).resolve()
    if is_sqlite(url):
        if not _loopback(host):
            raise InputError(InputProblem("serve", None, "--host", host,
                                          "a loopback address (127.0.0.1): an SQLite programme has one user, on "
                                          "this machine; share a programme on PostgreSQL"))
        return WebConfig(db=db, workdir=workdir, programme=programme, shared=False, secure_cookies=https,
                         open_token=one_time_token())
    roles = web_users.role_urls(db)
    return WebConfig(db=db, workdir=workdir, programme=programme, shared=True, role_db=roles, secure_cookies=https)


def opening_url(config: WebConfig, host: str, port: int, https: bool = False) -> str:
    base = f"{'https' if https else 'http'}://{host}:{port}"
    if config.shared:
        return f"{base}/signin"
    return f"{base}/open?token={quote(config.open_token or '')}"


def serve(config: WebConfig, *, host: str, port: int, https: bool = False, certfile: str | None = None,
          keyfile: str | None = None, say: Callable[[str], None] = print) -> None:
    import uvicorn

    app = create_app(config)
    say(f"monitor workspace for {'a shared programme' if config.shared else 'one user'}; "
        f"files in {config.workdir}")
    say(f"open: {opening_url(config, host, port, https)}")
    if not config.shared:
        say("(the link works once; stop the server with Ctrl-C)")
    uvicorn.run(app, host=host, port=port, log_level="warning", ssl_certfile=certfile, ssl_keyfile=keyfile,
                server_header=False)
