"""The report in a real headless browser (Debian's chromium): loads, offline, accessible, prints.

CI needs the Debian package `chromium` (apt-get install -y chromium); without it these tests skip
and say so.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np
import pytest
from browser import INSTALL_HINT, chromium_path, console_lines, pdf_page_count, run
from lxml import html as lxml_html
from PIL import Image

from monitor.report import build_report_context, render_report

pytestmark = pytest.mark.skipif(chromium_path() is None, reason=INSTALL_HINT)


def test_page_loads_offline_without_console_messages(rendered, tmp_path):
    folder, context = rendered
    done = run(folder / "index.html", "--dump-dom")
    assert done.returncode == 0, done.stderr[-2000:]
    dom = lxml_html.fromstring(done.stdout)
    headings = [h.text_content() for h in dom.xpath("//section[contains(@class, 'species')]/h2")]
    assert len(headings) == len(context.species)
    assert all(img.get("alt") for img in dom.xpath("//img"))
    # the browser decoded every embedded figure (naturalWidth is not in the DOM dump; the count is)
    assert len(dom.xpath("//img[starts-with(@src, 'data:image/png;base64,')]")) == sum(
        len(s.figures) for s in context.species)
    assert console_lines(done.stderr) == [], "console errors or blocked requests"


def test_blocked_request_would_be_seen(rendered, tmp_path):
    # Positive control for the check above: the same page with an external image added makes chromium log
    # the Content-Security-Policy refusal, so a request attempted by our page could not pass unseen.
    folder, _context = rendered
    bait = tmp_path / "bait.html"
    text = (folder / "index.html").read_text()
    bait.write_text(text.replace("<main>", '<main><img alt="x" src="http://127.0.0.1:9/x.png">', 1))
    done = run(bait, "--dump-dom")
    assert any("Content Security Policy" in line for line in console_lines(done.stderr))


def test_screenshot_is_not_blank(rendered, tmp_path):
    folder, _context = rendered
    shot = tmp_path / "shot.png"
    run(folder / "index.html", "--window-size=1280,1600", f"--screenshot={shot}")
    image = Image.open(io.BytesIO(shot.read_bytes())).convert("RGB")
    assert image.size == (1280, 1600)
    pixels = np.asarray(image, float)
    ink = (pixels.mean(axis=2) < 180).mean()
    assert 0.01 < ink < 0.6           # text and tables, not an empty or a black page
    colours = len(np.unique(pixels.reshape(-1, 3)[::97], axis=0))
    assert colours > 20               # antialiased text plus the call colours


def _pdf_pages(context, tmp_path: Path, name: str) -> int:
    folder = render_report(context, tmp_path / name, dpi=40, svg=False)
    pdf = tmp_path / f"{name}.pdf"
    done = run(folder / "index.html", "--no-pdf-header-footer", f"--print-to-pdf={pdf}")
    assert pdf.exists(), done.stderr[-2000:]
    return pdf_page_count(pdf.read_bytes())


def test_print_gives_one_page_per_species(full_inputs, tmp_path):
    # Print CSS starts each species on a new page and keeps it on one A4 page, so adding two species
    # adds exactly two pages.  Same fits under new codes, so only the number of species differs.
    result_list = list(full_inputs["trend_results"].values())

    def context(n):
        results = {(f"SP{i}", "count"): result_list[i % len(result_list)] for i in range(n)}
        changes = {key: full_inputs["station_changes"][list(full_inputs["trend_results"])[0]] for key in results}
        return build_report_context(
            full_inputs["programme_meta"], 2025, results, stations=full_inputs["stations"],
            sites=full_inputs["sites"], station_changes=changes)

    two = _pdf_pages(context(2), tmp_path, "two")
    four = _pdf_pages(context(4), tmp_path, "four")
    assert four - two == 2
    assert two == 2 + 2   # front page (summary), one page per species, one closing page (methods, cautions)

