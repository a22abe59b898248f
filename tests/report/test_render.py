"""The report folder: files, atomic replacement, self-contained and escaped HTML."""

from __future__ import annotations

import json
import re

import pytest
from browser import pdf_page_count
from lxml import html as lxml_html
from report_testdata import HOSTILE_IMG, HOSTILE_SCRIPT

import monitor.report.render as render_module
from monitor.report import build_report_context, render_report


def test_folder_layout(rendered):
    folder, context = rendered
    assert (folder / "index.html").is_file() and (folder / "report.json").is_file()
    for section in context.species:
        for fig in section.figures:
            assert (folder / "figures" / f"{fig.key}.png").stat().st_size > 1000
            assert (folder / "figures" / f"{fig.key}.svg").read_bytes().startswith(b"<?xml")
    numbers = json.loads((folder / "report.json").read_text())
    assert numbers["season"] == 2025
    # nothing left over beside the folder
    assert sorted(p.name for p in folder.parent.iterdir()) == [folder.name]


def test_page_is_self_contained(rendered):
    folder, _context = rendered
    text = (folder / "index.html").read_text()
    # no network: no http(s) URL anywhere, and a CSP that allows only data: images and inline styles
    assert not re.search(r"https?://", text)
    doc = lxml_html.fromstring(text)
    csp = doc.xpath("//meta[@http-equiv='Content-Security-Policy']/@content")
    assert csp and "default-src 'none'" in csp[0] and "img-src data:" in csp[0]
    for element in doc.iter():
        for attribute in ("src", "href"):
            value = element.get(attribute)
            if value is not None:
                assert value.startswith(("data:image/png;base64,", "#")), value[:40]
    assert not doc.xpath("//script | //link | //iframe | //object")


def test_images_have_alt_text_and_tables_have_headers(rendered):
    folder, context = rendered
    doc = lxml_html.fromstring((folder / "index.html").read_text())
    images = doc.xpath("//img")
    assert len(images) == sum(len(s.figures) for s in context.species)
    assert all(len(img.get("alt", "").strip()) > 20 for img in images)
    tables = doc.xpath("//table")
    assert len(tables) >= 5
    for table in tables:
        assert table.xpath("./thead/tr/th[@scope='col']"), "every table has column headers"


def test_hostile_names_are_text(tmp_path, hostile_context):
    folder = render_report(hostile_context, tmp_path / "r", dpi=40, svg=False)
    text = (folder / "index.html").read_text()
    assert "<script" not in text.lower()

    doc = lxml_html.fromstring(text)
    assert not doc.xpath("//script")
    assert not doc.xpath("//*[@onerror]")
    assert all(img.get("src").startswith("data:image/png") for img in doc.xpath("//img"))
    body = doc.text_content()
    assert HOSTILE_SCRIPT in body and HOSTILE_IMG in body   # shown as text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text   # escaped by Jinja2's autoescape
    # file names are slugs, never the raw name
    assert all(re.fullmatch(r"[a-z0-9-]+\.png", p.name) for p in (folder / "figures").iterdir())


def test_rerender_replaces_folder_and_failure_keeps_the_old_one(tmp_path, full_inputs, monkeypatch):
    first = dict(list(full_inputs["trend_results"].items())[:1])
    small = build_report_context({"name": "P"}, 2025, first)  # one figure: quick to draw
    out = tmp_path / "report"
    out.mkdir()
    render_report(small, out, dpi=40, svg=False)
    render_report(small, out, dpi=40, svg=False)  # our own report is replaced; other folders: test_report_folder
    before = (out / "index.html").read_bytes()

    def broken(*args, **kwargs):
        raise RuntimeError("template failed")

    monkeypatch.setattr(render_module, "render_html", broken)
    with pytest.raises(RuntimeError):
        render_report(small, out, dpi=40, svg=False)
    assert (out / "index.html").read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report"]  # no partial folder left


def test_page_counter_counts_pages_not_page_trees():
    # ISO 32000-1 7.7.3: /Type /Pages is the page tree node, /Type /Page a page.
    fake = b"<< /Type /Pages /Kids [1 0 R 2 0 R] >> << /Type /Page >> << /Type/Page /Parent 3 0 R >>"
    assert pdf_page_count(fake) == 2
