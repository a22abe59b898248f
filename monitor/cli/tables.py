"""Tables meant for spreadsheets: every number in a column of its own (no "-6.3 (-10.8 to -1.6)" cells)."""

from __future__ import annotations

import math
from pathlib import Path

import click
import pandas as pd


def _pct(x: float | None) -> float | None:
    """A fraction as a percentage rounded to 0.01 (None for a missing or infinite value)."""
    if x is None or not math.isfinite(float(x)):
        return None
    return round(100.0 * float(x), 2)


def trend_number_rows(trends) -> pd.DataFrame:
    """One row per species and measure; the annual change and the change over the period each with its
    95% interval in columns of their own, in percent."""
    rows = []
    for t in trends:
        r = t.result
        ac, pc = r.annual_change, r.period_change
        rows.append({
            "species": t.species, "common_name": getattr(t, "common_name", None), "measure": t.measure,
            "area_kind": getattr(t, "area_kind", "all"), "area": getattr(t, "area", ""),
            "family": r.family, "stations": int(r.n_stations), "sites": int(r.n_sites),
            "first_year": int(r.years[0]), "last_year": int(r.years[1]), "seasons": int(r.n_years),
            "annual_change_pct": _pct(ac.estimate), "annual_change_lower_pct": _pct(ac.lower),
            "annual_change_upper_pct": _pct(ac.upper),
            "period_change_pct": _pct(pc.estimate), "period_change_lower_pct": _pct(pc.lower),
            "period_change_upper_pct": _pct(pc.upper),
            "margin_pct": _pct(r.margin), "call": r.call,
            "fitted_at": None if getattr(t, "fitted_at", None) is None else t.fitted_at.isoformat(),
            "reused": bool(getattr(t, "reused", False)),
        })
    return pd.DataFrame(rows)


def xlsx_option(func):
    """``--xlsx FILE``: also write the table(s) to an .xlsx workbook, one sheet per table."""
    return click.option("--xlsx", "xlsx", type=click.Path(dir_okay=False, path_type=Path), default=None,
                        help="Also write the table(s) to this .xlsx workbook (one sheet each).")(func)


def write_workbook(path: Path | None, sheets: dict[str, pd.DataFrame]) -> None:
    if path is None:
        return
    from monitor.cli.output import say
    from monitor.io.sheets import write_xlsx

    say(f"wrote {write_xlsx(path, {k: v if isinstance(v, pd.DataFrame) else pd.DataFrame(v) for k, v in sheets.items()})}")
