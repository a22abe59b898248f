"""The one place that knows the database: tables, engine, migrations, queries and writes.

Nothing outside ``monitor.db`` (and ``migrations/``) imports SQLAlchemy, SQLModel or Alembic; services
get the session type and ``select`` from here.
"""

from sqlmodel import Session, select

from monitor.db.store import Store

__all__ = ["Session", "Store", "select"]
