"""Every default of the margin of change that matters, and the trend minimums, come from monitor/settings.py.

A default written as a literal in two modules will one day disagree with itself (it did: 0.01 in the
trend and power stages, 0.02 in the programme record and the CLI).
"""

from __future__ import annotations

import dataclasses
import inspect
import math
import re

import pytest

from monitor import settings
from tests.conftest import REPO_ROOT


def _default(function, name):
    return inspect.signature(function).parameters[name].default


def test_every_margin_default_is_the_one_setting():
    from monitor.db import models
    from monitor.power import Scenario, detectable_change
    from monitor.services import power, trend
    from monitor.trend import DEFAULT_MARGIN, TrendModel

    expected = settings.DEFAULT_CHANGE_MARGIN
    assert DEFAULT_MARGIN == expected
    assert _default(TrendModel.__init__, "margin") == expected
    assert Scenario(annual_change=-0.05).margin == expected
    assert _default(detectable_change, "margin") == expected
    assert _default(power.power_study, "margin") == expected
    assert _default(trend.fit_table, "margin") == expected
    assert models.Programme.model_fields["change_margin"].default == expected


def test_a_programme_setting_overrides_the_default():
    assert settings.change_margin(None) == settings.DEFAULT_CHANGE_MARGIN
    assert settings.change_margin(float("nan")) == settings.DEFAULT_CHANGE_MARGIN
    assert settings.change_margin(0.05) == 0.05


def test_no_module_spells_a_margin_or_trend_minimum_literal():
    # a margin literal beside the word margin, or a five-year / ten-station literal in a comparison,
    # anywhere in the package but the settings module itself
    margin = re.compile(r"margin[^\n]{0,40}?\b0\.0[12]\b|\b0\.0[12]\b[^\n]{0,20}margin", re.IGNORECASE)
    minimum = re.compile(r"n_years\s*[<>]=?\s*5\b|n_st(ations)?\s*[<>]=?\s*10\b")
    offenders = []
    for path in (REPO_ROOT / "monitor").rglob("*.py"):
        if path.name == "settings.py" and path.parent.name == "monitor":
            continue
        for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
            if margin.search(line) or minimum.search(line):
                offenders.append(f"{path.relative_to(REPO_ROOT)}:{number}: {line.strip()}")
    assert offenders == []


def test_trend_minimums_are_the_settings():
    from monitor.design import MIN_STATIONS as DESIGN_MIN_STATIONS
    from monitor.trend import MIN_STATIONS, MIN_YEARS

    assert MIN_YEARS == settings.MIN_TREND_YEARS
    assert MIN_STATIONS == settings.MIN_TREND_STATIONS == DESIGN_MIN_STATIONS


# --- the one settings object ------------------------------------------------------------------------------


def _programme_json(tmp_path, settings_doc):
    import json

    from monitor.io.blank import programme_document

    doc = programme_document()
    doc["settings"] = settings_doc
    path = tmp_path / "programme.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


def test_every_settings_key_is_documented_and_loaded():
    from monitor.io import filespec as FS

    # docs/files.md is generated from FS.SETTINGS: the loader's keys are the page's keys
    assert tuple(f.name for f in FS.SETTINGS.fields) == settings.SETTINGS_KEYS
    loaded = set(settings.settings_field_names())
    assert set(settings.SETTINGS_KEYS + settings.STORED_KEYS) <= loaded | {"required_covariates"}
    # every attribute but the margin (a key of its own at the top of programme.json) comes from a key
    assert loaded - {"change_margin"} == set(settings.SETTINGS_KEYS + settings.STORED_KEYS)


def test_defaults_are_the_module_constants():
    loaded, problems = settings.parse_settings({}, file="programme.json")
    assert problems == []
    assert loaded == settings.ProgrammeSettings()
    assert loaded.change_margin == settings.DEFAULT_CHANGE_MARGIN
    assert loaded.generalise_m == settings.GENERALISE_M
    assert loaded.setup_minutes == settings.DEFAULT_SETUP_MINUTES
    assert loaded.time_zone == settings.DEFAULT_TIME_ZONE
    assert loaded.triggers == () and loaded.field_packs_for_outside_crews is False


def test_the_demo_settings_load_typed():
    import json

    doc = json.loads((REPO_ROOT / "demo_programme" / "programme.json").read_text(encoding="utf-8"))
    loaded, problems = settings.parse_settings(doc["settings"], file="programme.json",
                                               margin=doc.get("change_margin"))
    assert problems == []
    assert loaded.setup_minutes == float(doc["settings"]["setup_minutes"])
    assert dict(loaded.minutes_per_quadrat) == {k: float(v) for k, v in doc["settings"]["minutes_per_quadrat"].items()}
    assert [t.species for t in loaded.triggers] == [t["species"] for t in doc["settings"]["triggers"]]
    assert loaded.required_covariates == tuple(sorted(doc["settings"]["covariate_units"]))
    with pytest.raises(dataclasses.FrozenInstanceError):
        loaded.setup_minutes = 1.0  # type: ignore[misc]
    with pytest.raises(TypeError):
        loaded.minutes_per_quadrat["count"] = 1.0  # type: ignore[index]


