"""The one place that knows the database: tables, engine, migrations, queries and writes.

Nothing outside ``monitor.db`` (and ``migrations/``) imports SQLAlchemy, SQLModel or Alembic.
"""

from monitor.db.store import Store

__all__ = ["Store"]
