"""A target species with one season of data is reported as too short to call; every other species'
trend and the rest of the report stand (before, the whole command failed naming no species)."""

from __future__ import annotations

import csv
import json

from monitor.cli.main import main
from monitor.services import report, setup, trend
from monitor.services.imports import import_records
from tests.conftest import REPO_ROOT

SEASONS = REPO_ROOT / "demo_programme" / "records"


def _programme_with_a_new_species(db: str, tmp_path) -> None:
    setup.setup_folder(db, REPO_ROOT / "demo_programme")
    for year in (2021, 2022, 2023):
        import_records(db, SEASONS / f"season_{year}.csv")
    new = tmp_path / "new_species.csv"
    new.write_text("code,scientific_name,common_name,measure\nNEWSP,Novella invented,new plant (invented),count\n")
    setup.load_file(db, "species", new)
    with open(SEASONS / "season_2024.csv", newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    sheet = tmp_path / "season_2024_with_new.csv"
    with open(sheet, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow([*rows[0], "NEWSP:count"])
        for k, row in enumerate(rows[1:]):
            writer.writerow([*row, str(k % 3) if row[3] in ("done", "partial") else ""])
    import_records(db, sheet)


def test_a_one_season_species_is_too_short_to_call_and_the_rest_stand(db_url, tmp_path, capsys):
    _programme_with_a_new_species(db_url, tmp_path)
    fits = trend.fit_programme(db_url)
    assert {t.species for t in fits} == {"MARVIO", "CHAORC", "GLASED", "HEABEL", "SILGRA"}
    assert [(n.species, n.years) for n in fits.not_called] == [("NEWSP", (2024,))]
    assert fits.not_called[0].line().startswith("NEWSP (count): too short to call: data from 1 season (2024)")
    # the command: exit 0, the five trends, and the one line about NEWSP
    capsys.readouterr()
    assert main(["--db", db_url, "trend", "--json"]) == 0
    captured = capsys.readouterr()
    rows = json.loads(captured.out)
    assert len(rows) == 6 and [r["species"] for r in rows if r["call"] is None] == ["NEWSP"]
    assert "NEWSP (count): not fitted: too short to call: data from 1 season (2024)" in captured.err
    # the report: written, with the five species and NEWSP said to be too short to call
    folder = report.write_report(db_url, 2024, tmp_path / "report")
    doc = json.loads((folder / "report.json").read_text())
    assert {row["species"] for row in doc["summary"]} == {"MARVIO", "CHAORC", "GLASED", "HEABEL", "SILGRA"}
    assert [n["species"] for n in doc["not_called"]] == ["NEWSP"]
    assert "NEWSP (count): too short to call" in (folder / "index.html").read_text()
