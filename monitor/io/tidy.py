"""Tidy CSV export of visits, observations and covariates (one observation per row, one variable per column).

CSV per RFC 4180 (Shafranovich 2005): comma separated, CRLF line ends, fields quoted only when they
hold a comma, quote or line break, UTF-8 without a byte-order mark.  Missing values are empty cells
and missed or inaccessible visits have no observation rows (missing is never written as zero).
"""

from __future__ import annotations

import os
from pathlib import Path

import pandas as pd

from monitor import columns as C
from monitor.io import headers as H

TIDY_VISIT_COLUMNS = [C.STATION, C.DATE, C.YEAR, H.OBSERVERS, C.VISIT_STATUS, H.REPEAT, C.PROTOCOL, H.NOTES]
TIDY_OBSERVATION_COLUMNS = [C.STATION, C.DATE, C.YEAR, C.SPECIES, C.MEASURE, H.VALUE, H.N]
TIDY_COVARIATE_COLUMNS = [C.STATION, C.DATE, C.YEAR, "name", H.UNIT, H.VALUE]


def _iso(value: object) -> str:
    return value.isoformat() if hasattr(value, "isoformat") else str(value)


def _number(value: object) -> str:
    if value is None or value is pd.NA or (isinstance(value, float) and value != value):
        return ""
    value = float(value)
    return str(int(value)) if value.is_integer() else repr(value)


def tidy_frames(visits: pd.DataFrame, observations: pd.DataFrame,
                covariates: pd.DataFrame | None = None) -> dict[str, pd.DataFrame]:
    """The three tidy tables as string-valued DataFrames, exactly as :func:`write_tidy_csv` writes them."""
    v = pd.DataFrame({
        C.STATION: visits[C.STATION].astype(str),
        C.DATE: visits[C.DATE].map(_iso),
        C.YEAR: visits[C.DATE].map(lambda d: str(d.year)),
        H.OBSERVERS: visits[H.OBSERVERS].map(lambda o: ";".join(o) if isinstance(o, (tuple, list)) else (o or "")),
        C.VISIT_STATUS: visits[C.VISIT_STATUS].astype(str),
        H.REPEAT: visits[H.REPEAT].map(lambda r: "yes" if bool(r) else "no"),
        C.PROTOCOL: visits[C.PROTOCOL].map(lambda p: "" if p is None or p != p else str(p)),
        H.NOTES: visits[H.NOTES].map(lambda p: "" if p is None or p != p else str(p)),
    }, columns=TIDY_VISIT_COLUMNS)
    with_values = {(s, d) for s, d, st in zip(visits[C.STATION], visits[C.DATE], visits[C.VISIT_STATUS], strict=True)
                   if st in C.STATUSES_WITH_VALUES}
    keep = [(s, d) in with_values for s, d in zip(observations[C.STATION], observations[C.DATE], strict=True)]
    obs = observations[keep] if len(observations) else observations
    o = pd.DataFrame({
        C.STATION: obs[C.STATION].astype(str), C.DATE: obs[C.DATE].map(_iso),
        C.YEAR: obs[C.DATE].map(lambda d: str(d.year)), C.SPECIES: obs[C.SPECIES].astype(str),
        C.MEASURE: obs[C.MEASURE].astype(str), H.VALUE: obs[H.VALUE].map(_number), H.N: obs[H.N].map(_number),
    }, columns=TIDY_OBSERVATION_COLUMNS)
    out = {"visits": v, "observations": o}
    if covariates is not None:
        out["covariates"] = pd.DataFrame({
            C.STATION: covariates[C.STATION].astype(str), C.DATE: covariates[C.DATE].map(_iso),
            C.YEAR: covariates[C.DATE].map(lambda d: str(d.year)), "name": covariates["name"].astype(str),
            H.UNIT: covariates[H.UNIT].map(lambda u: "" if u is None or u != u else str(u)),
            H.VALUE: covariates[H.VALUE].map(_number),
        }, columns=TIDY_COVARIATE_COLUMNS)
    return out


def write_tidy_csv(visits: pd.DataFrame, observations: pd.DataFrame, directory: str | os.PathLike[str], *,
                   covariates: pd.DataFrame | None = None) -> dict[str, Path]:
    """Write visits.csv, observations.csv (and covariates.csv) into ``directory``; return their paths.

    Observations of missed or inaccessible visits are never written (they should not exist).
    """
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    paths = {}
    for name, frame in tidy_frames(visits, observations, covariates).items():
        path = directory / f"{name}.csv"
        frame.to_csv(path, index=False, lineterminator="\r\n", encoding="utf-8")
        paths[name] = path
    return paths
