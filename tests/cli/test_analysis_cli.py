"""The analysis commands on the stored demo: JSON shapes a user scripts against, tables by default."""

from __future__ import annotations

import json

from monitor.cli.main import main

TREND_KEYS = {"measure", "family", "n_obs", "n_stations", "n_sites", "years", "slope", "annual_change",
              "annual_change_profile", "random_sd", "loglik", "aic", "call", "indices"}


def test_trend_json_has_the_documented_keys(demo_db, capsys):
    assert main(["--db", demo_db, "trend", "--species", "MARVIO", "--json"]) == 0
    fits = json.loads(capsys.readouterr().out)
    assert len(fits) == 1 and TREND_KEYS <= set(fits[0])
    fit = fits[0]
    assert fit["years"] == [2015, 2026] and set(fit["slope"]) == {"estimate", "se"}
    assert set(fit["annual_change"]) == {"estimate", "lower", "upper"}
    assert fit["annual_change"]["lower"] < fit["annual_change"]["estimate"] < fit["annual_change"]["upper"]
    assert {"station", "site", "observation"} <= set(fit["random_sd"])
    assert [i["year"] for i in fit["indices"]][:2] == [2015, 2016] and fit["indices"][0]["index"] == 1.0


def test_estimate_json_and_unknown_species(demo_db, capsys):
    assert main(["--db", demo_db, "estimate", "2026", "--species", "MARVIO", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    sm = next(r for r in rows if r["site"] == "SM")
    assert sm["lower"] < sm["estimate"] < sm["upper"] and sm["total"] > 0
    assert main(["--db", demo_db, "estimate", "2026", "--species", "NOSUCH"]) == 1
    err = capsys.readouterr().err
    assert "NOSUCH" in err and len(err.strip().splitlines()) == 1


def test_power_for_a_programme_on_paper_is_reproducible(tmp_path, capsys):
    args = ["power", "--mean", "5", "--station-sd", "0.5", "--obs-sd", "0.3", "--change", "-0.5", "--over", "10",
            "--stations", "15", "--years", "6", "--replicates", "8", "--seed", "11", "--json"]
    assert main(args) == 0
    first = json.loads(capsys.readouterr().out)
    assert main(args) == 0
    second = json.loads(capsys.readouterr().out)
    result = first["results"][0]
    assert 0 <= result["power"] <= 1 and result["n_replicates"] == 8
    assert first["results"] == second["results"]  # the same seed gives the same answer
    assert first["smallest_design"]["target"] == 0.8
    assert first["years_needed"]["vary"] == "n_years"


def test_power_table_says_which_error_and_what_stations_cannot_buy(capsys):
    # a year SD of 0.3 over 6 seasons: the ceiling with unlimited stations is below 80 %
    args = ["power", "--mean", "5", "--station-sd", "0.5", "--obs-sd", "0.3", "--sd-year", "0.3", "--change", "-0.5",
            "--over", "10", "--stations", "15", "--years", "6", "--replicates", "10", "--seed", "11", "--no-search"]
    assert main(args) == 0
    captured = capsys.readouterr()
    assert "power (simulated, +/- 1 MC SE)" in captured.out and "ceiling (unlimited stations)" in captured.out
    assert "+/- 1 Monte-Carlo SE, the figure +/- 2" in captured.err
    assert "Over 6 seasons no number of stations reaches 80% power" in captured.err
    assert "only more years help" in captured.err
    assert main(args[:-1] + ["--sd-year", "-1", "--no-search"]) == 2
