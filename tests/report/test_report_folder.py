"""The report never deletes what it did not write (a user's notes and photos in the output folder)."""

from __future__ import annotations

import json

import pytest

from monitor.cli.main import main
from monitor.errors import InputError
from monitor.report import render_report
from monitor.report.render import MARKER


def test_the_report_refuses_to_clear_a_folder_it_did_not_write(tmp_path, full_context, capsys):
    folder = tmp_path / "notes"
    folder.mkdir()
    (folder / "notes.txt").write_text("site visit notes, keep")
    (folder / "photo.jpg").write_bytes(b"\xff\xd8\xff not really a photo")
    with pytest.raises(InputError) as caught:
        render_report(full_context, folder, dpi=30, svg=False)
    assert "holds files monitor did not write (notes.txt, photo.jpg)" in str(caught.value)
    assert sorted(p.name for p in folder.iterdir()) == ["notes.txt", "photo.jpg"]
    assert (folder / "notes.txt").read_text() == "site visit notes, keep"
    # and through the command line, before any fitting: exit 1, one line, the folder untouched
    db = str(tmp_path / "empty.sqlite")
    assert main(["--db", db, "init"]) == 0
    capsys.readouterr()
    code = main(["--db", db, "report", "2024", "--out", str(folder)])
    err = capsys.readouterr().err
    assert code == 1
    assert err.count("\n") == 1 and "field '--out'" in err and "notes.txt" in err
    assert sorted(p.name for p in folder.iterdir()) == ["notes.txt", "photo.jpg"]


def test_a_report_of_ours_is_replaced_and_files_a_user_added_stay(tmp_path, full_context):
    folder = render_report(full_context, tmp_path / "report", dpi=30, svg=False)
    marker = json.loads((folder / MARKER).read_text())
    assert "index.html" in marker["files"] and "report.json" in marker["files"]
    (folder / "my_notes.txt").write_text("mine")
    stale = folder / "figures" / "old_species_map.png"
    stale.write_bytes(b"x")  # not ours: listed nowhere, so kept
    render_report(full_context, folder, dpi=30, svg=False)
    assert (folder / "my_notes.txt").read_text() == "mine"
    assert stale.exists()
    assert (folder / "index.html").is_file()
    # a folder holding only an earlier report with no marker (written before the marker existed) is ours
    (folder / "my_notes.txt").unlink()
    stale.unlink()
    (folder / MARKER).unlink()
    render_report(full_context, folder, dpi=30, svg=False)
    assert (folder / MARKER).is_file()


def test_an_empty_folder_or_a_new_one_is_fine_and_a_file_is_refused(tmp_path, full_context):
    (tmp_path / "empty").mkdir()
    assert (render_report(full_context, tmp_path / "empty", dpi=30, svg=False) / "index.html").is_file()
    target = tmp_path / "a_file"
    target.write_text("keep")
    with pytest.raises(InputError):
        render_report(full_context, target, dpi=30, svg=False)
    assert target.read_text() == "keep"
