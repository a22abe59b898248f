"""The one place that knows the database: tables, engine, migrations, queries and writes.

Nothing outside ``monitor.db`` (and ``migrations/``) imports SQLAlchemy, SQLModel or Alembic; services
get the session type, ``select`` and ``insert`` from here.
"""

from sqlalchemy import insert
from sqlmodel import Session, select

from monitor.db.store import Store, one_snapshot, read_snapshot

__all__ = ["Session", "Store", "insert", "one_snapshot", "read_snapshot", "select"]
