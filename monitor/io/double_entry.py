"""Double entry: two people key the same paper sheets; list every place where the two readings differ.

Nothing is decided here: each mismatch is resolved against the paper sheet before anything is stored.
"""

from __future__ import annotations

import math
import os

import pandas as pd

from monitor import columns as C
from monitor.io import headers as H
from monitor.io.records import FieldRecords, read_field_records

MISMATCH_COLUMNS = [C.STATION, C.DATE, C.SPECIES, "field", "value_a", "value_b", "row_a", "row_b"]
VISIT_FIELDS = [C.VISIT_STATUS, H.OBSERVERS, H.REPEAT, C.PROTOCOL, H.NOTES]


def _same(a: object, b: object) -> bool:
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    if a is None or (isinstance(a, float) and math.isnan(a)) or a is pd.NA:
        a = None
    if b is None or (isinstance(b, float) and math.isnan(b)) or b is pd.NA:
        b = None
    return a == b


def _shown(value: object) -> object:
    if isinstance(value, tuple):
        return ";".join(value)
    if value is pd.NA or (isinstance(value, float) and math.isnan(value)):
        return None
    return value


def compare_entries(a: FieldRecords | str | os.PathLike[str],
                    b: FieldRecords | str | os.PathLike[str]) -> pd.DataFrame:
    """Compare two independent keyings of the same sheets.

    Returns a DataFrame with one row per mismatch: station, date, species (None for visit fields and
    covariates), field (``status``, ``observers``, ..., ``<measure>`` for a value, ``<measure>:n``, or
    ``cov:<name>``), value_a, value_b (None where one keying has nothing), row_a, row_b.  Empty when
    the two agree.  Visits are matched on (station, date); values on (station, date, species, measure);
    covariates on (station, date, name).
    """
    ra = a if isinstance(a, FieldRecords) else read_field_records(a)
    rb = b if isinstance(b, FieldRecords) else read_field_records(b)
    out: list[dict] = []

    def add(station, date, species, field, va, vb, row_a, row_b):
        out.append({C.STATION: station, C.DATE: date, C.SPECIES: species, "field": field,
                    "value_a": _shown(va), "value_b": _shown(vb), "row_a": row_a, "row_b": row_b})

    va = {(r[C.STATION], r[C.DATE]): r for r in ra.visits.to_dict("records")}
    vb = {(r[C.STATION], r[C.DATE]): r for r in rb.visits.to_dict("records")}
    for key in sorted(set(va) | set(vb), key=lambda k: (str(k[0]), k[1])):
        x, y = va.get(key), vb.get(key)
        if x is None or y is None:
            add(*key, None, "visit", "present" if x else None, "present" if y else None,
                x and x[H.SOURCE_ROW], y and y[H.SOURCE_ROW])
            continue
        for name in VISIT_FIELDS:
            if not _same(x[name], y[name]):
                add(*key, None, name, x[name], y[name], x[H.SOURCE_ROW], y[H.SOURCE_ROW])

    def keyed(frame: pd.DataFrame, cols: list[str]) -> dict:
        return {tuple(r[c] for c in cols): r for r in frame.to_dict("records")}

    oa = keyed(ra.observations, [C.STATION, C.DATE, C.SPECIES, C.MEASURE])
    ob = keyed(rb.observations, [C.STATION, C.DATE, C.SPECIES, C.MEASURE])
    for key in sorted(set(oa) | set(ob), key=lambda k: (str(k[0]), k[1], str(k[2]), str(k[3]))):
        x, y = oa.get(key), ob.get(key)
        station, date, species, measure = key
        if x is None or y is None or not _same(float(x[H.VALUE]), float(y[H.VALUE])):
            add(station, date, species, measure, x and x[H.VALUE], y and y[H.VALUE],
                x and x[H.SOURCE_ROW], y and y[H.SOURCE_ROW])
        elif not _same(x[H.N], y[H.N]):
            add(station, date, species, f"{measure}:n", x[H.N], y[H.N], x[H.SOURCE_ROW], y[H.SOURCE_ROW])

    ca = keyed(ra.covariates, [C.STATION, C.DATE, "name"])
    cb = keyed(rb.covariates, [C.STATION, C.DATE, "name"])
    for key in sorted(set(ca) | set(cb), key=lambda k: (str(k[0]), k[1], str(k[2]))):
        x, y = ca.get(key), cb.get(key)
        station, date, name = key
        if x is None or y is None or not _same(x[H.VALUE], y[H.VALUE]) or not _same(x[H.UNIT], y[H.UNIT]):
            add(station, date, None, f"cov:{name}",
                x and (x[H.VALUE], x[H.UNIT]) and f"{x[H.VALUE]:g} [{x[H.UNIT] or ''}]",
                y and f"{y[H.VALUE]:g} [{y[H.UNIT] or ''}]", x and x[H.SOURCE_ROW], y and y[H.SOURCE_ROW])
    return pd.DataFrame(out, columns=MISMATCH_COLUMNS)
