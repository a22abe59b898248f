"""Simulate one programme's data under a design and a scenario (the model in ``monitor.power.model``)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor import columns as col
from monitor import measures
from monitor.power.model import Design, Scenario, VarianceComponents, ar1_series, scaled_components


def simulate_dataset(components: VarianceComponents, design: Design, scenario: Scenario,
                     rng: np.random.Generator) -> pd.DataFrame:
    """Simulate the long analysis table a programme would hold after ``design.n_years`` seasons.

    Parameters
    ----------
    components : VarianceComponents
        Family, mean level and variance components.
    design : Design
        Stations, years, revisit design, quadrat area and missed-visit share.
    scenario : Scenario
        Steady annual change; beta = log(1 + r) per year.
    rng : numpy.random.Generator
        Source of all random draws.

    Returns
    -------
    pandas.DataFrame
        One row per visit made: ``station``, ``site``, ``year`` and the measure's value columns
        (``count``; ``occupied``/``cells``; ``hits``/``pins``; ``present``; ``cover_pct``).
        Visits not due under the revisit design, and missed visits, are absent (never zero).

    Notes
    -----
    ``eta_ijt = b0 + log(a) + beta*t + u_i + v_j + w_t + g_jt + e_ijt`` with the family's response;
    see ``monitor.power.model``.  The year effects ``w_t`` are independent or, with
    ``components.year_rho``, a stationary AR(1) over the years (:func:`monitor.power.model.ar1_series`).  The year effects ``w_t``, the station, site and site-by-year
    effects, the missed visits and the observation noise each come from a stream of their own
    spawned from ``rng``, so two designs simulated from the same seed share their year effects.  Stations are listed site by site (station k in site
    ``floor(k * n_sites / n_stations)``), and panels are dealt along that list so every site
    holds every panel.  Each due visit is missed independently with probability
    ``design.missed_share``.
    """
    s = scaled_components(components, design)
    n_st, n_yr = design.n_stations, design.n_years
    n_sites = design.sites_for(components)
    due = design.panels.visit_matrix(n_st, n_yr)
    # one stream per kind of draw, so designs that share seeds share their draws as far as they
    # overlap (common random numbers: the same good and bad years whatever the number of stations)
    years_rng, stations_rng, sites_rng, missed_rng, noise_rng = rng.spawn(5)

    # independent years, or a stationary AR(1) over years (components.year_rho) from the same draws
    year_effect = ar1_series(years_rng.normal(0.0, 1.0, n_yr), components.year_rho) * s["year_sd"]
    station_effect = stations_rng.normal(0.0, 1.0, n_st) * s["station_sd"]
    site_effect = sites_rng.normal(0.0, 1.0, n_sites) * s["site_sd"]
    site_year_effect = sites_rng.normal(0.0, 1.0, (n_sites, n_yr)) * s["site_year_sd"]
    site_of = (np.arange(n_st) * n_sites) // n_st

    station_idx, year_idx = np.nonzero(due)
    if design.missed_share > 0:
        keep = missed_rng.random(station_idx.size) >= design.missed_share
        station_idx, year_idx = station_idx[keep], year_idx[keep]
    n = station_idx.size
    site_idx = site_of[station_idx]
    eta = (s["intercept"] + scenario.slope * year_idx + year_effect[year_idx]
           + station_effect[station_idx] + site_effect[site_idx] + site_year_effect[site_idx, year_idx])
    rng = noise_rng  # the observation-level noise and the response draws below

    family = components.family
    frame: dict[str, object] = {col.STATION: np.array([f"Q{i:04d}" for i in range(n_st)], dtype=object)[station_idx]}
    if s["site_sd"] > 0 or n_sites > 1:
        frame[col.SITE] = np.array([f"S{j:03d}" for j in range(n_sites)], dtype=object)[site_idx]
    frame[col.YEAR] = design.first_year + year_idx
    if family in ("poisson", "poisson-lognormal"):
        if family == "poisson-lognormal":
            eta = eta + rng.normal(0.0, 1.0, n) * s["observation_sd"]
        frame[col.COUNT] = rng.poisson(np.exp(eta))
    elif family == "negbin":
        theta = s["theta"]
        mu = np.exp(eta)
        # NB2 as a gamma-Poisson mixture: lambda ~ Gamma(shape theta, scale mu/theta)
        frame[col.COUNT] = rng.poisson(rng.gamma(theta, mu / theta))
    elif family == "lognormal":
        frame[measures.get(components.measure).value_column] = np.exp(eta + rng.normal(0.0, 1.0, n) * s["residual_sd"])
    elif family == "binomial":
        eta = eta + rng.normal(0.0, 1.0, n) * s["observation_sd"]
        k = rng.binomial(components.trials, 1.0 / (1.0 + np.exp(-eta)))
        entry = measures.get(components.measure)   # the measure's k (and n) columns, from the registry
        frame[entry.value_column] = k
        if entry.trials_column is not None:
            frame[entry.trials_column] = np.full(n, components.trials)
    elif family == "logit-normal":
        z = eta + rng.normal(0.0, 1.0, n) * s["residual_sd"]
        cover = 100.0 / (1.0 + np.exp(-z))
        if components.cover_resolution is not None:
            step = components.cover_resolution
            cover = np.clip(np.round(cover / step) * step, 0.0, 100.0)
        frame[col.COVER] = cover
    else:  # pragma: no cover - VarianceComponents validates the family
        raise AssertionError(family)
    return pd.DataFrame(frame)
