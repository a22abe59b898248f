"""Simulate one programme's data under a design and a scenario (the model in ``monitor.power.model``)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor import columns as col
from monitor import measures
from monitor.families import family as family_of
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

    fam = family_of(components.family)
    frame: dict[str, object] = {col.STATION: np.array([f"Q{i:04d}" for i in range(n_st)], dtype=object)[station_idx]}
    if s["site_sd"] > 0 or n_sites > 1:
        frame[col.SITE] = np.array([f"S{j:03d}" for j in range(n_sites)], dtype=object)[site_idx]
    frame[col.YEAR] = design.first_year + year_idx
    # the family draws the response (its observation noise first); the measure names the columns
    entry = measures.get(components.measure)
    frame[entry.value_column] = fam.simulate(
        eta, rng, observation_sd=s["observation_sd"],
        dispersion=None if fam.dispersion_field is None else s[fam.dispersion_field],
        trials=components.trials, resolution=components.cover_resolution)
    if entry.trials_column is not None:   # k of n: the number of cells or pins
        frame[entry.trials_column] = np.full(n, components.trials)
    return pd.DataFrame(frame)