@pytest.mark.parametrize("settings_doc,key,expected", [
    ({"generalise_m": -5}, "settings.generalise_m", "metres > 0"),
    ({"setup_minutes": "ten"}, "settings.setup_minutes", "minutes per station"),
    ({"minutes_per_quadrat": {"count": "six"}}, "settings.minutes_per_quadrat.count", "minutes >= 0"),
    ({"minutes_per_quadrat": {"height": 3}}, "settings.minutes_per_quadrat.height", "a measure"),
    ({"field_packs_for_outside_crews": "yes"}, "settings.field_packs_for_outside_crews", "true or false"),
    ({"covariate_units": ["%"]}, "settings.covariate_units", "an object"),
    ({"colour": "green"}, "settings.colour", "a known key"),
    ({"triggers": [{"species": "MARVIO", "measure": "count", "kind": "sideways", "threshold": 0.1,
                    "objective": "o", "response": "r"}]}, "settings.triggers[0].kind", "one of decline"),
    ({"triggers": [{"species": "MARVIO", "measure": "count", "kind": "decline", "threshold": 0.4,
                    "objective": "o", "response": "r"}]}, "settings.triggers[0].years", "whole number"),
    ({"triggers": [{"species": "MARVIO", "measure": "count", "kind": "decline", "threshold": 40, "years": 10,
                    "objective": "o", "response": "r"}]}, "settings.triggers[0].threshold", "between 0 and 1"),
    ({"triggers": [{"species": "MARVIO", "kind": "decline", "threshold": 0.4, "years": 10,
                    "objective": "o", "response": "r"}]}, "settings.triggers[0].measure", "required"),
])
def test_a_bad_setting_is_refused_naming_file_key_and_expectation(tmp_path, settings_doc, key, expected):
    from monitor.errors import InputError
    from monitor.io.settings import read_programme_json

    with pytest.raises(InputError) as err:
        read_programme_json(_programme_json(tmp_path, settings_doc))
    line = str(err.value)
    assert "\n" not in line.strip()
    assert "programme.json" in line and f"'{key}'" in line and expected in line


def test_stored_settings_are_checked_when_used():
    # the services read a stored programme's settings through programme_settings: a bad stored value is an
    # error naming the programme and key (it used to fall back to a default in one service and not another)
    from types import SimpleNamespace

    from monitor.errors import InputError

    good = SimpleNamespace(code="HVR", change_margin=0.05,
                           settings_json='{"generalise_m": 500, "time_zone": "Europe/London"}')
    loaded = settings.programme_settings(good)
    assert (loaded.generalise_m, loaded.time_zone, loaded.change_margin) == (500.0, "Europe/London", 0.05)
    for text, key in (('{"generalise_m": "far"}', "settings.generalise_m"), ("{not json", "settings_json"),
                      ('{"time_zone": "Mars/Olympus"}', "settings.time_zone")):
        with pytest.raises(InputError, match=re.escape(f"'{key}'")) as err:
            settings.programme_settings(SimpleNamespace(code="HVR", change_margin=0.02, settings_json=text))
        assert "programme HVR" in str(err.value)
    with pytest.raises(InputError, match="change_margin"):
        settings.programme_settings(SimpleNamespace(code="HVR", change_margin=1.5, settings_json="{}"))


def test_only_the_settings_module_parses_stored_settings():
    # one reader: no other module decodes programme.settings_json (the set-up loader and the migrations write it)
    writers = {"monitor/settings.py", "monitor/services/setup.py", "monitor/db/models.py"}
    offenders = [str(p.relative_to(REPO_ROOT)) for p in (REPO_ROOT / "monitor").rglob("*.py")
                 if "settings_json" in p.read_text(encoding="utf-8")
                 and str(p.relative_to(REPO_ROOT)) not in writers]
    assert offenders == []


def test_the_year_effect_rule_is_the_settings():
    from monitor.power.model import Design
    from monitor.power.study import analysis_df
    from monitor.trend.glmm import default_year_effect

    for n in range(2, 9):
        expected = n >= settings.MIN_YEAR_EFFECT_YEARS
        assert default_year_effect(n) is settings.year_effect_by_default(n) is expected
        # the power study's approximation judges the engine's slope on t(n - 2) exactly where it fits one
        df = analysis_df("trend", Design(n_stations=20, n_years=n), None)
        assert df == (n - 2 if expected else math.inf)


def test_few_quadrats_is_one_setting():
    from monitor.estimate import FEW_QUADRATS
    from monitor.report.context import ReportContext
    from monitor.report.wording import few_quadrats_note

    assert FEW_QUADRATS == settings.FEW_QUADRATS
    assert ReportContext.__dataclass_fields__["few_quadrats_threshold"].default == settings.FEW_QUADRATS
    assert f"Fewer than {settings.FEW_QUADRATS} quadrats" in few_quadrats_note()
    # no module or template spells the threshold as a literal beside the word quadrats
    literal = re.compile(rf"\b{settings.FEW_QUADRATS} quadrats|\bn\W* < {settings.FEW_QUADRATS}\b")
    offenders = [str(p.relative_to(REPO_ROOT)) for folder in ("monitor", "templates")
                 for p in (REPO_ROOT / folder).rglob("*.*") if p.suffix in (".py", ".html")
                 and p.name != "settings.py" and literal.search(p.read_text(encoding="utf-8"))]
    assert offenders == []
