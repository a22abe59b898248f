"""Back up a whole programme database to a portable folder, and restore it into an empty one.

The folder holds one CSV file per table (RFC 4180, UTF-8, header row; NULL written as ``\\N`` so it is
never confused with an empty string) and ``manifest.json`` with the schema revision, the row count and
the SHA-256 of every file.  Floats are written with ``repr`` so they read back bit for bit; times are
ISO 8601 in UTC.  A restore checks every checksum and the revision first, then loads all tables in one
transaction into a database that is at the same revision and holds no rows, on SQLite or PostgreSQL
alike: the way to move a programme between engines.
"""

from __future__ import annotations

import csv
import datetime as dt
import hashlib
import io
import json
from pathlib import Path

from sqlalchemy import (
    Boolean,
    Date,
    DateTime,
    Float,
    Integer,
    TypeDecorator,
    func,
    inspect,
    select,
    text,
    update,
)

from monitor import __version__
from monitor.db import migrate
from monitor.db.models import metadata
from monitor.db.store import Store
from monitor.errors import DataError, InputError, InputProblem

MANIFEST = "manifest.json"
NULL = "\\N"
FORMAT = "monitor-backup/1"


def _cell(value: object) -> str:
    if value is None:
        return NULL
    if isinstance(value, bool):
        return "1" if value else "0"
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, dt.datetime):
        if value.tzinfo is None:
            value = value.replace(tzinfo=dt.UTC)
        return value.astimezone(dt.UTC).isoformat()
    if isinstance(value, dt.date):
        return value.isoformat()
    return str(value)


def _parse(text_value: str, column) -> object:
    if text_value == NULL:
        return None
    kind = column.type
    if isinstance(kind, TypeDecorator):  # e.g. SQLModel's UTC datetime and string types
        kind = kind.impl_instance
    if isinstance(kind, Boolean):
        return text_value == "1"
    if isinstance(kind, Integer):
        return int(text_value)
    if isinstance(kind, Float):
        return float(text_value)
    if isinstance(kind, DateTime):
        return dt.datetime.fromisoformat(text_value)
    if isinstance(kind, Date):
        return dt.date.fromisoformat(text_value)
    return text_value


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def dump(store: Store, folder: Path) -> dict:
    """Write every table to ``folder`` (created; must be empty) and return the manifest."""
    folder = Path(folder)
    if folder.exists() and any(folder.iterdir()):
        raise InputError(InputProblem(str(folder), None, None, None, "an empty or new folder for the backup"))
    folder.mkdir(parents=True, exist_ok=True)
    revision = migrate.current_revision(store.engine)
    tables = {}
    # one read transaction for a consistent snapshot (REPEATABLE READ on PostgreSQL)
    with store.engine.connect() as connection:
        if store.dialect == "postgresql":
            connection.execute(text("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ"))
        present_tables = set(inspect(connection).get_table_names())
        for table in metadata.sorted_tables:
            if table.name not in present_tables:
                continue
            buffer = io.StringIO()
            writer = csv.writer(buffer, lineterminator="\r\n")
            names = [c.name for c in table.columns]
            writer.writerow(names)
            rows = connection.execute(select(table).order_by(*table.primary_key.columns))
            count = 0
            for row in rows:
                writer.writerow([_cell(v) for v in row])
                count += 1
            data = buffer.getvalue().encode("utf-8")
            name = f"{table.name}.csv"
            (folder / name).write_bytes(data)
            tables[table.name] = {"file": name, "rows": count, "sha256": _sha256(data), "columns": names}
    manifest = {
        "format": FORMAT,
        "schema_revision": revision,
        "monitor_version": __version__,
        "source_engine": store.dialect,
        "created_at": dt.datetime.now(dt.UTC).isoformat(),
        "tables": tables,
    }
    (folder / MANIFEST).write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")
    return manifest


