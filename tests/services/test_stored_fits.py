"""Stored fits: reused while data, model and engine stand, refitted after a correction or a late sheet,
identical to a refit; trends by area; the same numbers from 1 or 2 workers and from a Dask cluster."""

from __future__ import annotations

import dataclasses
import json

import pandas as pd
import pytest

from monitor.db import Store
from monitor.services import analyses, trend
from monitor.services.common import current_user
from monitor.services.corrections import set_value
from monitor.services.imports import import_records

SPECIES = ["CHAORC", "HEABEL"]  # a count (Poisson-lognormal) and a frequency (binomial) series of the demo


def _same(a: trend.SpeciesTrend, b: trend.SpeciesTrend) -> None:
    """Every number of two fitted trends equal, exactly."""
    assert (a.species, a.measure, a.area_kind, a.area) == (b.species, b.measure, b.area_kind, b.area)
    assert a.result.to_dict() == b.result.to_dict()
    for f in dataclasses.fields(a.result):
        x, y = getattr(a.result, f.name), getattr(b.result, f.name)
        if isinstance(x, pd.DataFrame):
            pd.testing.assert_frame_equal(x, y, check_exact=True)
        elif isinstance(x, pd.Series):
            pd.testing.assert_series_equal(x, y, check_exact=True)


@pytest.fixture
def filled_db(programme_db, demo_source, tmp_path):
    """The demo on each engine, with every season but half of 2026's sheet imported (the rest comes late)."""
    for sheet in sorted((demo_source / "records").glob("season_20*.csv")):
        if sheet.name != "season_2026.csv":
            import_records(programme_db, sheet, who="test")
    lines = (demo_source / "records" / "season_2026.csv").read_text().splitlines(keepends=True)
    half = len(lines) // 2
    (tmp_path / "season_2026_a.csv").write_text("".join(lines[:half]))
    (tmp_path / "season_2026_b.csv").write_text(lines[0] + "".join(lines[half:]))
    import_records(programme_db, tmp_path / "season_2026_a.csv", who="test")
    return programme_db


def _stored_rows(db: str) -> pd.DataFrame:
    store = Store.open(db)
    try:
        return store.frame("SELECT f.id, sp.code AS species, f.area_kind, f.area, f.fitted_by, f.data_fingerprint "
                           "FROM stored_fit f JOIN species sp ON sp.id = f.species_id ORDER BY f.id")
    finally:
        store.dispose()


def test_stored_fits_are_reused_equal_a_refit_and_are_refitted_after_a_correction_or_a_late_sheet(filled_db, tmp_path):
    first = trend.fit_programme(filled_db, species=SPECIES, workers=1)
    assert [t.reused for t in first] == [False, False] and all(t.fit_id for t in first)
    again = trend.fit_programme(filled_db, species=SPECIES, workers=1)
    assert [t.reused for t in again] == [True, True]
    assert [t.fit_id for t in again] == [t.fit_id for t in first]
    assert [t.fitted_at for t in again] == [t.fitted_at for t in first]
    refit = trend.fit_programme(filled_db, species=SPECIES, workers=1, refit=True, save=False)
    assert [t.reused for t in refit] == [False, False]
    for a, b, c in zip(first, again, refit, strict=True):
        _same(a, b)   # the stored path ...
        _same(b, c)   # ... gives the refit path's numbers exactly
    assert len(_stored_rows(filled_db)) == 2

    # a correction of one CHAORC value: CHAORC is fitted again, HEABEL still reused
    set_value(filled_db, "CB-12", 2024, "CHAORC", "count", "7", reason="recount from the photo",
                      who="test")
    corrected = trend.fit_programme(filled_db, species=SPECIES, workers=1)
    assert [t.reused for t in corrected] == [False, True]
    assert corrected[0].result.to_dict() != first[0].result.to_dict()
    assert corrected[0].fit_id != first[0].fit_id
    _same(corrected[1], first[1])

    # a late sheet for 2026: both series gain visits, both are fitted again
    import_records(filled_db, tmp_path / "season_2026_b.csv", who="test")
    late = trend.fit_programme(filled_db, species=SPECIES, workers=1)
    assert [t.reused for t in late] == [False, False]
    assert late[0].result.n_obs > corrected[0].result.n_obs and late[1].result.n_obs > first[1].result.n_obs
    rows = _stored_rows(filled_db)
    assert len(rows) == 5 and rows["data_fingerprint"].nunique() == 5
    assert set(rows["fitted_by"]) == {current_user()}


