"""The season table: one row per site and species, for every measure."""

import json

import numpy as np
import pandas as pd
import pytest

from monitor import columns as C
from monitor.errors import EstimationError
from monitor.estimate import (
    PLACEMENT,
    estimate_cover,
    estimate_density,
    estimate_density_stratified,
    estimate_pin_cover,
    quadrats_needed,
    season_estimates,
    wilson_interval,
)

# Invented programme: two sites of an invented reserve, two invented species codes.
SITES = pd.DataFrame({C.SITE: ["NORTHMEAD", "FENEND"], C.AREA: [12000.0, 4000.0]})


def stations(n_north=12, n_fen=10, placement=None):
    codes = [f"N{i:02d}" for i in range(n_north)] + [f"F{i:02d}" for i in range(n_fen)]
    table = pd.DataFrame({
        C.STATION: codes,
        C.SITE: ["NORTHMEAD"] * n_north + ["FENEND"] * n_fen,
        C.QUADRAT_WIDTH: 0.5,
        C.QUADRAT_LENGTH: 0.5,
    })
    if placement is not None:
        table[PLACEMENT] = placement
    return table


def observations(table, rng, species=("SPA", "SPB")):
    rows = []
    for sp in species:
        for station in table[C.STATION]:
            rows.append({
                C.STATION: station, C.SPECIES: sp, C.YEAR: 2024,
                C.COUNT: int(rng.poisson(6 if sp == "SPA" else 2)),
                C.COVER: float(rng.uniform(0, 40)),
                C.OCCUPIED: int(rng.integers(0, 26)), C.CELLS: 25,
                C.HITS: int(rng.integers(0, 11)), C.PINS: 10,
                C.PRESENT: int(rng.integers(0, 2)),
            })
    return pd.DataFrame(rows)


def test_count_table_has_one_row_per_site_and_species_and_matches_the_estimator():
    rng = np.random.default_rng(1)
    st = stations()
    obs = observations(st, rng)
    table = season_estimates(obs, st, SITES, C.MEASURE_COUNT)
    assert len(table) == 4
    assert list(table[["site", "species"]].itertuples(index=False, name=None)) == [
        ("FENEND", "SPA"), ("FENEND", "SPB"), ("NORTHMEAD", "SPA"), ("NORTHMEAD", "SPB")]
    row = table.iloc[2]
    counts = obs.loc[obs[C.STATION].str.startswith("N") & (obs[C.SPECIES] == "SPA"), C.COUNT]
    # common practice: total = mean count x (site area / quadrat area)
    assert row["total"] == pytest.approx(counts.mean() * 12000 / 0.25)
    direct = estimate_density(pd.DataFrame({C.COUNT: counts}), 12000.0, quadrat_area_m2=0.25)
    assert (row["lower"], row["upper"]) == pytest.approx((direct.density_lower, direct.density_upper))
    assert row["quadrats_needed"] == quadrats_needed(counts.to_numpy()).n_required
    assert row["n"] == 12 and row["unit"] == "individuals per m^2"
    numeric = table.select_dtypes("number")
    assert not numeric.isna().any().any()
    fen = table.iloc[0]
    assert "few_quadrats" not in fen["diagnostics"]      # 10 quadrats: no warning
    json.dumps(table.astype(object).where(table.notna(), None).to_dict("records"))


def test_every_measure_gives_a_table():
    rng = np.random.default_rng(2)
    st = stations()
    obs = observations(st, rng)
    cover = season_estimates(obs, st, SITES, C.MEASURE_COVER)
    sub = obs[obs[C.STATION].str.startswith("F") & (obs[C.SPECIES] == "SPB")]
    assert cover.iloc[1]["estimate"] == pytest.approx(estimate_cover(sub).mean_cover_pct)
    pins = season_estimates(obs, st, SITES, C.MEASURE_PIN_HITS)
    ref = estimate_pin_cover(sub)
    assert (pins.iloc[1]["lower"], pins.iloc[1]["upper"]) == pytest.approx((ref.lower, ref.upper))
    assert "design_effect" in pins.columns
    freq = season_estimates(obs, st, SITES, C.MEASURE_FREQUENCY)
    assert freq.iloc[1]["estimate"] == pytest.approx(sub[C.OCCUPIED].sum() / sub[C.CELLS].sum())
    presence = season_estimates(obs, st, SITES, C.MEASURE_PRESENCE)
    k = sub[C.PRESENT].sum()
    assert (presence.iloc[1]["lower"], presence.iloc[1]["upper"]) == pytest.approx(wilson_interval(k, 10))
    for table in (cover, pins, freq, presence):
        assert len(table) == 4 and not table.select_dtypes("number").isna().any().any()


def test_few_quadrats_are_flagged_in_the_table():
    rng = np.random.default_rng(3)
    st = stations(n_north=12, n_fen=6)
    table = season_estimates(observations(st, rng), st, SITES, C.MEASURE_COUNT)
    assert table.loc[table["site"] == "FENEND", "diagnostics"].str.contains("few_quadrats").all()


