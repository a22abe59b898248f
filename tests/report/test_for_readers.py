"""The report as its readers meet it: numbers to sensible figures, words without slips, notes where
they apply, maps that read, one interval throughout, a PDF with page numbers, a page that fits a phone."""

from __future__ import annotations

import dataclasses
import io
import math

import numpy as np
import pandas as pd
import pytest

from monitor import columns as C
from monitor.report import build_report_context, plot_station_map, render_html, render_report
from monitor.report.figures import nice_length
from monitor.report.wording import decline_advice, detectable_fall_sentence, plain_measures, season_label, significant


# --- numbers ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("value,text", [
    (6.41e-05, "0.000064"), (3.0, "3"), (37, "37"), (0.625, "0.62"), (13.4, "13"), (1458141, "1,500,000"),
    (29200, "29,000"), (0.0, "0"), (-0.0473, "-0.047"), (999, "1,000"), (99, "99"), (1.0, "1"),
])
def test_two_significant_figures(value, text):
    # rounding to significant figures, Python's round (half to even): common practice
    assert significant(value, 2) == text
    assert "e" not in significant(value, 2)


def _estimates_context(full_inputs, rows, site_names=None):
    kwargs = dict(full_inputs)
    kwargs["estimates"] = pd.DataFrame(rows)
    return build_report_context(**kwargs, site_names=site_names or {})


def test_estimates_are_rounded_named_and_cautioned(full_inputs):
    sp = next(iter(full_inputs["trend_results"]))[0]
    rows = [
        {C.SPECIES: sp, C.MEASURE: "count", C.SITE: "S1", "quantity": "density", "estimate": 6.41e-05,
         "lower": 1.07e-05, "upper": 1.5e-04, "n_stations": 8},
        {C.SPECIES: sp, C.MEASURE: "count", C.SITE: "S1", "quantity": "total", "estimate": 3.0,
         "lower": 5.0, "upper": 70700.4, "n_stations": 8, "counted": 5},
        {C.SPECIES: sp, C.MEASURE: "count", C.SITE: "S2", "quantity": "density", "estimate": 13.4,
         "lower": 8.25, "upper": 18.5, "n_stations": 17},
    ]
    ctx = _estimates_context(full_inputs, rows, {"S1": "Reed Bed", "S2": "Alder Carr"})
    density, total, big = ctx.estimates
    assert density.estimate_text == "0.64 per ha" and density.interval_text == "0.11 to 1.5 per ha"
    assert total.estimate_text == "3" and total.interval_text == "5 to 71,000"
    assert any("5 plants counted" in n for n in total.notes)     # why the lower bound is what was counted
    assert density.few_quadrats and not big.few_quadrats
    assert big.estimate_text == "13 per m²" and big.interval_text == "8.2 to 18 per m²"
    html = render_html(ctx, {k.key: "data:image/png;base64," for s in ctx.species for k in s.figures})
    assert "Reed Bed" in html and "Alder Carr" in html and "e-05" not in html and "3.00" not in html
    assert "Fewer than 10 quadrats" in html


def test_words_without_slips(full_inputs):
    ctx = build_report_context(**full_inputs, software={"monitor": "0.1.0"})
    html = render_html(ctx, {k.key: "data:image/png;base64," for s in ctx.species for k in s.figures})
    assert "Fired. Fired" not in html and "Fired: " not in html
    assert "fall of -" not in html and "fall of −" not in html
    names = [name for name, _version in ctx.methods.software]
    assert len(names) == len(set(names))                        # the software listed once
    assert detectable_fall_sentence(-0.054, 0.8, 20, 10).startswith("A fall of 5.4% a year")
    assert season_label(2016.0) == "2016" and season_label("2016") == "2016"
    assert plain_measures("pin_hits 0 against a typical 3") == "pin hits 0 against a typical 3"
    flags = build_report_context(**{**full_inputs, "quality_flags": [
        {C.STATION: "Q1", C.YEAR: 2016.0, "message": "pin_hits 0 against 3", "status": "open"}]}).coverage.flags
    assert flags[0].year == "2016" and "pin hits" in flags[0].message


def test_upper_bound_trigger_is_explained_by_its_bound(full_inputs):
    ctx = build_report_context(**full_inputs)
    bound = [o for o in ctx.triggers if o.trigger.kind == "upper_bound_below"]
    assert bound
    for outcome in bound:
        assert "upper 95% bound" in outcome.status
        assert outcome.state_label in ("Fired", "Not fired", "Not fired, approaching")


