"""Shared helpers for ``monitor.estimate``: result base class, validation, quantiles."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterable
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from monitor.errors import Diagnostic, EstimationError
# below this many quadrats an estimate carries a "few_quadrats" warning (one default: monitor/settings.py)
from monitor.settings import FEW_QUADRATS as FEW_QUADRATS



def _plain(value: Any) -> Any:
    """Turn a result field into something ``json.dumps`` accepts."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        if hasattr(value, "to_dict"):
            return value.to_dict()
        return {f.name: _plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating, float)):
        value = float(value)
        return value if math.isfinite(value) else None
    return value


class Result:
    """Mixin for frozen result dataclasses: JSON-ready ``to_dict``."""

    def to_dict(self) -> dict[str, Any]:
        """Return the result as plain Python (numbers, strings, lists, dicts), ready for JSON."""
        return {f.name: _plain(getattr(self, f.name)) for f in dataclasses.fields(self)}  # type: ignore[arg-type]


def t_quantile(confidence: float, df: float) -> float:
    """Two-sided Student t quantile ``t_{1-(1-confidence)/2, df}``."""
    check_confidence(confidence)
    if not df > 0:
        raise EstimationError(f"need at least 1 degree of freedom for a t interval, got {df}")
    return float(stats.t.ppf(0.5 + confidence / 2.0, df))


def z_quantile(confidence: float) -> float:
    """Two-sided standard normal quantile."""
    check_confidence(confidence)
    return float(stats.norm.ppf(0.5 + confidence / 2.0))


def check_confidence(confidence: float) -> None:
    if not (isinstance(confidence, (int, float)) and 0.0 < float(confidence) < 1.0):
        raise EstimationError(f"confidence must be a fraction between 0 and 1 (e.g. 0.95), got {confidence!r}")


def require_columns(frame: pd.DataFrame, columns: Iterable[str], what: str) -> None:
    if not isinstance(frame, pd.DataFrame):
        raise EstimationError(f"{what} must be a pandas DataFrame, got {type(frame).__name__}")
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise EstimationError(f"{what} lacks column(s) {', '.join(repr(c) for c in missing)}")


def numeric_column(frame: pd.DataFrame, column: str, what: str) -> np.ndarray:
    """Column as float array; missing or non-numeric values raise a clear error."""
    values = pd.to_numeric(frame[column], errors="coerce").to_numpy(dtype=float)
    bad = ~np.isfinite(values)
    if bad.any():
        rows = np.flatnonzero(bad)[:5].tolist()
        raise EstimationError(
            f"{what}: column '{column}' has missing or non-numeric values (rows {rows}); "
            "drop missed visits before estimating (missing is not zero)"
        )
    return values


def check_nonnegative(values: np.ndarray, column: str, what: str) -> None:
    if (values < 0).any():
        raise EstimationError(f"{what}: column '{column}' has negative values")


def check_positive_area(area: float | None, what: str) -> float:
    if area is None or not np.isfinite(area) or area <= 0:
        raise EstimationError(f"{what} has no area (got {area!r}); an area in m^2 > 0 is needed")
    return float(area)


def require_n(n: int, minimum: int, what: str) -> None:
    if n < minimum:
        raise EstimationError(f"{what}: need at least {minimum} quadrats for an interval, got {n}")


def few_quadrats(n: int, what: str = "estimate") -> tuple[Diagnostic, ...]:
    """The few-quadrats warning (below ``FEW_QUADRATS``; common practice)."""
    if n < FEW_QUADRATS:
        return (
            Diagnostic(
                "few_quadrats",
                f"The {what} rests on {n} quadrats (fewer than {FEW_QUADRATS}); "
                "its interval is wide and depends on the data being near-normal.",
            ),
        )
    return ()
