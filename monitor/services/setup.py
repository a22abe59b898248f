"""Programme set-up: create or upgrade the database, then load sites, stations, species and the rest."""

from __future__ import annotations

from monitor.db import migrate
from monitor.db.engine import make_engine


def init_database(db: str | None) -> tuple[str | None, str]:
    """Create or upgrade the schema of the database at ``db``.  Returns (revision before, after)."""
    engine = make_engine(db)
    try:
        return migrate.upgrade(engine)
    finally:
        engine.dispose()