def test_a_decline_without_a_fired_trigger_gets_advice():
    assert "agree a threshold" in decline_advice("Herba", C.CALL_DECLINING, -0.05, -0.01, has_trigger=False)
    assert "before it does" in decline_advice("Herba", C.CALL_DECLINING, -0.05, -0.01, has_trigger=True)
    assert decline_advice("Herba", C.CALL_RISING, 0.05, 0.08, has_trigger=False) is None
    assert decline_advice("Herba", C.CALL_UNCLEAR, -0.01, 0.02, has_trigger=False, margin=0.02) is None


def test_declining_species_section_carries_advice(full_inputs):
    ctx = build_report_context(**{**full_inputs, "triggers": []})
    for section in ctx.species:
        if section.summary.call == C.CALL_DECLINING:
            assert section.advice and "declining" in section.advice


def test_events_and_protocol_notes_only_where_they_apply(full_inputs):
    key = next(iter(full_inputs["trend_results"]))
    changes = full_inputs["station_changes"][key]
    stations = full_inputs["stations"]
    sites_of_species = set(stations.loc[stations[C.STATION].isin(changes[C.STATION]), C.SITE])
    elsewhere = "NOWHERE"
    inputs = {**full_inputs,
              "events": pd.DataFrame({C.YEAR: [2018, 2019], "kind": ["grazing", "burning"],
                                      C.SITE: [sorted(sites_of_species)[0], elsewhere]}),
              "method_changes": pd.DataFrame({C.YEAR: [2020, 2021], "kind": ["protocol", "protocol"],
                                              "description": ["grid re-strung", "new pin frame"],
                                              "measures": ["frequency", "count"]})}
    section = build_report_context(**inputs).species[0]
    labels = {(m.year, m.label) for m in section.marks}
    assert (2018, "grazing") in labels and (2019, "burning") not in labels
    assert (2021, "protocol") in labels and (2020, "protocol") not in labels
    assert not any("grid re-strung" in c for c in section.caveats)
    assert any("new pin frame" in c for c in section.caveats)


def test_one_interval_for_the_headline_the_call_and_the_triggers(full_inputs):
    key, result = next(iter(full_inputs["trend_results"].items()))
    profile = type(result.annual_change)(result.annual_change.estimate, result.annual_change.lower - 0.004,
                                         result.annual_change.upper + 0.003)
    with_profile = dataclasses.replace(result, annual_change_profile=profile) if dataclasses.is_dataclass(result) \
        else result
    if with_profile is result:
        pytest.skip("test double is not a dataclass")
    ctx = build_report_context(**{**full_inputs, "trend_results": {key: with_profile}})
    row = ctx.summary[0]
    assert row.annual_change.lower == pytest.approx(profile.lower)
    assert row.annual_change.upper == pytest.approx(profile.upper)
    span = row.last_year - row.first_year
    assert row.period_change.lower == pytest.approx(math.expm1(math.log1p(profile.lower) * span))
    # the method, then the reference it rests on (t with year-based df when the model has a year effect)
    assert ctx.species[0].interval_method == f"profile likelihood ({with_profile.interval_label})"
    for outcome in ctx.triggers:
        if outcome.trigger.kind == "upper_bound_below" and outcome.trigger.species == key[0]:
            assert outcome.observed == pytest.approx(profile.upper)


