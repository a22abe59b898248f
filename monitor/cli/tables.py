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
            # what the annual change is a change of (count, odds, odds of cover), the model's year effect
            # and the interval's reference (t df; blank for a normal reference)
            "change_of": getattr(r, "change_scale", None), "year_effect": getattr(r, "year_random", None),
            "interval_df": _finite(getattr(r, "slope_df", None)),
            **_level_columns(getattr(r, "level_change", None)),
            "fitted_at": None if getattr(t, "fitted_at", None) is None else t.fitted_at.isoformat(),
            "reused": bool(getattr(t, "reused", False)),
        })
    return pd.DataFrame(rows)


def _finite(x):
    return None if x is None or not math.isfinite(float(x)) else float(x)


def _level_columns(lc) -> dict:
    """The fitted trend on the measure's own scale, first and last year, and their difference."""
    if lc is None:
        return {"unit": None, "fitted_first": None, "fitted_last": None, "difference": None,
                "difference_lower": None, "difference_upper": None}
    return {"unit": lc.unit, "fitted_first": _finite(lc.first.estimate), "fitted_last": _finite(lc.last.estimate),
            "difference": _finite(lc.difference.estimate), "difference_lower": _finite(lc.difference.lower),
            "difference_upper": _finite(lc.difference.upper)}


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
