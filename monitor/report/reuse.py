"""Figures of the report a new report replaces, reused when what they show has not changed.

Drawing is most of a report's time once the trends come from stored fits (about a second a figure, two
figures a species).  Each figure's file name in a report folder's marker (``.monitor-report``) carries the
digest of what was drawn: the plotting function, every argument it was given (tables value by value,
with their columns and types), the resolution, the plotting code (``figures.py``) and matplotlib's
version, with the SHA-256 of the PNG and SVG written.  A report written into the same folder again draws
only the figures whose digest differs, and takes the others' bytes from the folder it replaces, after
checking them against the recorded SHA-256 (a file edited or damaged since is drawn again).
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
from collections.abc import Callable, Mapping
from pathlib import Path

import matplotlib
import numpy as np
import pandas as pd

from monitor.report import figures as _figures

#: changes whenever the digest's recipe changes (a digest of another recipe never matches)
RECIPE = "monitor.figure-digest/1"


class NotDigestible(TypeError):
    """An argument of a kind the digest does not know: that figure is drawn, never reused."""


def _code_version() -> bytes:
    return hashlib.sha256(Path(_figures.__file__).read_bytes()).digest() + matplotlib.__version__.encode()


def _feed(h, value: object) -> None:
    """Feed a canonical form of ``value`` to the hash ``h`` (type-tagged, so 1, 1.0 and "1" differ)."""
    if value is None or isinstance(value, (bool, int, float, str, np.generic)):
        h.update(f"{type(value).__name__}:{value!r};".encode())
    elif isinstance(value, pd.DataFrame):
        h.update(f"frame{value.shape};".encode())
        _feed(h, value.index)
        for column in value.columns:
            _feed(h, column)
            _feed(h, value[column])
    elif isinstance(value, pd.Series):
        h.update(f"series:{value.name!r}:{value.dtype};".encode())
        _feed(h, value.index)
        _values(h, value.to_numpy())
    elif isinstance(value, pd.Index):
        h.update(f"index:{type(value).__name__}:{value.dtype}:{len(value)};".encode())
        if isinstance(value, pd.RangeIndex):
            h.update(f"{value.start},{value.stop},{value.step};".encode())
        else:
            _values(h, value.to_numpy())
    elif isinstance(value, np.ndarray):
        h.update(f"array:{value.shape};".encode())
        _values(h, value)
    elif dataclasses.is_dataclass(value) and not isinstance(value, type):
        h.update(f"dataclass:{type(value).__module__}.{type(value).__qualname__};".encode())
        for f in dataclasses.fields(value):
            _feed(h, f.name)
            _feed(h, getattr(value, f.name))
    elif isinstance(value, Mapping):
        h.update(f"mapping:{len(value)};".encode())
        for k, v in value.items():
            _feed(h, k)
            _feed(h, v)
    elif isinstance(value, (list, tuple)):
        h.update(f"{type(value).__name__}:{len(value)};".encode())
        for v in value:
            _feed(h, v)
    elif hasattr(value, "wkb") and hasattr(value, "geom_type"):  # a shapely geometry (site outlines)
        h.update(b"geometry:" + bytes(value.wkb) + b";")
    else:
        raise NotDigestible(type(value).__name__)


def _values(h, array: np.ndarray) -> None:
    h.update(f"{array.dtype};".encode())
    if array.dtype.kind in "biufcmM":
        h.update(np.ascontiguousarray(array).tobytes())
    else:  # text and mixed columns value by value, each with its type
        for v in array.tolist():
            _feed(h, v)


def digest(function: Callable, args: tuple, kwargs: dict, *, dpi: int, svg: bool) -> str | None:
    """The digest of one figure: what is drawn and how; None when an argument cannot be digested."""
    h = hashlib.sha256(RECIPE.encode())
    h.update(_code_version())
    h.update(f"{function.__module__}.{function.__qualname__};dpi={dpi};svg={svg};".encode())
    try:
        _feed(h, args)
        _feed(h, sorted(kwargs.items()))
    except NotDigestible:
        return None
    return h.hexdigest()


def record(digest_: str, png: bytes, svg: bytes | None) -> dict:
    """What the marker records of a figure written: its digest and the SHA-256 of its files."""
    return {"digest": digest_, "png_sha256": hashlib.sha256(png).hexdigest(),
            "svg_sha256": hashlib.sha256(svg).hexdigest() if svg is not None else None}


def reusable(folder: Path, marker: str, figures_dir: str) -> dict[str, tuple[str, bytes, bytes | None]]:
    """The figures of the report in ``folder`` that can be reused: figure key -> (digest, PNG, SVG).

    Only figures the marker records with a digest, whose files are present and unchanged since; anything
    unreadable or unexpected is simply drawn again.
    """
    folder = Path(folder)
    try:
        recorded = json.loads((folder / marker).read_text(encoding="utf-8")).get("figures", {})
    except (OSError, ValueError, AttributeError):
        return {}
    if not isinstance(recorded, dict):
        return {}
    out = {}
    for key, entry in recorded.items():
        if not isinstance(key, str) or Path(key).name != key or key in ("", ".", ".."):
            continue
        try:
            png = (folder / figures_dir / f"{key}.png").read_bytes()
            if hashlib.sha256(png).hexdigest() != entry["png_sha256"]:
                continue
            svg = None
            if entry.get("svg_sha256"):
                svg = (folder / figures_dir / f"{key}.svg").read_bytes()
                if hashlib.sha256(svg).hexdigest() != entry["svg_sha256"]:
                    continue
            out[key] = (str(entry["digest"]), png, svg)
        except (OSError, KeyError, TypeError, AttributeError):
            continue
    return out
