"""`monitor report` for one site and one species, with a station's repeat photos, writing its own PDF."""

from __future__ import annotations

import shutil

from PIL import Image

from monitor.cli.main import main


def test_report_for_one_site_and_species_with_photos_and_pdf(demo_db, tmp_path, capsys):
    from pypdf import PdfReader

    db = tmp_path / "copy.sqlite"
    shutil.copy(demo_db, db)
    for year, colour in ((2015, (120, 160, 90)), (2024, (90, 130, 60))):
        Image.new("RGB", (640, 480), colour).save(tmp_path / f"smt01-{year}.jpg")
        assert main(["records", "photo", "SM-T01", "--path", str(tmp_path / f"smt01-{year}.jpg"),
                     "--visit-date", _visit_date(db, year), "--bearing", "0",
                     "--db", str(db)]) == 0
    out = tmp_path / "report"
    assert main(["report", "2024", "--site", "SM", "--species", "MARVIO", "--out", str(out), "--db", str(db)]) == 0
    html = (out / "index.html").read_text()
    assert "This report covers site Stream Meadow (SM) and species MARVIO only" in html
    assert html.count('class="species ') == 1 and "marsh violetwort" in html
    assert "Chalk Bank" not in html            # no other site's rows
    assert "Repeat photos" in html and html.count("data:image/jpeg;base64,") == 2
    reader = PdfReader(str(out / "report.pdf"))
    n = len(reader.pages)
    assert all(f"page {i} of {n}" in " ".join(p.extract_text().split()) for i, p in enumerate(reader.pages, 1))
    capsys.readouterr()
    assert main(["report", "2024", "--site", "NOPE", "--out", str(tmp_path / "r2"), "--db", str(db)]) == 1
    assert "NOPE" in capsys.readouterr().err and not (tmp_path / "r2").exists()


def _visit_date(db, year: int) -> str:
    import sqlite3

    with sqlite3.connect(db) as con:
        (date,) = con.execute("SELECT v.date FROM visit v JOIN station t ON t.id = v.station_id "
                              "WHERE t.code = 'SM-T01' AND v.date LIKE ? ORDER BY v.date", (f"{year}-%",)).fetchone()
    return str(date)[:10]