def read_manifest(folder: Path) -> dict:
    folder = Path(folder)
    path = folder / MANIFEST
    try:
        manifest = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(InputProblem(str(path), None, None, None, "a backup folder with manifest.json")) from None
    except json.JSONDecodeError as exc:
        raise InputError(InputProblem(str(path), exc.lineno, None, None, "valid JSON")) from None
    if manifest.get("format") != FORMAT:
        raise InputError(InputProblem(str(path), None, "format", manifest.get("format"), f"'{FORMAT}'"))
    for name, entry in manifest["tables"].items():
        data_path = folder / entry["file"]
        try:
            data = data_path.read_bytes()
        except FileNotFoundError:
            raise InputError(InputProblem(str(data_path), None, None, None, f"the file listed for table {name}")) from None
        if _sha256(data) != entry["sha256"]:
            raise InputError(InputProblem(str(data_path), None, None, None,
                                          "the checksum in manifest.json (the file has changed or is damaged)"))
    return manifest


def restore(store: Store, folder: Path) -> dict[str, int]:
    """Load a backup into ``store``, which must be at the backup's schema revision and hold no rows."""
    folder = Path(folder)
    manifest = read_manifest(folder)
    revision = migrate.current_revision(store.engine)
    if revision != manifest["schema_revision"]:
        raise DataError(f"the backup has schema revision {manifest['schema_revision']} but the database has "
                        f"{revision}; run `monitor init` on an empty database of this monitor version, or restore "
                        "with the monitor version that made the backup")
    # the tables of this revision, in dependency order: those the code knows at head that exist in the database
    with store.engine.connect() as connection:
        present_tables = set(inspect(connection).get_table_names())
    known = {t.name: t for t in metadata.sorted_tables if t.name in present_tables}
    missing = sorted(set(known) - set(manifest["tables"]))
    extra = sorted(set(manifest["tables"]) - set(known))
    if missing or extra:
        raise InputError(InputProblem(str(folder / MANIFEST), None, "tables", ", ".join(missing + extra),
                                      f"exactly the tables of schema revision {revision}"))
    loaded: dict[str, int] = {}
    with store.engine.begin() as connection:
        for name, table in known.items():
            if name == "measure":
                continue  # the vocabulary the migration writes; checked equal below
            present = connection.execute(select(func.count()).select_from(table)).scalar_one()
            if present:
                raise DataError(f"the database is not empty (table {name} holds {present} rows); "
                                "restore only into a freshly initialised database")
        for table in known.values():
            entry = manifest["tables"][table.name]
            with (folder / entry["file"]).open(newline="", encoding="utf-8") as handle:
                reader = csv.reader(handle)
                header = next(reader)
                columns = [table.columns[c] for c in header]
                rows = [{col.name: _parse(v, col) for col, v in zip(columns, r, strict=True)} for r in reader]
            if len(rows) != entry["rows"]:
                raise InputError(InputProblem(entry["file"], None, None, len(rows), f"{entry['rows']} rows"))
            if table.name == "measure":
                stored = {r.code: dict(r._mapping) for r in connection.execute(select(table))}
                if {r["code"]: r for r in rows} != stored:
                    raise DataError("the backup's measure vocabulary differs from this database's")
                loaded[table.name] = len(rows)
                continue
            # self-references (a station replaced by another) are set after all rows exist
            self_refs = [fk.parent.name for fk in table.foreign_keys if fk.column.table is table]
            deferred = []
            if self_refs:
                for row in rows:
                    pending = {c: row[c] for c in self_refs if row[c] is not None}
                    if pending:
                        deferred.append((row[table.primary_key.columns.keys()[0]], pending))
                        for c in pending:
                            row[c] = None
            if rows:
                connection.execute(table.insert(), rows)
            pk = table.primary_key.columns.values()[0]
            for key, values in deferred:
                connection.execute(update(table).where(pk == key).values(**values))
            loaded[table.name] = len(rows)
            if store.dialect == "postgresql" and isinstance(pk.type, Integer) and len(table.primary_key.columns) == 1:
                connection.execute(text(
                    f"SELECT setval(pg_get_serial_sequence('{table.name}', '{pk.name}'), "
                    f"COALESCE((SELECT max({pk.name}) FROM {table.name}), 0) + 1, false)"))
    return loaded
