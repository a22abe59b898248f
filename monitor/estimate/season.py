"""One season's estimates for every site and species: the table the CLI and the report show."""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.errors import Diagnostic, EstimationError

from ._common import check_positive_area, few_quadrats, numeric_column, require_columns
from .adequacy import quadrats_needed
from .cover import estimate_cover, pooled_proportion, wilson_interval
from .density import combine_strata, estimate_density, estimate_density_stratified
from .lengths import estimate_geometric_mean

#: station-table column saying how a station's position was chosen (values: monitor.columns.PLACEMENTS)
PLACEMENT = "placement"

def _diagnostic_text(diagnostics) -> str:
    return "; ".join(f"{d.code}: {d.message}" for d in diagnostics)


def _station_table(stations: pd.DataFrame) -> pd.DataFrame:
    require_columns(stations, [C.STATION, C.SITE], "stations table")
    table = stations.copy()
    table[C.STATION] = table[C.STATION].astype(str)
    if table[C.STATION].duplicated().any():
        dup = table.loc[table[C.STATION].duplicated(), C.STATION].iloc[0]
        raise EstimationError(f"stations table lists station '{dup}' twice")
    if C.QUADRAT_AREA not in table.columns:
        if C.QUADRAT_WIDTH in table.columns and C.QUADRAT_LENGTH in table.columns:
            table[C.QUADRAT_AREA] = numeric_column(table, C.QUADRAT_WIDTH, "stations table") * numeric_column(
                table, C.QUADRAT_LENGTH, "stations table"
            )
    return table


def _site_design(rows: pd.DataFrame) -> tuple[str, pd.DataFrame, list[Diagnostic]]:
    """Placement of a site's stations; targeted stations are left out of design-based estimates."""
    if PLACEMENT not in rows.columns:
        return C.PLACEMENT_RANDOM, rows, []
    placement = rows[PLACEMENT].fillna(C.PLACEMENT_RANDOM).astype(str)
    diagnostics = []
    targeted = placement == C.PLACEMENT_TARGETED
    if targeted.any():
        diagnostics.append(
            Diagnostic(
                "targeted_excluded",
                f"{int(targeted.sum())} targeted station(s) left out: they are not a probability sample of the site.",
            )
        )
        rows, placement = rows[~targeted], placement[~targeted]
    kinds = sorted(set(placement))
    if not kinds:
        return C.PLACEMENT_TARGETED, rows, diagnostics
    if len(kinds) == 1:
        return kinds[0], rows, diagnostics
    # mixed placements: the systematic/balanced caveat applies if any station was so placed
    for kind in (C.PLACEMENT_SYSTEMATIC, C.PLACEMENT_BALANCED, C.PLACEMENT_TRANSECT):
        if kind in kinds:
            return kind, rows, diagnostics
    return C.PLACEMENT_RANDOM, rows, diagnostics


def _use_strata(rows: pd.DataFrame, strata: pd.DataFrame | None, site) -> pd.DataFrame | None:
    if strata is None or C.STRATUM not in rows.columns or rows[C.STRATUM].isna().all():
        return None
    if rows[C.STRATUM].isna().any():
        raise EstimationError(f"site '{site}': some stations have a stratum and some do not")
    table = strata
    if C.SITE in strata.columns:
        table = strata[strata[C.SITE].astype(str) == str(site)]
    return table if len(table) else None


def _row_count(rows, site_area, strata_table, design, confidence, precision) -> dict:
    if strata_table is not None:
        est = estimate_density_stratified(
            rows, strata_table, confidence=confidence,
            design=C.PLACEMENT_STRATIFIED if design == C.PLACEMENT_RANDOM else design,
        )
    else:
        est = estimate_density(rows, site_area, confidence=confidence, design=design)
    row = {
        "n": est.n,
        "estimate": est.density,
        "se": est.density_se,
        "lower": est.density_lower,
        "upper": est.density_upper,
        "total": est.total,
        "total_lower": est.total_lower,
        "total_upper": est.total_upper,
        "note": est.note,
    }
    diagnostics = list(est.diagnostics)
    counts = numeric_column(rows, C.COUNT, "count")
    row["counted"] = float(counts.sum())  # individuals seen in the quadrats: the total's floor
    if counts.mean() > 0 and counts.std(ddof=1) > 0:
        adequacy = quadrats_needed(counts, precision=precision, confidence=confidence)
        row["quadrats_needed"] = adequacy.n_required
        row["additional_quadrats"] = adequacy.additional_required
    else:
        row["quadrats_needed"] = pd.NA
        row["additional_quadrats"] = pd.NA
        diagnostics.append(
            Diagnostic("no_adequacy", "Quadrats needed is undefined: no individuals found, or no variation.",
                       severity="info")
        )
    return row | {"_diagnostics": diagnostics}


