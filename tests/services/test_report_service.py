"""The annual report from the stored demo: written atomically, triggers from the programme, no network."""

from __future__ import annotations

import json

import pytest

from monitor.services import report


@pytest.fixture(scope="module")
def written(demo_db, tmp_path_factory):
    out = tmp_path_factory.mktemp("reports") / "2026"
    return report.write_report(demo_db, 2026, out)


def test_report_folder_has_page_figures_and_numbers(written):
    html = (written / "index.html").read_text()
    assert "Hollowmere Vale" in html and "chalk orchidlet" in html
    assert "http://" not in html and "https://" not in html
    doc = json.loads((written / "report.json").read_text())
    species = {row["species"] for row in doc["summary"]}
    assert species == {"MARVIO", "CHAORC", "GLASED", "HEABEL", "SILGRA"}
    assert list(written.glob("figures/*.png")) and list(written.glob("figures/*.svg"))


def test_triggers_come_from_the_programme_settings(written):
    doc = json.loads((written / "report.json").read_text())
    text = json.dumps(doc)
    assert "Review the autumn grazing on Chalk Bank" in text


def test_a_second_report_compares_calls_with_the_previous_one(demo_db, written, tmp_path):
    previous = json.loads((written / "report.json").read_text())
    previous["season"] = 2025
    for row in previous["summary"]:
        if row["species"] == "CHAORC":
            row["call"] = "stable"
    (tmp_path / "2025").mkdir()
    (tmp_path / "2025" / "report.json").write_text(json.dumps(previous))
    second = report.write_report(demo_db, 2026, tmp_path / "2026")  # finds ../2025/report.json itself
    comparison = {c["species"]: c for c in json.loads((second / "report.json").read_text())["comparison"]}
    assert comparison["CHAORC"]["changed"] and comparison["CHAORC"]["previous_call"] == "stable"
    assert comparison["CHAORC"]["current_call"] == "declining"
    assert not comparison["MARVIO"]["changed"]


def test_the_report_reuses_stored_fits_says_when_and_compares_with_last_year_from_the_database(demo_db, tmp_path):
    import shutil

    from sqlalchemy import text

    from monitor.db import Store
    from monitor.services import analyses, trend

    db = str(tmp_path / "demo.sqlite")
    shutil.copyfile(demo_db, db)
    store = Store.open(db)
    try:
        with store.session() as session:  # fits and reports other tests recorded in the shared demo
            for table in ("report_fit", "report_issue", "stored_fit"):
                session.execute(text(f"DELETE FROM {table}"))
    finally:
        store.dispose()
    report.write_report(db, 2025, tmp_path / "one" / "2025", pdf=False)
    fitted = trend.fit_programme(db, last_year=2026)   # fits stored before the report ...
    second = report.write_report(db, 2026, tmp_path / "two" / "2026", by="site", pdf=False)  # no 2025 folder here
    doc = json.loads((second / "report.json").read_text())
    overall = [f for f in doc["fits"] if f["area_kind"] == "all"]
    assert overall and all(f["reused"] for f in overall)  # ... are reused by the report
    assert all(not f["reused"] for f in doc["fits"] if f["area_kind"] == "site")  # the site fits are new
    assert {(a["species"], a["area"]) for a in doc["areas"]} >= {("CHAORC", "CB"), ("CHAORC", "HH")}
    html = (second / "index.html").read_text()
    assert "When each trend was fitted" in html and "stored fits reused" in html
    assert fitted[0].fitted_at.strftime("%Y-%m-%d %H:%M UTC") in html
    comparison = {c["species"]: c for c in doc["comparison"]}
    history = analyses.history(db, "CHAORC")
    assert list(history["report_year"]) == [2025, 2026]
    assert comparison["CHAORC"]["previous_call"] == history["call"].iloc[0]
    assert comparison["CHAORC"]["current_call"] == history["call"].iloc[1] == fitted[0].result.call
