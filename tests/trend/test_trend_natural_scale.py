"""The trend on the measure's own scale: yearly estimates and the fitted line share one baseline,
binomial trends are reported as a change of the share (and the odds ratio is labelled as such),
and the cover transform is the plain logit unless 0 or 100 % occur.

Outside references: lme4 1.1-31 on its real cbpp data (tests/fixtures/trend/natural_scale.R ->
natural_scale.json, R 4.2.2; the population-averaged share computed there with R's integrate),
statsmodels 0.14+ MixedLM for the plain-logit cover model.
"""

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy.special import expit, logit

from monitor.trend import TrendModel, logit_cover

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures" / "trend"


@pytest.fixture(scope="module")
def natural_ref():
    return json.loads((FIXTURES / "natural_scale.json").read_text())


def cbpp_frame(cbpp):
    return cbpp.rename(columns={"herd": "station", "period": "year", "incidence": "occupied", "size": "cells"})


def test_share_change_on_cbpp_matches_lme4(cbpp, natural_ref):
    # 4 periods: below the 5 years of the year-effect rule, so the model is glmer's exactly
    r = TrendModel(cbpp_frame(cbpp), "frequency", observation_effect=False).fit(profile=False, indices=True)
    ref = natural_ref["linear"]
    assert r.year_random == "none"
    # lme4 1.1-31 glmer(cbind(incidence, size - incidence) ~ t + (1 | herd), binomial), Laplace
    assert r.slope == pytest.approx(ref["fixef"]["t"], abs=1e-3)
    lc = r.level_change
    assert lc.unit == "% of cells occupied" and (lc.first_year, lc.last_year) == (1, 4)
    # the share of cells, mean over herds, first and last period of the fitted line (percent):
    # natural_scale.R, integrate() over the herd effect
    assert lc.first.estimate == pytest.approx(ref["first"][0], abs=0.02)
    assert lc.last.estimate == pytest.approx(ref["last"][0], abs=0.02)
    for ours, theirs in ((lc.first, ref["first"]), (lc.last, ref["last"]), (lc.difference, ref["difference"])):
        # bounds from eta +- 1.96 se; glmer's SEs and ours agree to about 1 % (project tolerance for lme4 SEs)
        assert ours.lower == pytest.approx(theirs[1], abs=0.02 * abs(theirs[0]) + 0.05)
        assert ours.upper == pytest.approx(theirs[2], abs=0.02 * abs(theirs[0]) + 0.05)
    assert lc.difference.estimate == pytest.approx(ref["difference"][0], abs=0.03)
    # the share fell by about 15 percentage points; the odds fell by 43 % a year, and are labelled so
    assert r.change_scale == "odds" and "odds" in r.change_label
    d = r.to_dict()
    assert d["change_scale"] == "odds" and d["level_change"]["unit"] == "% of cells occupied"
    assert "in the odds" in r.summary()
    # the mean over herds is not the typical herd's share (lme4 predict(re.form = NA)): both shown differ
    assert lc.first.estimate > ref["conditional_first_last"][0]


def test_yearly_shares_on_cbpp_match_lme4(cbpp, natural_ref):
    r = TrendModel(cbpp_frame(cbpp), "frequency", observation_effect=False).fit(profile=False, indices=True)
    # lme4 1.1-31 glmer(... ~ period + (1 | herd)): share per period, mean over herds (integrate)
    for (_, row), ref in zip(r.yearly.iterrows(), natural_ref["yearly"], strict=True):
        assert row["estimate"] == pytest.approx(ref[0], abs=0.03)
        assert row["lower"] == pytest.approx(ref[1], abs=0.02 * ref[0] + 0.05)
        assert row["upper"] == pytest.approx(ref[2], abs=0.02 * ref[0] + 0.05)


def simulate_counts(rng, year_dev, slope=-0.06, n_station=30, area=0.25):
    years = np.arange(2010, 2010 + len(year_dev))
    st = np.repeat(np.arange(n_station), len(years))
    yr = np.tile(years, n_station)
    eta = 2.0 + slope * (yr - years.mean()) + rng.normal(0, 0.5, n_station)[st] + np.asarray(year_dev)[yr - 2010]
    return pd.DataFrame({"station": st, "site": st % 5, "year": yr, "quadrat_area_m2": area,
                         "count": rng.poisson(np.exp(eta + rng.normal(0, 0.2, len(st))))})


