"""`monitor trend`: the year-effect options, the labelled scales, --table cells checked one by one,
and a species that cannot be fitted never stopping the others."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from monitor.cli.main import main
from monitor.errors import EstimationError
from monitor.services import trend


def write_table(path, rng, n_station=15, years=range(2012, 2020)):
    years = np.array(list(years))
    st = np.repeat(np.arange(n_station), len(years))
    yr = np.tile(years, n_station)
    eta = 1.2 - 0.05 * (yr - years.mean()) + rng.normal(0, 0.5, n_station)[st] + rng.normal(0, 0.2, len(years))[
        yr - years[0]]
    pd.DataFrame({"station": [f"Q{i:02d}" for i in st], "site": [f"S{i % 3}" for i in st], "year": yr,
                  "count": rng.poisson(np.exp(eta))}).to_csv(path, index=False)
    return path


def run_json(args, capsys):
    assert main(args + ["--json"]) == 0
    return json.loads(capsys.readouterr().out)[0]


def test_year_effect_options_on_a_table(tmp_path, capsys):
    path = write_table(tmp_path / "counts.csv", np.random.default_rng(1))
    base = ["trend", "--table", str(path), "--family", "poisson"]
    default = run_json(base, capsys)
    assert default["year_random"] == "iid" and default["slope_df"] == 6 and default["df_method"].startswith("t")
    assert default["estimator"] == "ml-laplace" and default["change_scale"] == "count"
    assert default["yearly"] and default["trend_line"] and default["level_change"]["unit"] == "mean count per quadrat"
    off = run_json(base + ["--no-year-effect"], capsys)
    assert off["year_random"] == "none" and off["slope_df"] is None
    assert "no_year_effect" in {d["code"] for d in off["diagnostics"]}
    ar1 = run_json(base + ["--year-effect", "ar1"], capsys)
    assert ar1["year_random"] == "ar1" and "year" in ar1["ar1_correlation"]
    sy = run_json(base + ["--site-year"], capsys)
    assert sy["site_by_year"] and "site_year" in sy["random_sd"]
    assert main(base + ["--no-year-effect", "--year-effect", "ar1"]) == 2
    capsys.readouterr()
    assert main(base) == 0
    table = capsys.readouterr().out
    assert "t, 6 df" in table and "iid" in table


def test_binomial_table_rows_say_odds_and_show_the_share(tmp_path, capsys):
    rng = np.random.default_rng(3)
    st = np.repeat(np.arange(12), 6)
    yr = np.tile(np.arange(2015, 2021), 12)
    k = rng.binomial(20, 1 / (1 + np.exp(-(0.8 - 0.2 * (yr - 2017.5) + rng.normal(0, 0.4, 12)[st]))))
    path = tmp_path / "freq.csv"
    pd.DataFrame({"station": st, "year": yr, "occupied": k, "cells": 20}).to_csv(path, index=False)
    out = run_json(["trend", "--table", str(path)], capsys)
    assert out["change_scale"] == "odds" and out["level_change"]["unit"] == "% of cells occupied"
    lc = out["level_change"]
    assert lc["first"]["estimate"] > lc["last"]["estimate"]
    assert lc["difference"]["lower"] < lc["difference"]["estimate"] < lc["difference"]["upper"] < 0
    assert main(["trend", "--table", str(path)]) == 0
    text = capsys.readouterr().out
    assert "odds" in text and "% of cells occupied" in text


def test_shoot_height_table_is_fitted_on_the_log_scale_and_said_in_cm(tmp_path, capsys):
    """Invented heights: log(y) = log(25) - 0.04 (t - 2017.5) + station + year + noise (lognormal family)."""
    rng = np.random.default_rng(4)
    st = np.repeat(np.arange(12), 6)
    yr = np.tile(np.arange(2015, 2021), 12)
    log_y = (np.log(25.0) - 0.04 * (yr - 2017.5) + rng.normal(0, 0.3, 12)[st] + rng.normal(0, 0.05, 6)[yr - 2015]
             + rng.normal(0, 0.2, yr.size))
    path = tmp_path / "heights.csv"
    pd.DataFrame({"station": st, "year": yr, "height_cm": np.round(np.exp(log_y), 1)}).to_csv(path, index=False)
    out = run_json(["trend", "--table", str(path)], capsys)
    assert out["measure"] == "shoot_height" and out["family"] == "lognormal"
    assert out["level_change"]["unit"] == "cm"
    assert out["annual_change"]["lower"] < out["annual_change"]["estimate"] < out["annual_change"]["upper"]
    zero = tmp_path / "zero.csv"
    pd.DataFrame({"station": ["a", "b"], "year": [2015, 2016], "height_cm": [12.5, 0]}).to_csv(zero, index=False)
    assert main(["trend", "--table", str(zero)]) == 1
    assert "zero.csv, row 3, field 'height_cm': got '0.0'; expected a shoot height in cm, above 0" in \
        capsys.readouterr().err


@pytest.mark.parametrize("cell,expected", [
    ("", "field 'count'; expected a whole count of 0 or more (the cell is blank)"),
    ("n/a", "field 'count': got 'n/a'; expected a whole count of 0 or more"),
    ("-3", "field 'count': got '-3'; expected a whole count of 0 or more"),
    ("2.5", "field 'count': got '2.5'; expected a whole count of 0 or more"),
])
def test_bad_table_cells_name_file_row_and_field(tmp_path, capsys, cell, expected):
    path = write_table(tmp_path / "counts.csv", np.random.default_rng(2))
    lines = path.read_text().splitlines()
    parts = lines[4].split(",")
    parts[-1] = cell
    lines[4] = ",".join(parts)
    path.write_text("\n".join(lines) + "\n")
    assert main(["trend", "--table", str(path)]) == 1
    captured = capsys.readouterr()
    assert captured.out == ""   # nothing fitted, nothing written
    err = captured.err.strip().splitlines()
    assert err == [f"error: counts.csv, row 5, {expected}"]
    assert "np.float64" not in captured.err


def test_k_above_n_in_a_table_is_refused(tmp_path, capsys):
    path = tmp_path / "pins.csv"
    pd.DataFrame({"station": ["a", "b"], "year": [2015, 2016], "hits": [3, 12], "pins": [10, 10]}).to_csv(path,
                                                                                                  index=False)
    assert main(["trend", "--table", str(path)]) == 1
    assert "pins.csv, row 3, field 'hits': got '12'; expected at most the number in 'pins' (10)" in capsys.readouterr().err


def test_a_species_that_cannot_be_fitted_does_not_stop_the_others(demo_db, monkeypatch, capsys):
    real = trend.fit_one

    def fit_one(data, measure, **kw):
        if measure == "cover":
            raise EstimationError("every value of cover is the same (0); there is no trend to fit")
        return real(data, measure, **kw)

    monkeypatch.setattr(trend, "fit_one", fit_one)
    skipped: list[dict] = []
    fits = trend.fit_programme(demo_db, species=["GLASED", "HEABEL"], skipped=skipped)
    assert [f.species for f in fits] == ["HEABEL"] and skipped[0]["species"] == "GLASED"
    assert main(["--db", demo_db, "trend", "--species", "GLASED", "--species", "HEABEL"]) == 0
    captured = capsys.readouterr()
    assert "GLASED (cover): not fitted:" in captured.err and "every value of cover is the same" in captured.err
    assert "HEABEL" in captured.out
    # without a list the species is still left out and said so (the run's not_called)
    run = trend.fit_programme(demo_db, species=["GLASED"])
    assert list(run) == [] and run.not_called[0].species == "GLASED"
