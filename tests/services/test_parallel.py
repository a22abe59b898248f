"""The same numbers from 1 or 2 local processes and from a Dask cluster (a real LocalCluster with worker
processes); results stored by the submitting process; the power study's replicates on the cluster."""

from __future__ import annotations

import math
import shutil

import pandas as pd
import pytest
from sqlalchemy import text

from monitor.db import Store
from monitor.power import VarianceComponents
from monitor.services import power, trend
from monitor.services.common import current_user
from monitor.services.executor import open_runner
from tests.services.test_stored_fits import _same

SPECIES = ["CHAORC", "HEABEL"]


@pytest.fixture
def demo_copy(demo_db, tmp_path) -> str:
    """A private copy of the demo database (the tests store fits in it)."""
    path = tmp_path / "demo.sqlite"
    shutil.copyfile(demo_db, path)
    store = Store.open(str(path))
    try:
        with store.session() as session:  # fits other tests stored in the shared demo
            for table in ("report_fit", "report_issue", "stored_fit"):
                session.execute(text(f"DELETE FROM {table}"))
    finally:
        store.dispose()
    return str(path)


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  scheduler_port=0) as local:
        yield local.scheduler_address


def test_one_and_two_workers_give_the_same_numbers_in_the_same_order(demo_copy):
    one = trend.fit_programme(demo_copy, species=SPECIES, by="site", workers=1, save=False)
    two = trend.fit_programme(demo_copy, species=SPECIES, by="site", workers=2, save=False)
    assert [(t.species, t.area) for t in one] == [("CHAORC", ""), ("CHAORC", "CB"), ("CHAORC", "HH"),
                                                  ("HEABEL", ""), ("HEABEL", "CB"), ("HEABEL", "HH")]
    for a, b in zip(one, two, strict=True):
        _same(a, b)


def test_the_runner_keeps_the_order_of_the_tasks():
    with open_runner(workers=2) as runner:
        assert runner.map(abs, [-3, 1, -2, 5, -8]) == [3, 1, 2, 5, 8]
    with pytest.raises(Exception, match="--workers"):
        with open_runner(workers=0):
            pass


def test_a_dask_cluster_gives_the_local_numbers_and_the_submitter_stores_them(demo_copy, cluster):
    local = trend.fit_programme(demo_copy, species=SPECIES, by="site", workers=1, save=False)
    remote = trend.fit_programme(demo_copy, species=SPECIES, by="site", cluster=cluster)
    for a, b in zip(local, remote, strict=True):
        _same(a, b)
    assert all(t.fit_id is not None and not t.reused for t in remote)
    store = Store.open(demo_copy)
    try:
        stored = store.frame("SELECT fitted_by, area_kind FROM stored_fit")
    finally:
        store.dispose()
    assert len(stored) == len(remote) and set(stored["fitted_by"]) == {current_user()}
    # stored centrally, so the next run reuses them without the cluster
    again = trend.fit_programme(demo_copy, species=SPECIES, by="site", workers=1)
    assert all(t.reused for t in again)


def test_power_replicates_on_a_dask_cluster_equal_the_local_run(cluster):
    components = VarianceComponents(family="poisson-lognormal", intercept=math.log(4.0), station_sd=0.5,
                                    observation_sd=0.3)
    kwargs = dict(change=-0.5, over_years=10, stations=[10, 20], years=[6], replicates=12, seed=7,
                  find_smallest=False, find_years=False)
    here = power.power_study(components, "values given", workers=1, **kwargs)
    there = power.power_study(components, "values given", cluster=cluster, **kwargs)
    pd.testing.assert_frame_equal(here.table(), there.table(), check_exact=True)
    for a, b in zip(here.results, there.results, strict=True):
        pd.testing.assert_frame_equal(a.replicates, b.replicates, check_exact=True)


def test_a_wrong_cluster_address_is_one_clear_error(monkeypatch):
    from monitor.errors import InputError
    from monitor.services import executor

    monkeypatch.setattr(executor, "CONNECT_TIMEOUT", "2s")   # nothing listens on port 9: no need to wait 20 s

    with pytest.raises(InputError, match="--cluster"):
        with open_runner(cluster="tcp://127.0.0.1:9"):
            pass
