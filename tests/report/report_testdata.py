"""Invented programme data and trend fits for the report tests.

Data are simulated (invented reserve, sites, species codes).  Trend results
come from the project's own engine, ``monitor.trend.TrendModel``, when it is
importable; otherwise from a stand-in built on statsmodels' GLM (Poisson,
station fixed effects) with the same attributes as monitor.trend.TrendResult.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from shapely.geometry import box

from monitor import columns as C
from monitor.errors import Diagnostic

Z95 = 1.959963984540054  # scipy.stats.norm.ppf(0.975), scipy 1.x


def simulate_programme(rng: np.random.Generator, *, n_sites: int = 3, stations_per_site: int = 8,
                       first_year: int = 2015, last_year: int = 2025, annual_change: float = -0.04,
                       station_sd: float = 0.6, base_mean: float = 12.0):
    """Counts at permanent stations under a log-linear trend (invented).

    ``log E[y] = log(base_mean) + log(1 + annual_change) * (year - first) + u_station``.
    Returns (counts, stations, sites).
    """
    sites = {}
    rows = []
    station_rows = []
    for s in range(n_sites):
        code = f"S{s + 1}"
        x0, y0 = 500_000 + s * 900, 6_200_000 + (s % 2) * 500
        sites[code] = box(x0, y0, x0 + 700, y0 + 400)
        for k in range(stations_per_site):
            station = f"{code}-Q{k + 1:02d}"
            station_rows.append({C.STATION: station, C.SITE: code,
                                 C.X: x0 + 40 + rng.uniform(0, 620), C.Y: y0 + 30 + rng.uniform(0, 340),
                                 "placement": C.PLACEMENT_RANDOM})
            u = rng.normal(0, station_sd)
            for year in range(first_year, last_year + 1):
                mu = base_mean * math.exp(math.log1p(annual_change) * (year - first_year) + u)
                rows.append({C.STATION: station, C.SITE: code, C.YEAR: year, C.COUNT: int(rng.poisson(mu))})
    return pd.DataFrame(rows), pd.DataFrame(station_rows), sites


@dataclass(frozen=True)
class _Interval:
    estimate: float
    lower: float
    upper: float


@dataclass(frozen=True)
class StandInTrend:
    """A result shaped as monitor.trend.TrendResult, computed with statsmodels GLM (Poisson, station fixed effects)."""

    measure: str
    family: str
    n_obs: int
    n_stations: int
    n_sites: int
    years: tuple[int, int]
    n_years: int
    slope: float
    slope_se: float
    annual_change: _Interval
    annual_change_profile: _Interval | None
    period_change: _Interval
    random_sd: dict
    dispersion: float | None
    indices: pd.DataFrame
    fitted_trend: pd.DataFrame
    diagnostics: tuple
    call: str
    call_reason: str
    margin: float
    converged: bool = True
    extra: dict = field(default_factory=dict)


def _call(lower: float, upper: float, margin: float, n_stations: int, n_years: int) -> tuple[str, str]:
    # Equivalence logic after Dixon & Pechmann (2005), as monitor/trend/call.py:classify_call describes it.
    if n_stations < 10 or n_years < 5:
        return C.CALL_UNCLEAR, "too few stations or seasons"
    if -margin < lower and upper < margin:
        return C.CALL_STABLE, "interval inside the margin"
    if upper < 0:
        return C.CALL_DECLINING, "interval below zero"
    if lower > 0:
        return C.CALL_RISING, "interval above zero"
    return C.CALL_UNCLEAR, "interval spans zero and the margin"


def stand_in_fit(data: pd.DataFrame, margin: float = 0.01) -> StandInTrend:
    """Fit the stand-in trend with statsmodels (GLM Poisson; station fixed effects)."""
    import statsmodels.api as sm

    data = data.sort_values([C.STATION, C.YEAR]).reset_index(drop=True)
    first, last = int(data[C.YEAR].min()), int(data[C.YEAR].max())
    stations = pd.get_dummies(data[C.STATION], drop_first=True, dtype=float)
    t = (data[C.YEAR] - first).astype(float)
    X = pd.concat([pd.Series(1.0, index=data.index, name="const"), t.rename("t"), stations], axis=1)
    linear = sm.GLM(data[C.COUNT].astype(float), X, family=sm.families.Poisson()).fit()
    slope, se = float(linear.params["t"]), float(linear.bse["t"])
    years = sorted(data[C.YEAR].unique())
    year_dummies = pd.get_dummies(data[C.YEAR].astype(int), drop_first=True, dtype=float, prefix="y")
    Xf = pd.concat([pd.Series(1.0, index=data.index, name="const"), year_dummies, stations], axis=1)
    factor = sm.GLM(data[C.COUNT].astype(float), Xf, family=sm.families.Poisson()).fit()
    rows = [{C.YEAR: first, "index": 1.0, "lower": 1.0, "upper": 1.0}]
    for year in years[1:]:
        b, s = float(factor.params[f"y_{year}"]), float(factor.bse[f"y_{year}"])
        rows.append({C.YEAR: int(year), "index": math.exp(b), "lower": math.exp(b - Z95 * s),
                     "upper": math.exp(b + Z95 * s)})
    indices = pd.DataFrame(rows)
    span = np.arange(first, last + 1)
    fitted = pd.DataFrame({C.YEAR: span, "fit": np.exp(slope * (span - first)),
                           "lower": np.exp((slope - Z95 * se) * (span - first)),
                           "upper": np.exp((slope + Z95 * se) * (span - first))})
    annual = _Interval(math.expm1(slope), math.expm1(slope - Z95 * se), math.expm1(slope + Z95 * se))
    period = _Interval(math.expm1(slope * (last - first)), math.expm1((slope - Z95 * se) * (last - first)),
                       math.expm1((slope + Z95 * se) * (last - first)))
    n_stations = int(data[C.STATION].nunique())
    n_years = len(years)
    call, reason = _call(annual.lower, annual.upper, margin, n_stations, n_years)
    diagnostics = (Diagnostic("few_stations", "Fewer than 10 stations."),) if n_stations < 10 else ()
    return StandInTrend(
        measure=C.MEASURE_COUNT, family="poisson", n_obs=len(data), n_stations=n_stations,
        n_sites=int(data[C.SITE].nunique()) if C.SITE in data else 0, years=(first, last), n_years=n_years,
        slope=slope, slope_se=se, annual_change=annual, annual_change_profile=None, period_change=period,
        random_sd={}, dispersion=None, indices=indices, fitted_trend=fitted, diagnostics=diagnostics,
        call=call, call_reason=reason, margin=margin,
    )


def fit_trend(data: pd.DataFrame, margin: float = 0.01):
    """The project's TrendModel when it is available, else the statsmodels stand-in."""
    try:
        from monitor.trend import TrendModel
    except ImportError:
        return stand_in_fit(data, margin)
    # Poisson with a random station intercept: the model the data are simulated from (a site effect and
    # an observation-level effect would be estimated at zero here and only slow the tests down).
    model = TrendModel(data, measure=C.MEASURE_COUNT, family="poisson", site_effect=False, margin=margin)
    return model.fit(profile=False, indices=True)


