"""The offline phone sheet's data: the importer's value rules, the entry sheet's columns, nothing from a second
copy; and a page that needs no network."""

from __future__ import annotations

import json
import re

from monitor import columns as C
from monitor.measures import VALUE_RULES
from monitor.schedule import fieldpack
from monitor.schedule.fieldpack import BASE_HEADERS, phone_sheet_fields

TARGETS = [("MARVIO", "count", None), ("GLASED", "cover", None), ("HEABEL", "frequency", 25),
           ("SILGRA", "pin_hits", 10), ("ORCPRE", "presence", None)]


def test_fields_carry_the_importers_rule_for_each_measure_and_the_programmes_grid_and_frame():
    fields = phone_sheet_fields(TARGETS, [("soil_moisture", "%")])
    assert [f["header"] for f in fields] == list(
        fieldpack.field_sheet_columns(TARGETS, [("soil_moisture", "%")])[len(BASE_HEADERS):])
    for f, (_sp, measure, n) in zip(fields, TARGETS, strict=False):
        assert f["rule"] == VALUE_RULES[measure].to_dict()  # the same object the importer checks with
        assert f["n"] == n
    by_measure = {f["measure"]: f for f in fields if f["kind"] == "value"}
    assert by_measure[C.MEASURE_COVER]["rule"]["maximum"] == 100 and not by_measure[C.MEASURE_COVER]["whole"]
    assert by_measure[C.MEASURE_COUNT]["whole"] and by_measure[C.MEASURE_COUNT]["rule"]["maximum"] is None
    assert by_measure[C.MEASURE_FREQUENCY]["rule"]["up_to_n"] and "n = 25" in by_measure[C.MEASURE_FREQUENCY]["hint"]
    assert "n = 10" in by_measure[C.MEASURE_PIN_HITS]["hint"]
    assert fields[-1] == {"kind": "covariate", "header": "cov:soil_moisture[%]", "species": None, "measure": None,
                          "n": None, "label": "soil_moisture [%]", "hint": "", "whole": False, "rule": None,
                          "zero": False}


def test_every_measure_has_a_rule_and_the_importer_words_it_the_same():
    import datetime as dt

    import pandas as pd

    from monitor.io import headers as H
    from monitor.io.validate import Reference, validate_records

    assert set(VALUE_RULES) == set(C.MEASURES)
    bad = {C.MEASURE_COUNT: 2.5, C.MEASURE_COVER: 101.0, C.MEASURE_FREQUENCY: 26.0, C.MEASURE_PIN_HITS: 11.0,
           C.MEASURE_PRESENCE: 2.0, C.MEASURE_SHOOT_HEIGHT: 0.0}
    assert set(bad) == set(C.MEASURES), "a bad value for every measure in the registry"
    ns = {C.MEASURE_FREQUENCY: 25, C.MEASURE_PIN_HITS: 10}
    for measure, value in bad.items():
        day = dt.date(2020, 6, 1)
        visits = pd.DataFrame({C.STATION: ["Q1"], C.DATE: [day], C.YEAR: [2020], H.OBSERVERS: [("A",)],
                               C.VISIT_STATUS: ["done"], H.REPEAT: [False], C.PROTOCOL: [None], H.NOTES: [None],
                               H.SOURCE_ROW: [2]})
        obs = pd.DataFrame({C.STATION: ["Q1"], C.DATE: [day], C.SPECIES: ["SP"], C.MEASURE: [measure],
                            H.VALUE: [value], H.N: pd.array([ns.get(measure)], dtype="Int64"),
                            H.SOURCE_FIELD: ["SP"], H.SOURCE_ROW: [2]})
        ref = Reference(stations=pd.DataFrame({C.STATION: ["Q1"], H.RETIRED: [None]}),
                        species=pd.DataFrame({C.SPECIES: ["SP"], C.MEASURE: [measure],
                                              H.N: pd.array([ns.get(measure)], dtype="Int64")}),
                        today=dt.date(2030, 1, 1))
        problems = validate_records(visits, obs, pd.DataFrame(columns=[C.STATION, C.DATE, "name", H.UNIT, H.VALUE]),
                                    ref, file="t.csv")
        expected = VALUE_RULES[measure].wording(ns.get(measure))
        assert [p.expected for p in problems if p.severity == "error"] == [expected], measure


def test_the_page_is_self_contained_and_names_are_data_not_markup(tmp_path):
    import datetime as dt

    import pandas as pd

    from monitor.schedule.planner import SeasonPlan, TeamDay

    hostile = '</script><script>alert(1)</script>'
    day = dt.date(2027, 6, 15)
    td = TeamDay(team="T1", date=day, site="SM", members=("OBS01", "OBS02"), start=(0.0, 0.0),
                 stations=("Q1", "Q2"), route_m=100.0, start_time=dt.time(9), end_time=dt.time(15))
    visits = pd.DataFrame({C.STATION: ["Q1", "Q2"], "team": ["T1", "T1"], C.DATE: [day, day], "order": [1, 2],
                           "arrival": [None, None]})
    plan = SeasonPlan(year=2027, seed=1, visits=visits, team_days=(td,), held_back=pd.DataFrame(),
                      unplanned=pd.DataFrame(), extra_team_days=0, site_order=("SM",), params={})
    stations = pd.DataFrame({C.STATION: ["Q1", "Q2"], C.X: [500000.0, 500010.0], C.Y: [5740000.0, 5740010.0],
                             fieldpack.RELOCATION: [hostile, ""]})
    context = fieldpack.field_sheet_context(plan, "T1", day, stations, crs=32630, targets=TARGETS,
                                            programme=hostile)
    html = fieldpack.render_phone_sheet(context, TARGETS)
    assert html.count("<script") == 2  # the data block and the page's own script, nothing from the names
    assert "alert(1)</script>" not in html
    data = json.loads(re.search(r'<script type="application/json" id="sheet-data">(.*?)</script>', html, re.S).group(1))
    assert data["stations"][0]["relocation"] == hostile and data["headers"] == list(context.headers)
    # no address of anything outside the file: it works with no signal
    assert not re.search(r"(src|href)\s*=\s*[\"']?(https?:)?//", html)
    assert "connect-src 'none'" in html
    assert "textContent" in html and "innerHTML" not in html
