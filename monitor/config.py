"""Where things are: the database URL and the bundled templates and migrations.

A bare path means an SQLite file (the embedded default); a URL with a scheme
(``postgresql+psycopg://user@host/dbname``) is passed to SQLAlchemy as it is.
"""

from __future__ import annotations

import os
from pathlib import Path

ENV_DATABASE_URL = "MONITOR_DATABASE_URL"
DEFAULT_DATABASE = "monitor.sqlite"

_PACKAGE_DIR = Path(__file__).resolve().parent
_CHECKOUT_ROOT = _PACKAGE_DIR.parent


def database_url(path_or_url: str | os.PathLike[str] | None = None) -> str:
    """Turn ``--db`` (or ``MONITOR_DATABASE_URL``, or the default file) into an SQLAlchemy URL."""
    raw = str(path_or_url) if path_or_url is not None else os.environ.get(ENV_DATABASE_URL, DEFAULT_DATABASE)
    if "://" in raw:
        if raw.startswith("postgresql://") or raw.startswith("postgres://"):
            # one driver for everything: psycopg 3
            raw = "postgresql+psycopg://" + raw.split("://", 1)[1]
        return raw
    return "sqlite:///" + str(Path(raw).expanduser().resolve())


def is_sqlite(url: str) -> bool:
    return url.startswith("sqlite")


def _bundled(name: str) -> Path:
    """A top-level folder of the checkout, or its copy inside an installed wheel."""
    installed = _PACKAGE_DIR / "_bundled" / name
    if installed.is_dir():
        return installed
    checkout = _CHECKOUT_ROOT / name
    if checkout.is_dir():
        return checkout
    raise FileNotFoundError(f"monitor installation is incomplete: folder '{name}' not found")


def templates_dir() -> Path:
    return _bundled("templates")


def migrations_dir() -> Path:
    return _bundled("migrations")


def demo_source_dir() -> Path:
    """The demo programme's input files (checkout: demo_programme/; wheel: monitor/_bundled/demo_programme)."""
    return _bundled("demo_programme")
