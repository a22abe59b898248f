"""Fitted trends as stored assets: a versioned JSON form of any result, the engine's version, and the
fingerprint of the exact data a fit was made from.

The JSON form is generic: every field of the result dataclass is written by its type (numbers, text,
tuples, mappings, numpy arrays, pandas Series and DataFrames, nested dataclasses such as ``Interval``
and ``Diagnostic``), so a field added to ``TrendResult`` is stored and read back without a change here.
Floats are written with Python's shortest round-trip representation (``repr``), non-finite values
tagged, and column dtypes kept, so a stored result reads back bit for bit equal to the fitted one.

Reading refuses (``StoredResultError``) a document of another schema, a class outside ``monitor``, or a
document that lacks a field the class now requires or holds one it no longer has: the caller then
refits rather than guessing.
"""

from __future__ import annotations

import dataclasses
import hashlib
import importlib
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd

from monitor.errors import MonitorError

RESULT_SCHEMA = "monitor.fit-result/1"
#: modules whose dataclasses a stored document may name (never an arbitrary import path)
_TRUSTED_PREFIX = "monitor."


class StoredResultError(MonitorError):
    """A stored result cannot be read back as the current result class (so it must be refitted)."""


# --------------------------------------------------------------------------- writing
def _encode(value: object) -> object:
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        number = float(value)
        return number if math.isfinite(number) else {"__float__": repr(number)}
    if isinstance(value, pd.DataFrame):
        return {"__frame__": {
            "columns": [_encode(c) for c in value.columns],
            "dtypes": [str(t) for t in value.dtypes],
            "data": [[_encode(v) for v in value[c].tolist()] for c in value.columns],
            "index": _encode_index(value.index),
        }}
    if isinstance(value, pd.Series):
        return {"__series__": {"name": _encode(value.name), "dtype": str(value.dtype),
                               "values": [_encode(v) for v in value.tolist()], "index": _encode_index(value.index)}}
    if isinstance(value, np.ndarray):
        return {"__array__": {"dtype": str(value.dtype), "shape": list(value.shape),
                              "values": [_encode(v) for v in value.ravel().tolist()]}}
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        cls = type(value)
        return {"__dataclass__": f"{cls.__module__}:{cls.__qualname__}",
                "fields": {f.name: _encode(getattr(value, f.name)) for f in dataclasses.fields(value)}}
    if isinstance(value, tuple):
        return {"__tuple__": [_encode(v) for v in value]}
    if isinstance(value, list):
        return [_encode(v) for v in value]
    if isinstance(value, dict):
        return {"__dict__": [[_encode(k), _encode(v)] for k, v in value.items()]}
    raise TypeError(f"cannot store a value of type {type(value).__name__} in a fit result")


def _encode_index(index: pd.Index) -> object:
    if isinstance(index, pd.RangeIndex) and index.start == 0 and index.step == 1 and index.name is None:
        return None
    return {"name": _encode(index.name), "dtype": str(index.dtype), "values": [_encode(v) for v in index.tolist()]}


def dumps_result(result: object) -> str:
    """The versioned JSON text of a result dataclass (``TrendResult`` or any other)."""
    if not dataclasses.is_dataclass(result):
        raise TypeError("only a result dataclass can be stored")
    return json.dumps({"schema": RESULT_SCHEMA, "result": _encode(result)}, allow_nan=False,
                      separators=(",", ":"))


# --------------------------------------------------------------------------- reading
def _decode(value: object) -> object:
    if isinstance(value, list):
        return [_decode(v) for v in value]
    if not isinstance(value, dict):
        return value
    if "__float__" in value:
        return float(value["__float__"])
    if "__tuple__" in value:
        return tuple(_decode(v) for v in value["__tuple__"])
    if "__dict__" in value:
        return {_decode(k): _decode(v) for k, v in value["__dict__"]}
    if "__array__" in value:
        a = value["__array__"]
        return np.array([_decode(v) for v in a["values"]], dtype=a["dtype"]).reshape(a["shape"])
    if "__series__" in value:
        s = value["__series__"]
        return pd.Series([_decode(v) for v in s["values"]], dtype=s["dtype"], name=_decode(s["name"]),
                         index=_decode_index(s["index"], len(s["values"])))
    if "__frame__" in value:
        f = value["__frame__"]
        n = len(f["data"][0]) if f["data"] else _index_length(f["index"])
        columns = [_decode(c) for c in f["columns"]]
        data = {i: pd.Series([_decode(v) for v in col], dtype=dtype)
                for i, (col, dtype) in enumerate(zip(f["data"], f["dtypes"], strict=True))}
        frame = pd.DataFrame(data, index=pd.RangeIndex(n))
        frame.columns = pd.Index(columns) if columns else pd.RangeIndex(0)
        frame.index = _decode_index(f["index"], n)
        return frame
    if "__dataclass__" in value:
        return _decode_dataclass(value["__dataclass__"], value["fields"])
    raise StoredResultError(f"unknown stored value {sorted(value)}")