def test_the_report_from_stored_fits_says_what_the_refitting_report_says(filled_db, tmp_path):
    """The stored-fit path of ``monitor report`` against its refit path (``--refit``): the same numbers
    and words, the same figures byte for byte; only the fits' times and reused flags differ."""
    from monitor.report.render import FIGURES, NUMBERS
    from monitor.services import report

    refitted = report.write_report(filled_db, 2026, tmp_path / "refit" / "2026", species="CHAORC", refit=True,
                                   pdf=False)
    stored = report.write_report(filled_db, 2026, tmp_path / "stored" / "2026", species="CHAORC", pdf=False)
    a, b = (json.loads((f / NUMBERS).read_text()) for f in (refitted, stored))
    assert [f["reused"] for f in a["fits"]] == [False] and [f["reused"] for f in b["fits"]] == [True]
    for doc in (a, b):
        for fit in doc["fits"]:
            del fit["reused"], fit["fitted"]
    assert a == b
    assert a["summary"][0]["annual_change"]["estimate"] is not None  # the comparison held numbers
    figures = [{p.name: p.read_bytes() for p in (f / FIGURES).iterdir()} for f in (refitted, stored)]
    assert figures[0] == figures[1] and len(figures[0]) >= 2


def test_another_option_is_another_fit(filled_db):
    one = trend.fit_programme(filled_db, species=["CHAORC"], workers=1)
    other = trend.fit_programme(filled_db, species=["CHAORC"], workers=1, family="negbin")
    assert not other[0].reused and other[0].result.family == "negbin"
    assert trend.fit_programme(filled_db, species=["CHAORC"], workers=1)[0].fit_id == one[0].fit_id


def test_specification_holds_every_option_of_the_fit_with_defaults():
    import inspect

    spec = analyses.specification("count", {"margin": 0.02, "choices": trend.ModelChoices(family="poisson")})
    assert set(spec) == set(inspect.signature(trend.fit_one).parameters) - {"data"}
    assert spec["measure"] == "count" and spec["margin"] == 0.02
    # every field of the model choices, defaults included, so an option added later enters by itself
    fields = {f.name for f in dataclasses.fields(trend.ModelChoices)}
    assert set(spec["choices"]) == fields | {"__class__"} and spec["choices"]["family"] == "poisson"
    json.dumps(spec)  # JSON-ready


def test_history_and_last_years_calls_come_from_the_database(filled_db):
    store = Store.open(filled_db)
    try:
        pid = store.programme().id
        assert analyses.previous_report(store, pid, 2025) is None
        for year in (2024, 2025):
            fitted = trend.fit_programme(filled_db, species=SPECIES, last_year=year, workers=1)
            analyses.record_report(store, pid, year, [t.fit_id for t in fitted], folder=f"reports/{year}", who="test")
        # the 2025 report written again later: the last one written for a season is what it said
        fitted = trend.fit_programme(filled_db, species=SPECIES, last_year=2025, workers=1)
        analyses.record_report(store, pid, 2025, [t.fit_id for t in fitted], folder="reports/2025", who="test")
        previous = analyses.previous_report(store, pid, 2025)
    finally:
        store.dispose()
    assert previous["season"] == 2025 and previous["source"] == "database"
    by_species = {e["species"]: e for e in previous["summary"]}
    assert by_species["CHAORC"]["call"] == fitted[0].result.call
    assert by_species["CHAORC"]["years"] == [2015, 2025]
    assert by_species["HEABEL"]["family"] == "binomial"
    assert by_species["CHAORC"]["annual_change"]["estimate"] == fitted[0].result.annual_change.estimate
    history = analyses.history(filled_db, "CHAORC")
    assert list(history["report_year"]) == [2024, 2025]
    assert list(history["years"]) == ["2015-2024", "2015-2025"]
    assert history["call"].iloc[1] == fitted[0].result.call


def test_trends_by_site_and_region_beside_the_overall_trend(filled_db):
    store = Store.open(filled_db)
    try:
        with store.session() as session:
            from sqlalchemy import text

            session.execute(text("UPDATE site SET region = 'north' WHERE code IN ('CB', 'HH')"))
            session.execute(text("UPDATE site SET region = 'south' WHERE code NOT IN ('CB', 'HH')"))
    finally:
        store.dispose()
    by_site = trend.fit_programme(filled_db, species=["HEABEL"], by="site", workers=1)
    assert [(t.area_kind, t.area) for t in by_site] == [("all", ""), ("site", "CB"), ("site", "HH")]
    assert sum(t.result.n_obs for t in by_site[1:]) == by_site[0].result.n_obs
    assert all(t.result.n_sites == 1 for t in by_site[1:])
    by_region = trend.fit_programme(filled_db, species=["HEABEL"], by="region", workers=1)
    assert by_region[0].reused  # the overall trend is the one just stored
    assert [(t.area_kind, t.area) for t in by_region] == [("all", ""), ("region", "north")]
    assert by_region[1].result.n_obs == by_region[0].result.n_obs  # HEABEL grows in the north only
    doc = by_site[1].to_dict()
    assert doc["area_kind"] == "site" and doc["area"] == "CB" and "annual_change" in doc
