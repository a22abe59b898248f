"""One way out: tables, JSON or CSV on stdout; messages and progress on stderr; errors to exit codes."""

from __future__ import annotations

import dataclasses
import datetime as dt
import json
import math
import sys
from collections.abc import Iterable, Sequence
from typing import Any

import click
import numpy as np
import pandas as pd

FORMATS = ("table", "json", "csv")


def format_option(func):
    """``--json`` / ``--csv`` switches shared by every listing or analysis command."""
    func = click.option("--csv", "as_csv", is_flag=True, help="Print comma-separated values.")(func)
    func = click.option("--json", "as_json", is_flag=True, help="Print JSON.")(func)
    return func


def chosen_format(as_json: bool, as_csv: bool) -> str:
    if as_json and as_csv:
        raise click.UsageError("choose one of --json and --csv")
    return "json" if as_json else "csv" if as_csv else "table"


def _plain(value: Any) -> Any:
    """Make a value JSON-ready (numpy scalars, dates, NaN -> null, dataclasses, frames)."""
    if isinstance(value, pd.DataFrame):
        return [_plain(r) for r in value.to_dict(orient="records")]
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        if hasattr(value, "to_dict"):
            return _plain(value.to_dict())
        return _plain(dataclasses.asdict(value))
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, set)):
        return [_plain(v) for v in value]
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating, float)):
        f = float(value)
        return None if math.isnan(f) or math.isinf(f) else f
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, (dt.date, dt.datetime, pd.Timestamp)):
        return value.isoformat()
    if value is pd.NaT or (value is not None and not isinstance(value, (str, bytes)) and pd.isna(value) is True):
        return None
    return value


def to_json(data: Any) -> str:
    return json.dumps(_plain(data), indent=2, ensure_ascii=False)


# columns whose numbers are identifiers or coordinates: printed without thousands separators
PLAIN_NUMBER_COLUMNS = frozenset({"x", "y", "year", "season", "crs_epsg", "epsg", "start_year", "base_x", "base_y",
                                  "easting", "northing"})


def _cell(value: Any, plain: bool = False) -> str:
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    value = _plain(value)
    if value is None:
        return ""
    if isinstance(value, float):
        if value.is_integer() and abs(value) < 1e15:
            return f"{int(value):,}" if abs(value) >= 10_000 and not plain else str(int(value))
        if plain:
            return f"{value:.2f}"
        return f"{value:,.1f}" if abs(value) >= 1000 else f"{value:.4g}"
    if isinstance(value, (list, dict)):
        return json.dumps(value, ensure_ascii=False)
    return str(value)


def table_text(rows: Sequence[dict[str, Any]] | pd.DataFrame, columns: Sequence[str] | None = None) -> str:
    """A plain fixed-width table with a header rule."""
    if isinstance(rows, pd.DataFrame):
        frame = rows
    else:
        frame = pd.DataFrame(list(rows))
    if columns is not None:
        frame = frame[list(columns)]
    if frame.empty:
        return "(none)"
    header = [str(c) for c in frame.columns]
    plain = [str(c) in PLAIN_NUMBER_COLUMNS for c in frame.columns]
    body = [[_cell(v, p) for v, p in zip(row, plain, strict=True)]
            for row in frame.itertuples(index=False, name=None)]
    widths = [max(len(h), *(len(r[i]) for r in body)) for i, h in enumerate(header)]
    lines = ["  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True)).rstrip()]
    lines.append("  ".join("-" * w for w in widths))
    for r in body:
        lines.append("  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip())
    return "\n".join(lines)


def emit(data: Any, fmt: str = "table", *, columns: Sequence[str] | None = None, title: str | None = None) -> None:
    """Print data once, in the chosen format, on stdout."""
    if fmt == "json":
        click.echo(to_json(data))
        return
    if isinstance(data, dict) and not isinstance(data, pd.DataFrame):
        rows: Iterable[dict[str, Any]] | pd.DataFrame = [{"field": k, "value": v} for k, v in data.items()]
    else:
        rows = data
    if fmt == "csv":
        frame = rows if isinstance(rows, pd.DataFrame) else pd.DataFrame(list(rows))
        if columns is not None:
            frame = frame[list(columns)]
        click.echo(frame.to_csv(index=False), nl=False)
        return
    if title:
        click.echo(title)
    click.echo(table_text(rows if isinstance(rows, pd.DataFrame) else list(rows), columns))


def say(message: str) -> None:
    """A message for the person at the terminal (stderr, so stdout stays clean data)."""
    click.echo(message, err=True)


class _Silent:
    """Stands in for a progress bar when stderr is not a terminal."""

    length = 0
    pos = 0

    def __enter__(self):
        return self

    def __exit__(self, *_exc) -> None:
        return None

    def update(self, n: int) -> None:
        self.pos += n


def progress(total: int, label: str):
    """A progress bar on a terminal, silent when stderr is piped."""
    if not sys.stderr.isatty():
        return _Silent()
    return click.progressbar(length=total, label=label, file=sys.stderr, show_eta=True)