def _index_length(index: object) -> int:
    return 0 if index is None else len(index["values"])  # type: ignore[index]


def _decode_index(index: object, n: int) -> pd.Index:
    if index is None:
        return pd.RangeIndex(n)
    return pd.Index([_decode(v) for v in index["values"]], dtype=index["dtype"], name=_decode(index["name"]))  # type: ignore[index]


def _decode_dataclass(path: str, fields: dict) -> object:
    module_name, _, qualname = path.partition(":")
    if not module_name.startswith(_TRUSTED_PREFIX) and module_name != "monitor":
        raise StoredResultError(f"a stored result names {path}, outside monitor")
    try:
        cls = importlib.import_module(module_name)
        for part in qualname.split("."):
            cls = getattr(cls, part)
    except (ImportError, AttributeError) as exc:
        raise StoredResultError(f"the stored result's class {path} no longer exists") from exc
    if not dataclasses.is_dataclass(cls):
        raise StoredResultError(f"{path} is not a result class")
    known = {f.name: f for f in dataclasses.fields(cls)}
    extra = sorted(set(fields) - set(known))
    if extra:
        raise StoredResultError(f"the stored {qualname} has fields the current code lacks: {', '.join(extra)}")
    missing = [name for name, f in known.items() if name not in fields and f.init
               and f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING]
    if missing:
        raise StoredResultError(f"the stored {qualname} lacks fields the current code needs: {', '.join(missing)}")
    values = {name: _decode(v) for name, v in fields.items()}
    obj = cls(**{k: v for k, v in values.items() if known[k].init})
    for name, v in values.items():
        if not known[name].init:
            object.__setattr__(obj, name, v)
    return obj


def loads_result(text: str) -> object:
    """Read back what :func:`dumps_result` wrote; raises StoredResultError when it no longer fits the code."""
    try:
        doc = json.loads(text)
    except (TypeError, json.JSONDecodeError) as exc:
        raise StoredResultError(f"a stored result is not JSON ({exc})") from exc
    if not isinstance(doc, dict) or doc.get("schema") != RESULT_SCHEMA:
        raise StoredResultError(f"a stored result of schema {doc.get('schema') if isinstance(doc, dict) else '?'}, "
                                f"expected {RESULT_SCHEMA}")
    try:
        return _decode(doc["result"])
    except (KeyError, TypeError, ValueError) as exc:
        raise StoredResultError(f"a stored result cannot be read ({exc})") from exc


# --------------------------------------------------------------------------- identity of a fit
def engine_version() -> str:
    """The version of the code that makes a fit: the package version, a hash of the trend engine's sources,
    and the numerical libraries' versions.

    Any edit to ``monitor/trend`` (engine, model, families, call rules) gives another version, so a stored
    fit is reused only by exactly the code that made it.
    """
    import scipy

    from monitor import __version__

    h = hashlib.sha256()
    for path in sorted(Path(__file__).parent.glob("*.py")):
        h.update(path.name.encode())
        h.update(path.read_bytes())
    return f"monitor {__version__}; trend {h.hexdigest()[:16]}; numpy {np.__version__}; scipy {scipy.__version__}"


def data_fingerprint(frame: pd.DataFrame) -> str:
    """SHA-256 of the exact table a fit is made from: its columns, their dtypes and every value, row by row.

    Any change to a value (a correction), a row (a late sheet, a removed visit) or a column gives another
    fingerprint.  Column order does not matter; row order does (the queries sort).
    """
    columns = sorted(frame.columns, key=str)
    h = hashlib.sha256()
    h.update(json.dumps([[str(c), str(frame[c].dtype)] for c in columns]).encode())
    h.update(str(len(frame)).encode())
    if len(frame):
        rows = pd.util.hash_pandas_object(frame[columns], index=False)
        h.update(rows.to_numpy().tobytes())
    return h.hexdigest()


def spec_hash(spec: dict) -> str:
    """SHA-256 of a model specification written as sorted JSON."""
    return hashlib.sha256(json.dumps(spec, sort_keys=True, default=str).encode()).hexdigest()
