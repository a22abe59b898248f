"""The printed report: no text runs past the right margin of an A4 page (the summary table's trigger
column once did).  The PDF is written by WeasyPrint from the page's print stylesheet as ``monitor report``
writes it (``render_report(pdf=True)``), and every text run's right end is measured from the fonts' glyph
widths (tests/report/pdf_geometry.py, checked here against the old stylesheet that overflowed).
"""

from __future__ import annotations

import re
import shutil

import pytest
from pdf_geometry import text_runs

from monitor.report import render_report
from monitor.report.render import template_dir

MM = 72 / 25.4  # PDF points per millimetre (PDF 1.7, 8.3.2.3: 1/72 inch user space units)
# the lines of the print stylesheet that make the summary table wrap inside the page
WRAP_RULES = (
    "  .summary-table { font-size: 8pt; }\n",
    "  .summary-table tbody th { min-width: 0; }\n",
    "  .summary-table th, .summary-table td { padding: .25rem .3rem; }\n",
    "  .summary-table td.num, .summary-table td.call, .summary-table .trigger-fired { white-space: normal; }\n",
)


def _right_margin_mm(css: str) -> float:
    """The right page margin of ``@page { margin: top right ... }`` in report.css [mm]."""
    margin = re.search(r"@page\s*\{[^}]*?margin:\s*([^;]+);", css)[1].split()
    right = margin[1] if len(margin) > 1 else margin[0]
    assert right.endswith("mm"), right
    return float(right[:-2])


def _overflow(folder, limit_mm_from_right: float) -> list[tuple[int, float, float]]:
    """(page, right end of the text [pt], the limit [pt]) of every text run past the right margin."""
    from pypdf import PdfReader

    out = []
    for number, page in enumerate(PdfReader(str(folder / "report.pdf")).pages, start=1):
        limit = float(page.mediabox.width) - limit_mm_from_right * MM
        out += [(number, round(end, 1), round(limit, 1)) for _, end, _ in text_runs(page) if end > limit + 0.5]
    return out


@pytest.fixture(scope="module")
def margin_mm():
    return _right_margin_mm((template_dir() / "report" / "report.css").read_text(encoding="utf-8"))


def test_no_printed_text_lies_past_the_right_margin(full_context, tmp_path, margin_mm):
    folder = render_report(full_context, tmp_path / "r", dpi=40, svg=False, pdf=True)
    from pypdf import PdfReader

    first = PdfReader(str(folder / "report.pdf")).pages[0]
    assert abs(float(first.mediabox.width) - 210 * MM) < 1  # A4, 210 mm wide (ISO 216)
    text = first.extract_text()
    assert "Trend for each species and measure" in text  # the summary table is on the first page
    assert _overflow(folder, margin_mm) == []
    # the measure reaches the margin: the right-aligned "page n of m" ends on it
    runs = text_runs(first)
    assert max(end for _, end, _ in runs) == pytest.approx(float(first.mediabox.width) - margin_mm * MM, abs=1)


def test_the_check_sees_a_summary_table_running_off_the_page(full_context, tmp_path, margin_mm):
    # the stylesheet before the fix: the summary table's columns refused to wrap and ran past the edge
    templates = tmp_path / "templates"
    shutil.copytree(template_dir(), templates)
    css = templates / "report" / "report.css"
    text = css.read_text(encoding="utf-8")
    for rule in WRAP_RULES:
        assert rule in text
        text = text.replace(rule, "")
    css.write_text(text, encoding="utf-8")
    folder = render_report(full_context, tmp_path / "old", dpi=40, svg=False, pdf=True, templates=templates)
    overflow = _overflow(folder, margin_mm)
    assert overflow and overflow[0][0] == 1