# --- maps ---------------------------------------------------------------------------------------------
def test_map_has_scale_bar_north_arrow_and_two_kinds_of_blank(full_inputs):
    from matplotlib.offsetbox import AnchoredOffsetbox

    key = next(iter(full_inputs["trend_results"]))
    stations = full_inputs["stations"]
    changes = full_inputs["station_changes"][key].copy()
    changes = changes.iloc[2:].copy()
    changes.loc[changes.index[:2], "annual_change"] = np.nan   # in the model, too few years
    fig = plot_station_map(stations, changes, full_inputs["sites"])
    ax = fig.axes[0]
    assert any(isinstance(a, AnchoredOffsetbox) for a in ax.artists)          # the scale bar
    assert any(t.get_text() == "N" for t in ax.texts)                           # the north arrow
    labels = [t.get_text() for legend in fig.legends for t in legend.get_texts()]
    assert "Too few years" in labels and "Never recorded here" in labels
    fig.canvas.draw()
    boxes = [t.get_window_extent() for t in ax.get_xticklabels() if t.get_text() and t.get_visible()]
    for a, b in zip(boxes, boxes[1:]):
        assert a.x1 < b.x0                                                      # easting labels apart
    site_labels = [t for t in ax.texts if t.get_text() in full_inputs["sites"]]
    points = ax.transData.transform(stations[[C.X, C.Y]].to_numpy(float))
    for t in site_labels:
        box = t.get_window_extent()
        inside = (points[:, 0] > box.x0) & (points[:, 0] < box.x1) & (points[:, 1] > box.y0) & (points[:, 1] < box.y1)
        assert not inside.any(), f"a station under the label {t.get_text()}"
    import matplotlib.pyplot as plt

    plt.close(fig)


def test_scale_bar_lengths_are_round():
    assert nice_length(800) == 200 and nice_length(4000) == 1000 and nice_length(90) == 20


# --- print ----------------------------------------------------------------------------------------------
def test_pdf_reads_back_with_page_numbers(full_inputs, tmp_path):
    """WeasyPrint writes report.pdf; pypdf reads it back: every page says "page n of m"."""
    from pypdf import PdfReader

    ctx = build_report_context(**full_inputs)
    folder = render_report(ctx, tmp_path / "r", dpi=40, svg=False, pdf=True)
    reader = PdfReader(io.BytesIO((folder / "report.pdf").read_bytes()))
    pages = len(reader.pages)
    assert pages >= 1 + len(ctx.species)
    for number, page in enumerate(reader.pages, start=1):
        text = " ".join(page.extract_text().split())
        assert f"page {number} of {pages}" in text
    whole = " ".join(" ".join(p.extract_text() for p in reader.pages).split())
    assert ctx.species[0].summary.species_name in whole and "At a glance" in whole


def test_captions_stay_with_their_tables(full_inputs, tmp_path):
    """In the PDF, a table's caption is never the last line of a page."""
    from pypdf import PdfReader

    ctx = build_report_context(**full_inputs)
    folder = render_report(ctx, tmp_path / "r", dpi=40, svg=False, pdf=True)
    reader = PdfReader(str(folder / "report.pdf"))
    captions = ("Trend for each species and measure", "Estimates for", "Stations due, visited",
                "Triggers set in advance", "Smallest steady fall")
    for page in reader.pages:
        lines = [line.strip() for line in page.extract_text().splitlines() if line.strip()]
        body = [line for line in lines if not line.startswith("page ") and "monitoring report" not in line]
        if body:
            assert not any(body[-1].startswith(c) for c in captions), body[-1]


def test_summary_table_fits_a_phone(rendered, tmp_path):
    """At 390 px (a phone held upright) the summary table is not cut off and the page does not scroll
    sideways.  Headless chromium's window is at least 500 px wide, so the page is measured inside a
    390 px frame (a copy of the page without its script-blocking policy)."""
    import html
    import re

    from browser import chromium_path, run

    if chromium_path() is None:
        pytest.skip("chromium not installed (apt-get install -y chromium)")
    folder, _context = rendered
    text = (folder / "index.html").read_text()
    text = text.replace('<meta http-equiv="Content-Security-Policy"', '<meta name="x-policy-removed"', 1)
    wrapper = (
        "<!doctype html><html><body style='margin:0'><iframe id=f style='border:0' width=390 height=844 srcdoc=\""
        + html.escape(text, quote=True) + "\"></iframe><script>document.getElementById('f').addEventListener("
        "'load', () => { const d = document.getElementById('f').contentDocument;"
        "const t = d.querySelector('.summary-table');"
        "document.body.dataset.m = [d.documentElement.clientWidth, d.documentElement.scrollWidth,"
        "Math.ceil(t.getBoundingClientRect().right)].join(' '); });</script></body></html>")
    page = tmp_path / "phone.html"
    page.write_text(wrapper)
    done = run(page, "--window-size=800,900", "--dump-dom")
    viewport, page_width, table_right = (int(v) for v in re.search(r'data-m="([^"]+)"', done.stdout)[1].split())
    assert viewport <= 390
    assert table_right <= viewport
    assert page_width <= viewport
