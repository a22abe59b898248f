"""Looking after a programme database: backup and restore (also between SQLite and PostgreSQL), and the
roles of a shared PostgreSQL programme."""

from __future__ import annotations

from pathlib import Path

from monitor.db import Store, backup, migrate


def backup_database(db: str | None, folder: Path) -> dict:
    store = Store.open(db)
    try:
        return backup.dump(store, Path(folder))
    finally:
        store.dispose()


def restore_database(db: str | None, folder: Path, *, upgrade: bool = True) -> tuple[dict[str, int], str]:
    """Restore into an empty database: created at the backup's revision if it has no schema yet, then
    upgraded to this monitor's schema after the load.  Returns rows per table and the final revision."""
    manifest = backup.read_manifest(Path(folder))
    store = Store.open(db, check=False)
    try:
        if migrate.current_revision(store.engine) is None:
            migrate.upgrade(store.engine, manifest["schema_revision"])
        loaded = backup.restore(store, Path(folder))
        if not upgrade:
            return loaded, migrate.current_revision(store.engine) or ""
        _before, after = migrate.upgrade(store.engine)
        return loaded, after
    finally:
        store.dispose()


def setup_access(db: str | None) -> list[str]:
    """Create the group roles of a shared PostgreSQL programme (see ``monitor.db.roles``)."""
    from monitor.db import roles

    store = Store.open(db)
    try:
        roles.setup_roles(store.engine)
        database = store.engine.url.database or ""
        return [f"role {roles.role_name(database, g)} ready" for g in roles.GROUPS]
    finally:
        store.dispose()


def grant_access(db: str | None, login: str, group: str) -> str:
    from monitor.db import roles

    store = Store.open(db)
    try:
        return roles.grant(store.engine, login, group)
    finally:
        store.dispose()
