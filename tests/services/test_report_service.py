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