def test_site_without_area_raises_or_is_skipped_with_a_reason():
    rng = np.random.default_rng(4)
    st = stations()
    obs = observations(st, rng)
    sites = SITES.assign(**{C.AREA: [12000.0, None]})
    with pytest.raises(EstimationError, match="site 'FENEND'.*no area"):
        season_estimates(obs, st, sites, C.MEASURE_COUNT)
    table = season_estimates(obs, st, sites, C.MEASURE_COUNT, on_error="skip")
    assert set(table["site"]) == {"NORTHMEAD"}
    assert len(table.attrs["skipped"]) == 2 and "no area" in table.attrs["skipped"][0]


def test_quadrat_larger_than_site_and_single_quadrat_sites_are_errors():
    rng = np.random.default_rng(5)
    st = stations(n_north=12, n_fen=1)
    with pytest.raises(EstimationError, match="site 'FENEND'.*at least 2"):
        season_estimates(observations(st, rng), st, SITES, C.MEASURE_COUNT)
    st = stations()
    tiny = SITES.assign(**{C.AREA: [12000.0, 0.1]})
    with pytest.raises(EstimationError, match="larger than its site"):
        season_estimates(observations(st, rng), st, tiny, C.MEASURE_COUNT)


def test_k_greater_than_n_in_the_table_is_an_error():
    rng = np.random.default_rng(6)
    st = stations()
    obs = observations(st, rng)
    obs.loc[3, C.HITS] = 12
    with pytest.raises(EstimationError, match="between 0 and n"):
        season_estimates(obs, st, SITES, C.MEASURE_PIN_HITS)


def test_targeted_stations_are_left_out_and_systematic_noted():
    rng = np.random.default_rng(7)
    placement = [C.PLACEMENT_SYSTEMATIC] * 10 + [C.PLACEMENT_TARGETED] * 2 + [C.PLACEMENT_RANDOM] * 10
    st = stations(placement=placement)
    table = season_estimates(observations(st, rng), st, SITES, C.MEASURE_COUNT)
    north = table[table["site"] == "NORTHMEAD"].iloc[0]
    assert north["n"] == 10 and north["design"] == C.PLACEMENT_SYSTEMATIC
    assert "conservative" in north["note"] and "targeted_excluded" in north["diagnostics"]
    assert table[table["site"] == "FENEND"].iloc[0]["design"] == C.PLACEMENT_RANDOM


def test_stratified_sites_use_the_stratified_estimator():
    rng = np.random.default_rng(8)
    st = stations()
    st[C.STRATUM] = ["wet"] * 5 + ["dry"] * 7 + [None] * 10
    strata = pd.DataFrame({C.SITE: ["NORTHMEAD", "NORTHMEAD"], C.STRATUM: ["wet", "dry"],
                           C.AREA: [2000.0, 10000.0]})
    obs = observations(st, rng)
    table = season_estimates(obs, st, SITES, C.MEASURE_COUNT, strata=strata)
    north = table[(table["site"] == "NORTHMEAD") & (table["species"] == "SPA")].iloc[0]
    rows = obs[(obs[C.SPECIES] == "SPA")].merge(st, on=C.STATION)
    rows = rows[rows[C.SITE] == "NORTHMEAD"]
    ref = estimate_density_stratified(rows, strata, quadrat_area_m2=0.25)
    assert north["total"] == pytest.approx(ref.total) and north["lower"] == pytest.approx(ref.density_lower)
    assert "Satterthwaite" in north["note"]


def test_table_input_errors():
    rng = np.random.default_rng(9)
    st = stations()
    obs = observations(st, rng)
    with pytest.raises(EstimationError, match="unknown measure"):
        season_estimates(obs, st, SITES, "biomass")
    with pytest.raises(EstimationError, match="not in the stations table"):
        season_estimates(obs, st.iloc[1:], SITES, C.MEASURE_COUNT)
    with pytest.raises(EstimationError, match="one season"):
        season_estimates(pd.concat([obs, obs.assign(year=2025)]), st, SITES, C.MEASURE_COUNT)
    with pytest.raises(EstimationError, match="two 'SPA'"):
        season_estimates(pd.concat([obs, obs.iloc[:1]]), st, SITES, C.MEASURE_COUNT)


def test_strata_that_do_not_add_up_to_the_site_are_flagged():
    rng = np.random.default_rng(10)
    st = stations()
    st[C.STRATUM] = ["wet"] * 5 + ["dry"] * 7 + [None] * 10
    strata = pd.DataFrame({C.SITE: ["NORTHMEAD"] * 2, C.STRATUM: ["wet", "dry"], C.AREA: [2000.0, 5000.0]})
    table = season_estimates(observations(st, rng), st, SITES, C.MEASURE_COUNT, strata=strata)
    assert table.loc[table["site"] == "NORTHMEAD", "diagnostics"].str.contains("strata_area_mismatch").all()
    assert not table.loc[table["site"] == "FENEND", "diagnostics"].str.contains("strata_area_mismatch").any()
