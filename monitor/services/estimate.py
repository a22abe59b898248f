"""This season's estimates: density and totals, cover and frequency, sample adequacy, two-season change
and abundance along a gradient, computed from the stored records.

Only first visits of a round enter single-season estimates (a repeat visit is not a second quadrat),
and missed or inaccessible visits are absent: they are missing, never zeros.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from monitor import columns as C
from monitor.db import Store, one_snapshot, queries
from monitor.errors import DataError, InputError, InputProblem
from monitor.estimate import (
    compare_seasons,
    estimate_gradient,
    quadrats_needed,
    running_mean,
    season_estimates,
)
from monitor.estimate.plots import plot_gradient, plot_running_mean, plot_season_comparison
from monitor.services.common import target_species


def _season_values(store: Store, programme_id: int, year: int, *, species: str | None = None,
                   measure: str | None = None, sites: list[str] | None = None) -> pd.DataFrame:
    long = queries.observations_long(store, programme_id, species=species, measure=measure, sites=sites,
                                     first_year=year, last_year=year)
    return long[long["repeat_no"] == 0]


@one_snapshot
def season_table(db: str | None, year: int, *, programme_code: str | None = None, species: list[str] | None = None,
                 sites: list[str] | None = None, precision: float = 0.2, confidence: float = 0.95) -> pd.DataFrame:
    """One row per site, species and measure for the season: estimate with interval, totals for counts."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        stations = queries.stations(store, programme.id)
        site_table = queries.sites(store, programme.id)[[C.SITE, C.AREA]]
        frames, skipped = [], []
        for target in target_species(store, programme.id, species).to_dict(orient="records"):
            values = _season_values(store, programme.id, year, species=target[C.SPECIES], measure=target[C.MEASURE],
                                    sites=sites)
            if values.empty:
                continue
            obs = queries.to_measure_columns(values, target[C.MEASURE])
            table = season_estimates(obs, stations, site_table, target[C.MEASURE], confidence=confidence,
                                     precision=precision, on_error="skip")
            frames.append(table)
            skipped.extend(table.attrs.get("skipped", []))
        if not frames:
            raise DataError(f"no stored values for season {year}")
        out = pd.concat(frames, ignore_index=True)
        out.attrs["skipped"] = skipped
        out.insert(0, C.YEAR, year)
        return out
    finally:
        store.dispose()


@dataclass(frozen=True)
class AdequacyReport:
    species: str
    site: str
    year: int
    adequacy: object   # monitor.estimate.SampleAdequacy
    running: object    # monitor.estimate.RunningMean

    def to_dict(self) -> dict:
        return {"species": self.species, "site": self.site, "year": self.year,
                "adequacy": self.adequacy.to_dict(), "running_mean": self.running.to_frame().to_dict(orient="records")}


def _values_in_visit_order(values: pd.DataFrame) -> pd.Series:
    """A site's counts in the order the quadrats were recorded (date, then station): the running mean's order."""
    return values.sort_values([C.DATE, C.STATION])["value"].astype(float)


@one_snapshot
def sample_adequacy(db: str | None, species: str, year: int, site: str, *, programme_code: str | None = None,
                    precision: float = 0.2, confidence: float = 0.95, figure: Path | None = None) -> AdequacyReport:
    """How many quadrats would estimate the site's mean count within +/- precision, and the running mean."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        values = _season_values(store, programme.id, year, species=species, sites=[site])
        if values.empty:
            raise DataError(f"no stored values of {species} at site {site} in {year}")
        ordered = _values_in_visit_order(values)
        adequacy = quadrats_needed(ordered.to_numpy(), precision=precision, confidence=confidence)
        running = running_mean(ordered.to_numpy(), confidence=confidence, precision=precision)
        if figure is not None:
            _save(plot_running_mean(running), figure)
        return AdequacyReport(species, site, year, adequacy, running)
    finally:
        store.dispose()


@one_snapshot
def gradient(db: str | None, species: str, *, programme_code: str | None = None, transect: str | None = None,
             covariate: str | None = None, years: list[int] | None = None, family: str = "auto",
             figure: Path | None = None):
    """Abundance (counts) against distance along a transect, or against a visit covariate, per season."""
    if (transect is None) == (covariate is None):
        raise InputError(InputProblem("--transect/--covariate", None, None, None, "exactly one of the two"))
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        long = queries.observations_long(store, programme.id, species=species, measure=C.MEASURE_COUNT)
        if long.empty:
            raise DataError(f"no stored counts of {species}")
        long = long[long["repeat_no"] == 0]
        if years:
            long = long[long[C.YEAR].isin(years)]
        data = queries.to_measure_columns(long, C.MEASURE_COUNT)
        if transect is not None:
            data = data[data[C.TRANSECT] == transect]
            if data.empty:
                raise DataError(f"no counts of {species} on transect {transect}")
            column = C.DISTANCE
        else:
            cov = queries.covariates_long(store, programme.id)
            cov = cov[cov["name"] == covariate][["visit_id", "value"]].rename(columns={"value": covariate})
            if cov.empty:
                raise DataError(f"no values of the covariate '{covariate}'")
            data = data.merge(cov, on="visit_id", how="inner")
            column = covariate
        result = estimate_gradient(data, covariate=column, value=C.COUNT, season=C.YEAR, family=family, on_error="skip")
        if figure is not None:
            _save(plot_gradient(result), figure)
        return result
    finally:
        store.dispose()


@one_snapshot
def two_seasons(db: str | None, species: str, first: int, second: int, *, programme_code: str | None = None,
                site: str | None = None, figure: Path | None = None):
    """Change in the mean between two seasons at the permanent quadrats: paired beside unpaired."""
    store = Store.open(db)
    try:
        programme = store.programme(programme_code)
        long = queries.observations_long(store, programme.id, species=species, sites=[site] if site else None,
                                         first_year=min(first, second), last_year=max(first, second))
        long = long[(long["repeat_no"] == 0) & long[C.YEAR].isin([first, second])]
        if long.empty:
            raise DataError(f"no stored values of {species} in {first} or {second}")
        result = compare_seasons(long, value="value", season=C.YEAR, first=first, second=second)
        if figure is not None:
            _save(plot_season_comparison(result), figure)
        return result
    finally:
        store.dispose()


def _save(fig, path: Path) -> None:
    import matplotlib.pyplot as plt

    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, dpi=150, bbox_inches="tight")
    plt.close(fig)
