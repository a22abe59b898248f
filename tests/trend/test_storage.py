"""Stored results read back bit for bit; documents that no longer fit the code are refused; fingerprints
change with any value."""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pandas as pd
import pytest

from monitor.errors import Diagnostic
from monitor.trend import Interval, TrendModel
from monitor.trend import storage


@pytest.fixture(scope="module")
def cbpp_fit(cbpp):
    # lme4's cbpp data (Lesnoff et al. 2004; exported by tests/fixtures/trend/reference_fits.R): herds as
    # stations, periods as years; the full fit (profile interval and yearly indices) as `monitor trend` makes it
    data = cbpp.rename(columns={"herd": "station", "period": "year", "incidence": "occupied", "size": "cells"})
    return TrendModel(data, "frequency", site_effect=False).fit(profile=True, indices=True)


def _assert_same(a, b):
    assert type(a) is type(b)
    for f in dataclasses.fields(a):
        x, y = getattr(a, f.name), getattr(b, f.name)
        if isinstance(x, pd.DataFrame):
            pd.testing.assert_frame_equal(x, y, check_exact=True)
        elif isinstance(x, pd.Series):
            pd.testing.assert_series_equal(x, y, check_exact=True)
        elif isinstance(x, float) and math.isnan(x):
            assert math.isnan(y)
        else:
            assert x == y, f.name


def test_a_real_fit_reads_back_bit_for_bit(cbpp_fit):
    text = storage.dumps_result(cbpp_fit)
    back = storage.loads_result(text)
    _assert_same(cbpp_fit, back)
    assert back.to_dict() == cbpp_fit.to_dict()
    assert json.loads(text)["schema"] == storage.RESULT_SCHEMA
    # the text is strict JSON (PostgreSQL's json type and other readers refuse NaN)
    json.loads(text, parse_constant=lambda c: pytest.fail(f"non-standard JSON constant {c}"))


def test_non_finite_numbers_and_nested_values_survive():
    value = {"interval": Interval(float("nan"), float("-inf"), float("inf")),
             "notes": (Diagnostic("x", "a note", "info"),), "array": np.arange(6, dtype=np.int64).reshape(2, 3),
             "frame": pd.DataFrame({"year": [2001, 2002], "index": [1.0, 0.1 + 0.2]}, index=[5, 9])}

    @dataclasses.dataclass(frozen=True)
    class Holder:
        value: dict

    holder = Holder(value)
    encoded = storage._encode(holder)
    # a class outside an importable monitor module is refused on the way back
    with pytest.raises(storage.StoredResultError):
        storage._decode(encoded)
    back = storage._decode(storage._encode(value))
    assert math.isnan(back["interval"].estimate) and back["interval"].lower == -math.inf
    assert back["notes"] == value["notes"]
    np.testing.assert_array_equal(back["array"], value["array"])
    assert back["array"].dtype == np.int64
    pd.testing.assert_frame_equal(back["frame"], value["frame"], check_exact=True)


def test_documents_that_no_longer_fit_the_code_are_refused(cbpp_fit):
    doc = json.loads(storage.dumps_result(cbpp_fit))
    extra = json.loads(json.dumps(doc))
    extra["result"]["fields"]["a_field_from_elsewhere"] = 1
    with pytest.raises(storage.StoredResultError, match="a_field_from_elsewhere"):
        storage.loads_result(json.dumps(extra))
    missing = json.loads(json.dumps(doc))
    del missing["result"]["fields"]["slope"]
    with pytest.raises(storage.StoredResultError, match="slope"):
        storage.loads_result(json.dumps(missing))
    other = json.loads(json.dumps(doc))
    other["schema"] = "monitor.fit-result/0"
    with pytest.raises(storage.StoredResultError, match="schema"):
        storage.loads_result(json.dumps(other))
    foreign = json.loads(json.dumps(doc))
    foreign["result"]["__dataclass__"] = "os:PathLike"
    with pytest.raises(storage.StoredResultError, match="outside monitor"):
        storage.loads_result(json.dumps(foreign))


def test_fingerprint_changes_with_any_value_row_or_column_but_not_column_order(cbpp):
    base = storage.data_fingerprint(cbpp)
    assert base == storage.data_fingerprint(cbpp.copy())
    assert base == storage.data_fingerprint(cbpp[list(reversed(cbpp.columns))])
    corrected = cbpp.copy()
    corrected.loc[3, "incidence"] += 1
    assert storage.data_fingerprint(corrected) != base
    assert storage.data_fingerprint(pd.concat([cbpp, cbpp.iloc[[0]]], ignore_index=True)) != base
    assert storage.data_fingerprint(cbpp.iloc[:-1]) != base
    assert storage.data_fingerprint(cbpp.assign(extra=1)) != base
    assert storage.data_fingerprint(cbpp.astype({"size": float})) != base


def test_engine_version_names_the_code_and_libraries():
    version = storage.engine_version()
    assert version == storage.engine_version()
    assert "trend " in version and f"numpy {np.__version__}" in version
