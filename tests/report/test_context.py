"""The report context: numbers carried faithfully from the fits, order, validation, JSON."""

from __future__ import annotations

import json
import math
from types import SimpleNamespace

import jinja2
import numpy as np
import pandas as pd
import pytest
from jinja2 import meta

from monitor import columns as C
from monitor.errors import InputError
from monitor.report import build_report_context, render_html
from monitor.report.render import environment, template_dir


def test_summary_numbers_are_the_fits_numbers(full_inputs, full_context):
    for row, ((species, measure), result) in zip(full_context.summary, full_inputs["trend_results"].items(),
                                                  strict=True):
        assert (row.species, row.measure) == (species, measure)
        assert row.annual_change.estimate == result.annual_change.estimate
        assert row.period_change.upper == result.period_change.upper
        assert row.call == result.call
        # printed with one decimal and a typographic minus (design notes: "-4.1 % a year (95 % CI ...)")
        expected = f"{abs(result.annual_change.estimate) * 100:.1f}%"
        assert expected in row.texts.annual_text


def test_period_change_is_compounded_annual_change(full_inputs):
    # monitor.trend.TrendResult: period_change = exp(slope * (last - first)) - 1, annual_change = exp(slope) - 1
    for result in full_inputs["trend_results"].values():
        first, last = result.years
        assert result.period_change.estimate == pytest.approx(
            (1 + result.annual_change.estimate) ** (last - first) - 1, rel=1e-9)


def test_fired_triggers_listed_first_and_flagged_in_summary(full_context):
    states = [o.fired for o in full_context.triggers]
    assert states == sorted(states, reverse=True)
    for outcome in full_context.triggers:
        row = next(r for r in full_context.summary if r.species == outcome.trigger.species)
        assert row.trigger_state == ("fired" if outcome.fired else "not fired")


def test_events_and_method_changes_become_marks(full_context):
    section = full_context.species[0]
    kinds = {(m.year, m.kind) for m in section.marks}
    assert (2018, "event") in kinds and (2021, "event") in kinds and (2020, "method") in kinds
    assert any("2020" in c and "method changed" in c for c in section.caveats)


def test_closed_quality_flags_are_dropped(full_context):
    assert [f.message for f in full_context.coverage.flags] == ["Count far above the station's previous maximum"]
    total = full_context.coverage.total
    assert (total.due, total.visited, total.missed, total.inaccessible) == (24, 21, 2, 1)


def test_accepts_any_object_with_the_trend_api_attributes():
    years = np.arange(2018, 2026)
    frame = pd.DataFrame({C.YEAR: years, "index": 0.97 ** (years - 2018), "lower": 0.9 ** (years - 2018),
                          "upper": np.ones(len(years))})
    fitted = pd.DataFrame({C.YEAR: years, "fit": 0.97 ** (years - 2018), "lower": 0.95 ** (years - 2018),
                           "upper": 0.99 ** (years - 2018)})
    result = SimpleNamespace(
        measure="count", family="negbin", n_obs=96, n_stations=12, n_sites=2, years=(2018, 2025), n_years=8,
        annual_change=SimpleNamespace(estimate=-0.03, lower=-0.05, upper=-0.01),
        period_change=SimpleNamespace(estimate=0.97**7 - 1, lower=0.95**7 - 1, upper=0.99**7 - 1),
        random_sd={"station": 0.4}, dispersion=1.5, indices=frame, fitted_trend=fitted, diagnostics=(),
        call="declining", call_reason="below zero", margin=0.01, converged=True,
    )
    context = build_report_context({"name": "P"}, 2025, {("X1", "count"): result})
    section = context.species[0]
    assert "fell by about 3% a year since 2018" in section.paragraph
    assert any("more than chance alone" in c for c in section.caveats)  # negbin size 1.5 < 2
    json.dumps(context.to_dict(), allow_nan=False)
    # the methods text names the random effects the fit actually had
    assert "random intercept for each station," in context.methods.paragraphs[0]
    with_site = SimpleNamespace(**dict(vars(result), random_sd={"station": 0.4, "site": 0.2}))
    context = build_report_context({"name": "P"}, 2025, {("X1", "count"): with_site})
    assert "station nested in its site" in context.methods.paragraphs[0]


def test_missing_columns_and_empty_results_are_input_errors(full_inputs):
    with pytest.raises(InputError, match="no trend results"):
        build_report_context({"name": "P"}, 2025, {})
    with pytest.raises(InputError, match="name"):
        build_report_context({}, 2025, full_inputs["trend_results"])
    bad = dict(full_inputs, coverage=pd.DataFrame({C.SITE: ["S1"], "due": [3]}))
    with pytest.raises(InputError, match="visited"):
        build_report_context(**bad)


def test_json_numbers_round_trip(full_context):
    data = json.loads(json.dumps(full_context.to_dict(), allow_nan=False))
    assert data["schema"] == "monitor.report/1"
    first = data["summary"][0]
    assert first["annual_change"]["estimate"] == full_context.summary[0].annual_change.estimate
    indices = data["species"][0]["indices"]
    assert [r["year"] for r in indices] == list(full_context.species[0].indices[C.YEAR])
    assert all(math.isfinite(r["index"]) for r in indices)


def test_every_template_name_is_defined(full_context):
    # Style rule 8: the environment uses StrictUndefined, so rendering the complete context (every optional
    # section present) fails on any name the templates use that the context lacks.
    env = environment()
    assert env.undefined is jinja2.StrictUndefined and env.autoescape is True
    html = render_html(full_context, {f.key: "data:image/png;base64," for s in full_context.species
                                      for f in s.figures})
    assert "Management triggers" in html and "Data coverage" in html and "What the design can detect" in html
    # the page's only top-level names are the ones render_html passes
    source = env.loader.get_source(env, "report/index.html")[0]
    assert meta.find_undeclared_variables(env.parse(source)) <= {"report", "images", "csp"}


def test_minimal_context_renders_without_optional_sections(full_inputs):
    minimal = build_report_context(full_inputs["programme_meta"], 2025, full_inputs["trend_results"])
    html = render_html(minimal, {f.key: "data:," for s in minimal.species for f in s.figures})
    assert "Data coverage" not in html and "This season" not in html
    assert "Cautions" in html and "Methods" in html


def test_strict_undefined_catches_a_missing_field(tmp_path, full_context):
    # The check above can fail: a template that names a field the context lacks raises.
    (tmp_path / "report").mkdir()
    (tmp_path / "report" / "index.html").write_text("{{ report.no_such_field }}")
    with pytest.raises(jinja2.UndefinedError):
        render_html(full_context, {}, tmp_path)
    assert (template_dir() / "report" / "index.html").is_file()