def _row_cover(rows, site_area, strata_table, design, confidence) -> dict:
    if strata_table is not None:
        codes = strata_table[C.STRATUM].astype(str).tolist()
        areas = numeric_column(strata_table, C.AREA, "strata table")
        stratum_of = rows[C.STRATUM].astype(str)
        n_h, means, variances, sizes = [], [], [], []
        for code, area in zip(codes, areas, strict=True):
            values = numeric_column(rows[stratum_of == code], C.COVER, f"stratum '{code}'")
            if values.size < 2:
                raise EstimationError(f"stratum '{code}': need at least 2 quadrats for an interval, got {values.size}")
            n_h.append(values.size)
            means.append(values.mean())
            variances.append(values.var(ddof=1))
            sizes.append(area)
        combined = combine_strata(sizes, n_h, means, variances, confidence=confidence, fpc=False)
        return {
            "n": combined.n,
            "estimate": combined.mean,
            "se": combined.mean_se,
            "lower": max(combined.mean_lower, 0.0),
            "upper": min(combined.mean_upper, 100.0),
            "note": "Stratified mean cover, strata weighted by area; Satterthwaite df.",
            "_diagnostics": list(few_quadrats(combined.n, "cover estimate")),
        }
    est = estimate_cover(rows, confidence=confidence)
    return {
        "n": est.n, "estimate": est.mean_cover_pct, "se": est.se, "lower": est.lower, "upper": est.upper,
        "note": est.note, "_diagnostics": list(est.diagnostics),
    }


def _row_proportion(rows, measure, confidence) -> dict:
    k_col, n_col = measures.get(measure).columns
    what = f"{measure} estimate"
    require_columns(rows, [k_col, n_col], what)
    k = numeric_column(rows, k_col, what)
    n = numeric_column(rows, n_col, what)
    est = pooled_proportion(k, n, stations=rows[C.STATION].tolist(), confidence=confidence, measure=measure)
    return {
        "n": est.n, "estimate": est.share, "se": est.se, "lower": est.lower, "upper": est.upper,
        "design_effect": est.design_effect, "note": est.note, "_diagnostics": list(est.diagnostics),
    }


def _row_presence(rows, confidence) -> dict:
    present = numeric_column(rows, C.PRESENT, "presence estimate")
    if not np.isin(present, (0.0, 1.0)).all():
        raise EstimationError("presence estimate: 'present' must be 0 or 1")
    m = int(present.size)
    if m < 2:
        raise EstimationError(f"presence estimate: need at least 2 quadrats for an interval, got {m}")
    k = float(present.sum())
    lower, upper = wilson_interval(k, m, confidence)
    return {
        "n": m, "estimate": k / m, "se": float(np.sqrt(k / m * (1 - k / m) / m)), "lower": lower, "upper": upper,
        "note": "Share of quadrats where the species was present; Wilson score interval (quadrats independent).",
        "_diagnostics": list(few_quadrats(m, "presence estimate")),
    }


def _row_geometric_mean(rows, entry, confidence) -> dict:
    what = f"{entry.label} estimate"
    est = estimate_geometric_mean(numeric_column(rows, entry.value_column, what), confidence=confidence, what=what,
                                  unit=entry.unit)
    return {
        "n": est.n, "estimate": est.geometric_mean, "se": est.se, "lower": est.lower, "upper": est.upper,
        "note": est.note, "_diagnostics": list(est.diagnostics),
    }


