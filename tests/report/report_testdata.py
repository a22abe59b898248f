"""Invented programme data and trend fits for the report tests.

Data are simulated (invented reserve, sites, species codes).  Trend results
come from the project's own engine, ``monitor.trend.TrendModel``: a report test
fails, rather than runs on something else, when the engine cannot be imported.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from shapely.geometry import box

from monitor import columns as C
from monitor.trend import TrendModel
from monitor.trend import station_changes as engine_station_changes

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


def fit_trend(data: pd.DataFrame, margin: float = 0.01):
    """The project's own trend engine on the simulated counts."""
    # Poisson with a random station intercept: the model the data are simulated from (a site effect and
    # an observation-level effect would be estimated at zero here and only slow the tests down).
    model = TrendModel(data, measure=C.MEASURE_COUNT, family="poisson", site_effect=False, margin=margin)
    return model.fit(profile=False, indices=True)


def station_changes(data: pd.DataFrame) -> pd.DataFrame:
    """Each station's own annual change, by the project's ``monitor.trend.station_changes``."""
    return engine_station_changes(data, C.MEASURE_COUNT)


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
