"""The fits behind a report (when each was made, reused or made for it) and the trends by area.

Rows are built from plain values (the trend result and where it came from), so the report stage
never sees the database.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from dataclasses import dataclass

from monitor.report.wording import CALL_LABEL, MEASURE_LABEL, rate_with_interval

AREA_WORD = {"all": "whole programme", "site": "site", "stratum": "stratum", "region": "region"}


@dataclass(frozen=True)
class FittedEntry:
    """One fit shown in a report, as the service hands it over."""

    species: str
    species_name: str
    measure: str
    area_kind: str          # all, site, stratum or region
    area: str               # code, "" for the whole programme
    result: object          # TrendResult-like: call, annual_change, n_stations, years
    fitted_at: dt.datetime | None
    reused: bool


@dataclass(frozen=True)
class FitRow:
    """One line of the report's table of fits (and of the table of trends by area)."""

    species: str
    species_name: str
    measure: str
    measure_label: str
    area_kind: str
    area: str
    area_label: str
    call: str
    call_label: str
    annual_text: str
    n_stations: int
    years_text: str
    fitted_text: str
    reused: bool

    def to_dict(self) -> dict:
        return {"species": self.species, "measure": self.measure, "area_kind": self.area_kind, "area": self.area,
                "call": self.call, "n_stations": self.n_stations, "fitted": self.fitted_text,
                "reused": self.reused}


def _when(stamp: dt.datetime | None) -> str:
    if stamp is None:
        return "fitted for this report, not stored"
    if stamp.tzinfo is None:
        stamp = stamp.replace(tzinfo=dt.UTC)
    return stamp.astimezone(dt.UTC).strftime("%Y-%m-%d %H:%M UTC")


def fit_rows(entries: Sequence[FittedEntry]) -> tuple[FitRow, ...]:
    """A row per fit, in the order given."""
    rows = []
    for e in entries:
        r = e.result
        ac = r.annual_change  # type: ignore[attr-defined]
        rows.append(FitRow(
            species=e.species, species_name=e.species_name or e.species, measure=e.measure,
            measure_label=MEASURE_LABEL.get(e.measure, e.measure), area_kind=e.area_kind, area=e.area,
            area_label=AREA_WORD[e.area_kind] if e.area_kind == "all" else f"{AREA_WORD[e.area_kind]} {e.area}",
            call=r.call, call_label=CALL_LABEL.get(r.call, r.call),  # type: ignore[attr-defined]
            annual_text=rate_with_interval(ac.estimate, ac.lower, ac.upper),
            n_stations=int(r.n_stations),  # type: ignore[attr-defined]
            years_text=f"{r.years[0]}–{r.years[1]}",  # type: ignore[attr-defined]
            fitted_text=_when(e.fitted_at), reused=e.reused,
        ))
    return tuple(rows)


def fits_note(rows: Sequence[FitRow]) -> str:
    """One sentence: how many fits were reused from the store and how many made for this report."""
    reused = sum(r.reused for r in rows)
    made = len(rows) - reused
    if not rows:
        return ""
    parts = []
    if reused:
        parts.append(f"{reused} stored fit{'s' if reused != 1 else ''} reused (same data, model and engine)")
    if made:
        parts.append(f"{made} fitted for this report")
    return "; ".join(parts).capitalize() + "."
