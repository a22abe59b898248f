"""The demo builds from its files into a fresh database, the same way every time."""

from __future__ import annotations

from monitor.db import Store, queries
from monitor.services import demo


def _counts(run) -> dict[str, int]:
    store = Store.open(str(run.database))
    try:
        return queries.table_counts(store)
    finally:
        store.dispose()


def test_demo_builds_twice_with_identical_row_counts(tmp_path):
    # the whole demo, analyses included, runs in tests/test_wheel.py from an installed wheel
    first = demo.build_programme(tmp_path / "one")
    second = demo.build_programme(tmp_path / "two")
    counts = _counts(first)
    assert counts == _counts(second)
    assert counts["station"] == 64 and counts["site"] == 4 and counts["species"] == 5


def test_demo_refuses_a_folder_with_files(tmp_path):
    import pytest

    from monitor.errors import InputError

    (tmp_path / "x.txt").write_text("keep me")
    with pytest.raises(InputError, match="empty or new folder"):
        demo.run_demo(tmp_path)
    assert (tmp_path / "x.txt").read_text() == "keep me"
