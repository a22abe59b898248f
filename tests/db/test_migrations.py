"""Migrations: every schema change is a revision; upgrades and downgrades keep recorded data."""

from __future__ import annotations

from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext

from monitor.db import Store, migrate, queries
from monitor.db.engine import make_engine
from monitor.db.models import metadata
from monitor.services import setup


def _values(store: Store) -> dict[str, list[tuple]]:
    """Every row of every table, in primary-key order (the exact content, not just counts)."""
    from sqlalchemy import inspect

    out = {}
    with store.engine.connect() as connection:
        present = set(inspect(connection).get_table_names())
        for table in metadata.sorted_tables:
            if table.name not in present:
                continue
            rows = connection.execute(table.select().order_by(*table.primary_key.columns)).fetchall()
            out[table.name] = [tuple(r) for r in rows]
    return out


def test_empty_database_up_down_and_up_again(empty_db_url):
    engine = make_engine(empty_db_url)
    before, after = migrate.upgrade(engine)
    assert before is None and after == migrate.head_revision()
    assert migrate.downgrade(engine, "base") is None
    assert migrate.upgrade(engine)[1] == migrate.head_revision()
    engine.dispose()


def test_models_and_migrations_agree(db_url):
    """The tables the code declares are exactly what the migrations build (alembic autogenerate finds nothing)."""
    engine = make_engine(db_url)
    with engine.connect() as connection:
        diff = compare_metadata(MigrationContext.configure(connection), metadata)
    engine.dispose()
    assert diff == []


def test_demo_survives_downgrade_one_step_and_upgrade(db_url, demo_source):
    setup.setup_folder(db_url, demo_source)
    store = Store.open(db_url)
    counts, values = queries.table_counts(store), _values(store)
    assert counts["station"] == 64
    head = migrate.head_revision()
    migrate.downgrade(store.engine, "-1")
    assert migrate.current_revision(store.engine) != head
    migrate.upgrade(store.engine)
    assert queries.table_counts(store) == counts
    assert _values(store) == values
    store.dispose()


def test_commands_refuse_a_database_that_is_behind(db_url):
    import pytest

    from monitor.errors import SchemaError

    engine = make_engine(db_url)
    migrate.downgrade(engine, "-1")
    engine.dispose()
    with pytest.raises(SchemaError, match="run `monitor init` to upgrade"):
        Store.open(db_url)


def test_first_revision_with_the_demo_upgrades_step_by_step_without_loss(demo_db, empty_db_url, tmp_path):
    """A database made by the first schema revision, holding the demo, upgraded one revision at a time."""
    import json

    from alembic.script import ScriptDirectory

    from monitor.config import migrations_dir
    from monitor.services import backup

    backup.backup_database(demo_db, tmp_path / "b")
    manifest_path = tmp_path / "b" / "manifest.json"
    manifest = json.loads(manifest_path.read_text())
    revisions = [r.revision for r in ScriptDirectory(str(migrations_dir())).walk_revisions()][::-1]
    first = revisions[0]
    engine = make_engine(empty_db_url)
    migrate.upgrade(engine, first)
    with engine.connect() as connection:
        from sqlalchemy import inspect

        tables_at_first = set(inspect(connection).get_table_names()) - {"alembic_version"}
    for name in set(manifest["tables"]) - tables_at_first:
        del manifest["tables"][name]  # tables a later revision added (season plans, quality flags)
    manifest["schema_revision"] = first
    manifest_path.write_text(json.dumps(manifest))
    engine.dispose()
    backup.restore_database(empty_db_url, tmp_path / "b", upgrade=False)

    def kept(values: dict) -> dict:
        return {k: v for k, v in values.items() if k in tables_at_first}

    demo_store = Store.open(demo_db)
    store = Store.open(empty_db_url, check=False)
    try:
        original = kept(_values(demo_store))
        assert original["observation"] and kept(_values(store)) == original
        for revision in revisions[1:]:
            migrate.upgrade(store.engine, revision)
            assert migrate.current_revision(store.engine) == revision
            assert kept(_values(store)) == original, f"values changed on upgrade to {revision}"
        migrate.downgrade(store.engine, "-1")
        migrate.upgrade(store.engine)
        assert kept(_values(store)) == original
    finally:
        store.dispose()
        demo_store.dispose()