def test_points_scatter_around_the_line_when_the_first_year_was_a_good_one():
    # a declining species whose first year was unusually good: before, the line was pinned at index 1
    # in that year, so every later point sat on one side of it
    dev = np.array([0.5, -0.1, 0.1, -0.15, 0.05, 0.1, -0.1, 0.0, 0.1, -0.05])
    d = simulate_counts(np.random.default_rng(5), dev)
    r = TrendModel(d, "count").fit(profile=False, indices=True)
    pts = r.indices.set_index("year")["index"]
    line = r.fitted_trend.set_index("year")["fit"]
    later = [y for y in pts.index if y != 2010]
    above = sum(pts[y] > line[y] for y in later)
    assert 2 <= above <= len(later) - 2
    # the same holds on the natural scale, where points and line are both absolute levels
    nat = r.yearly.set_index("year")["estimate"]
    nline = r.trend_line.set_index("year")["fit"]
    assert all((nat[y] > nline[y]) == (pts[y] > line[y]) for y in pts.index)
    # the index is the yearly estimate relative to the base year, and the relative line is the natural
    # line over the same base: one baseline on both scales
    np.testing.assert_allclose(nat / nat[2010], pts, rtol=1e-9)
    np.testing.assert_allclose(nline / nat[2010], line, rtol=1e-9)


def test_counts_per_square_metre_follow_the_data():
    dev = np.array([0.0, 0.2, -0.2, 0.1, -0.1, 0.0, 0.15, -0.15])
    d = simulate_counts(np.random.default_rng(7), dev)
    r = TrendModel(d, "count").fit(profile=False, indices=True)
    assert r.natural_unit == "mean count per m²"
    # the observed mean count per m^2 of each year lies within its yearly 95 % interval (common practice check:
    # with every station visited every year the population-averaged model mean is the yearly mean)
    observed = (d["count"] / d["quadrat_area_m2"]).groupby(d["year"]).mean()
    y = r.yearly.set_index("year")
    inside = ((y["lower"] <= observed) & (observed <= y["upper"])).mean()
    assert inside >= 0.85
    assert (y["n_stations"] == 30).all()
    # the line's period ratio is the period change for a log link, exactly
    assert r.level_change.ratio.estimate == pytest.approx(r.period_change.estimate, rel=1e-9)
    d2 = d.assign(quadrat_area_m2=np.where(d.station % 2 == 0, 0.25, 1.0))
    assert TrendModel(d2, "count").fit(profile=False, indices=False, fast=False).natural_unit == "mean count per quadrat"


def test_cover_uses_the_plain_logit_when_no_value_is_zero_or_full():
    rng = np.random.default_rng(3)
    st = np.repeat(np.arange(25), 8)
    yr = np.tile(np.arange(2012, 2020), 25)
    z = -1.0 - 0.05 * (yr - 2015.5) + rng.normal(0, 0.6, 25)[st] + rng.normal(0, 0.4, len(st))
    d = pd.DataFrame({"station": st, "year": yr, "cover_pct": 100 * expit(z)})
    assert d["cover_pct"].between(0, 100, inclusive="neither").all()
    r = TrendModel(d, "cover", site_effect=False, year_random="none").fit(profile=False, indices=True)
    assert r.cover_eps is None and r.cover_transform.startswith("the logit of cover")
    assert "cover_adjusted" not in {x.code for x in r.diagnostics}
    # statsmodels MixedLM (ML) on logit(cover / 100) with station groups: the same model
    d["z"] = logit(d["cover_pct"] / 100)
    d["t"] = d["year"] - 2015.5
    ml = smf.mixedlm("z ~ t", d, groups=d["station"]).fit(reml=False)
    assert r.slope == pytest.approx(ml.params["t"], abs=1e-5)
    # % cover on the natural scale: the mean cover of each year is inside its interval in most years
    observed = d.groupby("year")["cover_pct"].mean()
    y = r.yearly.set_index("year")
    assert ((y["lower"] <= observed) & (observed <= y["upper"])).mean() >= 0.75
    # one value of 0 % brings in the adjustment constant, and the result says so
    d0 = d.copy()
    d0.loc[0, "cover_pct"] = 0.0
    r0 = TrendModel(d0, "cover", site_effect=False, year_random="none").fit(profile=False, indices=False)
    expected = min(d0.loc[d0.cover_pct > 0, "cover_pct"].min(), (100 - d0["cover_pct"]).min()) / 100
    assert r0.cover_eps == pytest.approx(expected)
    assert "adjusted logit" in r0.cover_transform and "cover_adjusted" in {x.code for x in r0.diagnostics}
    assert logit_cover(np.array([10.0, 50.0]))[1] is None
