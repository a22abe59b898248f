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

    from sqlalchemy import select

    out = {}
    with store.engine.connect() as connection:
        inspector = inspect(connection)
        present = set(inspector.get_table_names())
        for table in metadata.sorted_tables:
            if table.name not in present:
                continue
            names = {c["name"] for c in inspector.get_columns(table.name)}  # a revision may lack a later column
            columns = [c for c in table.columns if c.name in names]
            rows = connection.execute(select(*columns).order_by(*table.primary_key.columns)).fetchall()
            out[table.name] = [dict(zip([c.name for c in columns], r, strict=True)) for r in rows]
    return out


def _shared(values: dict, like: dict) -> dict:
    """``values`` cut to the tables and columns ``like`` holds."""
    out = {}
    for name, rows in like.items():
        keys = set(rows[0]) if rows else set()
        out[name] = [{k: v for k, v in r.items() if k in keys} for r in values.get(name, [])] if keys else \
            values.get(name, [])
    return out


def _vocabulary_of(values: dict, like: dict) -> dict:
    """``values`` with the measure rows ``like`` holds: a later revision adds measures (0007, shoot height)."""
    codes = {r["code"] for r in like.get("measure", [])}
    return {**values, "measure": [r for r in values.get("measure", []) if r["code"] in codes]}


def _keep_rows(folder, entry: dict, keep) -> None:
    """Rewrite one table of a backup folder with only the rows ``keep`` accepts (and its manifest entry)."""
    import csv
    import hashlib
    import io

    path = folder / entry["file"]
    rows = list(csv.DictReader(io.StringIO(path.read_text(encoding="utf-8"), newline="")))
    out = io.StringIO(newline="")
    writer = csv.DictWriter(out, fieldnames=entry["columns"], lineterminator="\n")
    writer.writeheader()
    kept = [r for r in rows if keep(r)]
    writer.writerows(kept)
    path.write_text(out.getvalue(), encoding="utf-8")
    entry["rows"] = len(kept)
    entry["sha256"] = hashlib.sha256(path.read_bytes()).hexdigest()


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
        columns_at_first = {t: {c["name"] for c in inspect(connection).get_columns(t)} for t in tables_at_first}
    for name in set(manifest["tables"]) - tables_at_first:
        del manifest["tables"][name]  # tables a later revision added (season plans, quality flags)
    for name, entry in manifest["tables"].items():  # columns a later revision added (a site's region)
        if set(entry["columns"]) - columns_at_first[name]:
            import csv
            import hashlib
            import io

            path = tmp_path / "b" / entry["file"]
            rows = list(csv.reader(io.StringIO(path.read_text(encoding="utf-8"), newline="")))
            keep = [i for i, c in enumerate(rows[0]) if c in columns_at_first[name]]
            out = io.StringIO(newline="")
            csv.writer(out, lineterminator="\n").writerows([[r[i] for i in keep] for r in rows])
            path.write_text(out.getvalue(), encoding="utf-8")
            entry["columns"] = [rows[0][i] for i in keep]
            entry["sha256"] = hashlib.sha256(path.read_bytes()).hexdigest()
    # the measure vocabulary a later revision added (shoot height, 0007) is not in a first-revision backup
    with engine.connect() as connection:
        from sqlalchemy import text

        codes_at_first = {r[0] for r in connection.execute(text("SELECT code FROM measure"))}
    _keep_rows(tmp_path / "b", manifest["tables"]["measure"], lambda row: row["code"] in codes_at_first)
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
        first_values = kept(_values(store))
        assert original["observation"] and _shared(_vocabulary_of(original, first_values), first_values) == first_values
        for revision in revisions[1:]:
            migrate.upgrade(store.engine, revision)
            assert migrate.current_revision(store.engine) == revision
            now = kept(_values(store))
            assert _shared(_vocabulary_of(original, now), now) == now, f"values changed on upgrade to {revision}"
        migrate.downgrade(store.engine, "-1")
        migrate.upgrade(store.engine)
        assert kept(_values(store)) == original
    finally:
        store.dispose()
        demo_store.dispose()


def test_stored_fits_and_regions_go_down_and_come_back_up(db_url, demo_source):
    """Revision 0003 (stored fits, reports issued, site regions) downgrades and upgrades on a database holding
    them, leaving every other table as it was."""
    import datetime as dt

    from sqlalchemy import inspect, text

    from monitor.db import fits

    setup.setup_folder(db_url, demo_source)
    store = Store.open(db_url)
    try:
        pid = store.programme().id
        with store.session() as session:
            session.execute(text("UPDATE site SET region = 'north'"))
        when = dt.datetime(2026, 1, 2, tzinfo=dt.UTC)
        [fit_id] = fits.save_fits(store, pid, [{
            "species": "CHAORC", "measure": "count", "area_kind": "all", "area": "", "spec_json": "{}",
            "spec_hash": "0" * 64, "engine_version": "test", "data_fingerprint": "1" * 64, "result_json": "{}",
            "n_obs": 10, "first_year": 2015, "last_year": 2024, "call": "stable", "annual_change": 0.01,
            "annual_lower": -0.02, "annual_upper": 0.04, "fit_seconds": 1.5, "fitted_by": "test", "fitted_at": when}])
        fits.record_report(store, pid, 2024, [fit_id], folder="reports/2024", issued_by="test", issued_at=when)
        before = {k: v for k, v in _values(store).items() if k not in ("stored_fit", "report_issue", "report_fit")}
        assert fits.call_history(store, pid, "CHAORC")["call"].tolist() == ["stable"]
        migrate.downgrade(store.engine, "0006")   # below 0003 (later revisions go first)
        with store.engine.connect() as connection:
            inspector = inspect(connection)
            assert not {"stored_fit", "report_issue", "report_fit"} & set(inspector.get_table_names())
            assert "region" not in {c["name"] for c in inspector.get_columns("site")}
        migrate.upgrade(store.engine)
        after = _values(store)
        assert after["stored_fit"] == [] and after["report_fit"] == []
        site_rows = after.pop("site")  # the region column comes back empty
        assert [r.pop("region") for r in site_rows] == [None] * len(site_rows)
        assert site_rows == [{k: v for k, v in r.items() if k != "region"} for r in before.pop("site")]
        assert {k: v for k, v in after.items() if k in before} == before
    finally:
        store.dispose()
