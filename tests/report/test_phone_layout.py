"""The report's page at phone width (390 px, a phone held upright) and at desktop width (1280 px), in
Debian's chromium driven by Playwright: no table runs out of its container and the page never scrolls
sideways.  The summary and estimates tables become one labelled block per row on a phone; any other
table may scroll sideways inside itself (``overflow-x: auto``), with its caption kept inside the view.
"""

from __future__ import annotations

import pytest

from tests.web.live import browser, chromium_path

pytestmark = [pytest.mark.browser,
              pytest.mark.skipif(chromium_path() is None, reason="no chromium installed (.ci/run installs it)")]

PHONE = {"width": 390, "height": 844}
DESKTOP = {"width": 1280, "height": 900}
# every table: its box against its container's, its own scroll width, whether it scrolls deliberately,
# and its caption's right edge
MEASURE = """() => [...document.querySelectorAll('table')].map(t => {
  const box = t.getBoundingClientRect(), parent = t.parentElement.getBoundingClientRect();
  const style = getComputedStyle(t), caption = t.querySelector('caption');
  return {name: t.className || (caption ? caption.textContent.slice(0, 30) : 'table'),
          left: box.left, right: box.right, parentLeft: parent.left, parentRight: parent.right,
          scrollWidth: t.scrollWidth, clientWidth: t.clientWidth,
          scrolls: ['auto', 'scroll'].includes(style.overflowX) && style.display === 'block',
          captionRight: caption ? caption.getBoundingClientRect().right : 0};
})"""
# the phone rules switched off: the summary table laid out as a table again
TABLE_AGAIN = ("table.cards { display: table !important; width: auto !important; }"
               ".cards thead { display: table-header-group !important; }"
               ".cards tbody { display: table-row-group !important; width: auto !important; }"
               ".cards tr { display: table-row !important; width: auto !important; }"
               ".cards th, .cards td { display: table-cell !important; width: auto !important; }"
               ".cards caption { display: table-caption !important; width: auto !important; }")


@pytest.fixture(scope="module")
def chromium():
    with browser() as b:
        yield b


def _tables(chromium, folder, viewport, style: str | None = None):
    context = chromium.new_context(viewport=viewport, bypass_csp=True)
    try:
        page = context.new_page()
        page.goto((folder / "index.html").as_uri())
        if style:
            page.add_style_tag(content=style)
        return page.evaluate(MEASURE), page.evaluate("() => document.documentElement.scrollWidth")
    finally:
        context.close()


def _overflowing(tables, width):
    bad = []
    for t in tables:
        outside = t["right"] > t["parentRight"] + 0.5 or t["left"] < t["parentLeft"] - 0.5
        if outside or (t["scrollWidth"] > t["clientWidth"] + 1 and not t["scrolls"]) or t["captionRight"] > width:
            bad.append(t)
    return bad


@pytest.mark.parametrize("viewport", [PHONE, DESKTOP], ids=["phone-390", "desktop-1280"])
def test_no_table_overflows_its_container(chromium, rendered, viewport):
    folder, context = rendered
    tables, page_width = _tables(chromium, folder, viewport)
    assert len(tables) >= 3  # summary, estimates, coverage at least
    assert _overflowing(tables, viewport["width"]) == []
    assert page_width <= viewport["width"]  # the page itself never scrolls sideways
    by_name = {t["name"]: t for t in tables}
    for name in ("summary-table cards", "estimates-table cards"):  # these never need scrolling
        assert by_name[name]["scrollWidth"] <= by_name[name]["clientWidth"] + 1


def test_the_check_sees_the_summary_table_cut_off_without_the_phone_rules(chromium, rendered):
    folder, _context = rendered
    tables, _ = _tables(chromium, folder, PHONE, style=TABLE_AGAIN)
    assert "summary-table cards" in {t["name"] for t in _overflowing(tables, PHONE["width"])}
