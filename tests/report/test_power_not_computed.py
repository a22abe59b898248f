"""A species whose detectable change could not be computed is said so in words, never "nan%"."""

from __future__ import annotations

import pandas as pd

from monitor import columns as C
from monitor.report import build_report_context, render_html


def test_power_row_without_a_number_says_why(full_inputs):
    inputs = dict(full_inputs)
    power = inputs["power"].copy()
    power["detectable_change"] = power["detectable_change"].astype(object)
    power.loc[0, "detectable_change"] = None
    power["note"] = ""
    power.loc[0, "note"] = ("the detectable change could not be computed: no steady change within 90 % a year "
                            "reaches that power with this design")
    inputs["power"] = pd.DataFrame(power)
    context = build_report_context(**inputs)
    species = power.loc[0, C.SPECIES]
    row = next(r for r in context.power if r.species == species)
    assert row.detectable_change is None
    assert row.text.startswith("The detectable change could not be computed: no steady change")
    assert row.to_dict()["detectable_change"] is None
    others = [r for r in context.power if r.species != species]
    assert others and all(r.detectable_change is not None and "would be detected" in r.text for r in others)
    html = render_html(context, {f.key: "data:," for s in context.species for f in s.figures})
    assert "nan%" not in html
    assert "could not be computed" in html and "not computed</td>" in html