def season_estimates(
    obs: pd.DataFrame,
    stations: pd.DataFrame,
    sites: pd.DataFrame,
    measure: str,
    *,
    strata: pd.DataFrame | None = None,
    confidence: float = 0.95,
    precision: float = 0.2,
    on_error: str = "raise",
) -> pd.DataFrame:
    """One season's estimates: one row per site and species for one measure.

    Parameters
    ----------
    obs : DataFrame
        One season's observations, one row per station and species: ``station``, ``species``
        and the measure's value columns (``monitor.measures``).  A ``measure``
        column, if present, is filtered to ``measure``.  Zeros must be present as rows (a target
        species not seen at a visited station is a recorded 0); missed visits must be absent.
    stations : DataFrame
        ``station``, ``site``, ``quadrat_area_m2`` (or ``quadrat_width_m`` and
        ``quadrat_length_m``), optional ``stratum`` and ``placement``.
    sites : DataFrame
        ``site`` and ``area_m2`` [m^2].
    measure : str
        One of ``monitor.columns.MEASURES``.
    strata : DataFrame, optional
        ``stratum``, ``area_m2`` (and ``site``): stratified estimates where stations carry a stratum.
    confidence : float
        Two-sided confidence level.
    precision : float
        Target relative precision for ``quadrats_needed`` (counts).
    on_error : {"raise", "skip"}
        On a site/species that cannot be estimated: raise :class:`EstimationError`, or leave the
        row out and list the reason in ``result.attrs["skipped"]``.

    Returns
    -------
    DataFrame
        Columns ``site, species, measure, n, estimate, se, lower, upper, unit, confidence, design,
        note, diagnostics``; for counts also ``total, total_lower, total_upper, quadrats_needed,
        additional_quadrats``; for frequency and pin hits ``design_effect``.  ``estimate`` is a
        density [m^-2] for counts, percent for cover and a share (0-1) otherwise.

    Notes
    -----
    Counts: :func:`estimate_density` (or :func:`estimate_density_stratified`); cover:
    :func:`estimate_cover`; frequency and pin hits: :func:`pooled_proportion`; presence: Wilson
    interval over quadrats.  Targeted stations are left out of these design-based estimates.

    References
    ----------
    Cochran, W. G. (1977). Sampling Techniques, 3rd ed. Wiley.
    """
    if measure not in measures.REGISTRY:
        raise EstimationError(f"unknown measure {measure!r}; expected one of {', '.join(C.MEASURES)}")
    entry = measures.REGISTRY[measure]
    if on_error not in ("raise", "skip"):
        raise EstimationError(f"on_error must be 'raise' or 'skip', got {on_error!r}")
    value_columns = list(entry.columns)
    require_columns(obs, [C.STATION, C.SPECIES, *value_columns], "observations")
    require_columns(sites, [C.SITE, C.AREA], "sites table")
    table = obs
    if C.MEASURE in table.columns:
        table = table[table[C.MEASURE] == measure]
    if C.YEAR in table.columns and table[C.YEAR].nunique() > 1:
        raise EstimationError(
            f"observations span seasons {sorted(table[C.YEAR].unique().tolist())}; pass one season"
        )
    table = table.copy()
    table[C.STATION] = table[C.STATION].astype(str)
    key = table[[C.STATION, C.SPECIES]]
    if key.duplicated().any():
        station, species = key[key.duplicated()].iloc[0]
        raise EstimationError(f"station '{station}' has two '{species}' {measure} records in one season")
    station_table = _station_table(stations)
    unknown = sorted(set(table[C.STATION]) - set(station_table[C.STATION]))
    if unknown:
        raise EstimationError(f"observations name station(s) not in the stations table: {', '.join(unknown[:5])}")
    keep = [c for c in station_table.columns if c not in table.columns or c == C.STATION]
    merged = table.merge(station_table[keep], on=C.STATION, how="left")
    site_area = dict(zip(sites[C.SITE].astype(str), pd.to_numeric(sites[C.AREA], errors="coerce"), strict=True))

    records, skipped = [], []
    for (site, species), rows in merged.groupby([merged[C.SITE].astype(str), C.SPECIES], sort=True):
        try:
            if site not in site_area:
                raise EstimationError(f"site '{site}' is not in the sites table")
            area = check_positive_area(site_area[site], f"site '{site}'")
            design, rows, pre = _site_design(rows)
            if design == C.PLACEMENT_TARGETED or len(rows) == 0:
                raise EstimationError(f"site '{site}': every station is targeted; no design-based estimate")
            strata_table = _use_strata(rows, strata, site)
            if strata_table is not None:
                strata_area = float(numeric_column(strata_table, C.AREA, "strata table").sum())
                if abs(strata_area - area) > 0.01 * area:
                    pre.append(
                        Diagnostic(
                            "strata_area_mismatch",
                            f"The strata cover {strata_area:g} m^2 but the site is {area:g} m^2; "
                            "the stratified total uses the strata areas.",
                        )
                    )
            # the measure's single-round estimator, by its registry key
            if entry.estimator == measures.ESTIMATOR_DENSITY:
                row = _row_count(rows, area, strata_table, design, confidence, precision)
            elif entry.estimator == measures.ESTIMATOR_MEAN_COVER:
                row = _row_cover(rows, area, strata_table, design, confidence)
            elif entry.estimator == measures.ESTIMATOR_OCCUPANCY:
                row = _row_presence(rows, confidence)
            elif entry.estimator == measures.ESTIMATOR_PROPORTION:
                row = _row_proportion(rows, measure, confidence)
            elif entry.estimator == measures.ESTIMATOR_GEOMETRIC_MEAN:
                row = _row_geometric_mean(rows, entry, confidence)
            else:
                raise EstimationError(f"no single-round estimator {entry.estimator!r} (measure {measure})")
        except EstimationError as error:
            message = f"site '{site}', species '{species}': {error}"
            if on_error == "raise":
                raise EstimationError(message) from error
            skipped.append(message)
            continue
        diagnostics = pre + row.pop("_diagnostics")
        records.append(
            {"site": site, "species": species, "measure": measure}
            | row
            | {"unit": entry.estimate_unit, "confidence": confidence, "design": design,
               "diagnostics": _diagnostic_text(diagnostics)}
        )
    first = ["site", "species", "measure", "n", "estimate", "se", "lower", "upper"]
    result = pd.DataFrame.from_records(records)
    if result.empty:
        result = pd.DataFrame(columns=first + ["unit", "confidence", "design", "note", "diagnostics"])
    else:
        rest = [c for c in result.columns if c not in first]
        result = result[first + rest]
        for column in ("quadrats_needed", "additional_quadrats"):
            if column in result.columns:
                result[column] = result[column].astype("Int64")
    result.attrs["skipped"] = skipped
    return result