def station_changes(data: pd.DataFrame) -> pd.DataFrame:
    """Each station's own annual change: the project's ``monitor.trend.station_changes`` when available,
    else a per-station Poisson GLM slope (statsmodels)."""
    try:
        from monitor.trend import station_changes as engine_station_changes
    except ImportError:
        pass
    else:
        return engine_station_changes(data, C.MEASURE_COUNT)
    import statsmodels.api as sm

    out = []
    for station, g in data.groupby(C.STATION):
        if g[C.YEAR].nunique() < 3 or g[C.COUNT].sum() == 0:
            out.append({C.STATION: station, "annual_change": np.nan, "n_years": g[C.YEAR].nunique()})
            continue
        X = sm.add_constant((g[C.YEAR] - g[C.YEAR].min()).astype(float).to_numpy())
        fit = sm.GLM(g[C.COUNT].astype(float).to_numpy(), X, family=sm.families.Poisson()).fit()
        out.append({C.STATION: station, "annual_change": math.expm1(float(fit.params[1])),
                    "n_years": g[C.YEAR].nunique()})
    return pd.DataFrame(out)


HOSTILE_SCRIPT = "<script>alert(1)</script>"
HOSTILE_IMG = '"><img src=x onerror=alert(2)>'


def demo_inputs(rng: np.random.Generator, n_species: int = 3, *, hostile: bool = False,
                stations_per_site: int = 8, n_sites: int = 3, first_year: int = 2015, last_year: int = 2025,
                with_extras: bool = True):
    """Keyword arguments for build_report_context with ``n_species`` invented species."""
    from monitor.report import GradientData, Trigger

    changes = [-0.05, 0.04, 0.0, -0.02, 0.03, -0.01]
    results, station_change_map, gradients, names = {}, {}, {}, {}
    stations = sites = None
    estimates = []
    for i in range(n_species):
        code = f"SP{i + 1:02d}"
        if hostile and i == 0:
            code = HOSTILE_SCRIPT
        counts, stations, sites = simulate_programme(
            rng, n_sites=n_sites, stations_per_site=stations_per_site, first_year=first_year,
            last_year=last_year, annual_change=changes[i % len(changes)])
        results[(code, C.MEASURE_COUNT)] = fit_trend(counts)
        station_change_map[(code, C.MEASURE_COUNT)] = station_changes(counts)
        names[code] = (HOSTILE_IMG if hostile and i == 1 else f"Herba exempla {chr(97 + i)}")
        season = counts[counts[C.YEAR] == last_year].merge(stations, on=[C.STATION, C.SITE])
        gradients[(code, C.MEASURE_COUNT)] = GradientData(
            pd.DataFrame({"gradient": season[C.Y] - season[C.Y].min(), "value": season[C.COUNT]}),
            gradient_label="Distance from the southern edge (m)", value_label="Count per quadrat")
        for site, g in season.groupby(C.SITE):
            density = g[C.COUNT].mean() / 1.0
            sd = g[C.COUNT].std(ddof=1) / math.sqrt(len(g))
            estimates.append({C.SPECIES: code, C.MEASURE: C.MEASURE_COUNT, C.SITE: site, "quantity": "density",
                              "estimate": density, "lower": max(0, density - Z95 * sd),
                              "upper": density + Z95 * sd, "n_stations": len(g)})
    if hostile:
        stations = stations.copy()
        stations.loc[0, C.SITE] = HOSTILE_IMG
    keys = list(results)
    triggers = [
        Trigger(keys[0][0], C.MEASURE_COUNT, "Keep the population at or above its 2015 level",
                "decline", 0.25, "Review grazing with the tenant within one season", years=10),
    ]
    if len(keys) > 1:
        triggers.append(Trigger(keys[1][0], C.MEASURE_COUNT, "Detect any established decline", "upper_bound_below",
                                0.0, "Commission a site survey"))
    kwargs = dict(
        programme_meta={"name": "Invented Fen Monitoring", "reserve": "Lowmere Fen (invented)",
                        "description": "Permanent quadrats in three invented fen sites.", "placement": "random"},
        season=last_year,
        trend_results=results,
        triggers=triggers,
        stations=stations,
        sites=sites,
        station_changes=station_change_map,
        species_names=names,
        generated="2025-11-30",
    )
    if with_extras:
        kwargs.update(
            estimates=pd.DataFrame(estimates),
            coverage=pd.DataFrame({C.SITE: list(sites) if not hostile else [HOSTILE_SCRIPT, *list(sites)[1:]],
                                   "due": [8] * n_sites, "visited": [8, 7, 6][:n_sites],
                                   "missed": [0, 1, 1][:n_sites], "inaccessible": [0, 0, 1][:n_sites]}),
            quality_flags=[{C.STATION: "S1-Q03", C.YEAR: last_year, C.SPECIES: keys[0][0],
                            "message": "Count far above the station's previous maximum", "status": "open"},
                           {C.STATION: "S2-Q01", C.YEAR: last_year - 1, "message": "closed one", "status": "closed"}],
            events=pd.DataFrame({C.YEAR: [2018, 2021, 2021], "kind": ["grazing", "cutting", "grazing"],
                                 C.SITE: ["S1", "S2", "S1"]}),
            method_changes=pd.DataFrame({C.YEAR: [2020], "kind": ["protocol"],
                                         "description": ["25-cell grid replaced 16-cell grid"]}),
            power=pd.DataFrame({C.SPECIES: [k[0] for k in keys], C.MEASURE: [k[1] for k in keys],
                                "detectable_change": [0.03 + 0.005 * i for i in range(len(keys))],
                                "n_stations": [n_sites * stations_per_site] * len(keys),
                                "n_years": [last_year - first_year + 1] * len(keys)}),
            gradients=gradients,
        )
    return kwargs
