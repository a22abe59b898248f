"""The demo builds from its files into a fresh database, the same way every time."""

from __future__ import annotations

from monitor.db import Store, queries
from monitor.services import demo
from tests.conftest import REPO_ROOT


def _counts(run) -> dict[str, int]:
    store = Store.open(str(run.database))
    try:
        return queries.table_counts(store)
    finally:
        store.dispose()


def test_demo_builds_twice_with_identical_row_counts(tmp_path):
    # the whole demo, analyses included, runs in tests/test_wheel.py from an installed wheel
    first = demo.build_programme(tmp_path / "one")
    second = demo.build_programme(tmp_path / "two")
    counts = _counts(first)
    assert counts == _counts(second)
    assert counts["station"] == 64 and counts["site"] == 4 and counts["species"] == 5


def test_demo_refuses_a_folder_with_files(tmp_path):
    import pytest

    from monitor.errors import InputError

    (tmp_path / "x.txt").write_text("keep me")
    with pytest.raises(InputError, match="empty or new folder"):
        demo.run_demo(tmp_path)
    assert (tmp_path / "x.txt").read_text() == "keep me"


def test_demo_trends_recover_the_truth_within_three_standard_errors(demo_db, demo_source):
    # The demo's truth (demo_programme/truth.json) has a built-in steady change and a year-to-year
    # fluctuation (SD 0.15) shared by every station.  A single draw must not decide the test: each
    # slope must lie within 3 of its own standard errors of the built-in log(1 + change) (a z limit;
    # the interval is t on the year-based df, so |z| < 3 fails by chance well under 1 % of the time).
    import json
    import math

    from monitor.services import trend

    truth = json.loads((demo_source / "truth.json").read_text(encoding="utf-8"))
    fitted = trend.fit_programme(demo_db)
    assert {t.species for t in fitted} == {k for k in truth if not k.startswith("_")}
    for t in fitted:
        built_in = math.log1p(truth[t.species]["annual_change"])
        z = (t.result.slope - built_in) / t.result.slope_se
        assert abs(z) < 3, f"{t.species}: slope {t.result.slope:+.4f} vs truth {built_in:+.4f} ({z:+.2f} SE)"
        assert t.result.year_random != "none"   # twelve years: the year effect is in every model
        assert t.result.random_sd.get("year", 0.0) < 0.5  # and its SD is of the size built in (0.15)


def test_demo_generator_recovers_the_truth_over_replicate_draws(tmp_path):
    # Regenerate the records with several seeds in-process (the generator's own model, all stations) and
    # fit one count species each time: the mean z over replicates sits near 0 and none is extreme.
    import importlib.util
    import math

    import numpy as np

    from monitor.power import Design, Scenario, VarianceComponents, simulate_dataset
    from monitor.trend import TrendModel

    spec = importlib.util.spec_from_file_location("demo_generate", REPO_ROOT / "demo_programme" / "generate.py")
    generate = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(generate)
    # the generator's population model for a count species, simulated with the power study's simulator
    components = VarianceComponents.from_mean("poisson-lognormal", 6.0, station_sd=generate.STATION_SD,
                                              site_sd=generate.SITE_SD, observation_sd=generate.OBS_SD,
                                              year_sd=generate.YEAR_SD, stations_per_site=8)
    scenario = Scenario(0.06)
    z = []
    for seed in range(6):
        data = simulate_dataset(components, Design(24, 12), scenario, np.random.default_rng([generate.SEED, seed]))
        result = TrendModel(data, measure="count", family="poisson-lognormal").fit(profile=False, indices=False)
        z.append((result.slope - math.log1p(0.06)) / result.slope_se)
    assert all(abs(v) < 3.5 for v in z)
    assert abs(np.mean(z)) < 3 / math.sqrt(len(z)) + 0.5  # mean of 6 near-standard z within 3 SE (t tails)


def test_demo_truth_table_sets_every_species_truth_beside_its_estimate(demo_db, demo_source):
    # tests/demo_truth.py prints the table the issue note quotes; its "built in + drawn years" truth
    # is the built-in slope plus the least-squares slope of the twelve drawn year effects, checked here
    # against scipy.stats.linregress (scipy 1.x) on the same draws.
    import json
    import math

    import pytest
    from scipy.stats import linregress

    from tests.demo_truth import markdown, rows

    truth = json.loads((demo_source / "truth.json").read_text(encoding="utf-8"))
    table = rows(demo_db, truth)
    assert sorted(r["species"] for r in table) == sorted(k for k in truth if not k.startswith("_"))
    for r in table:
        e = truth[r["species"]]
        years = sorted(e["year_effects"])
        fit = linregress([int(y) for y in years], [e["year_effects"][y] for y in years])
        assert r["realised"] == pytest.approx(math.expm1(math.log1p(e["annual_change"]) + fit.slope), abs=1e-12)
        assert r["lower"] <= r["estimate"] <= r["upper"]
    text = markdown(table)
    assert all(f"| {r['species']} |" in text for r in table)
