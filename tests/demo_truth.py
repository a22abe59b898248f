"""The demo's truth beside what `monitor` estimates from the demo's records (a table for people to read).

The demo (demo_programme/generate.py, truth in demo_programme/truth.json) builds in, for each
species, a steady annual change and one good-or-bad-year draw a year shared by all its stations
(SD 0.15 on the link scale).  A programme can only see the built-in change plus the slope of the
twelve drawn year effects ("built-in + drawn years" below), so both truths are shown.  The
estimate is the annual change of `monitor trend` on the demo database (full maximum likelihood,
year effect on, t reference on the years), with its 95 % interval and call; z is the estimate's
distance from the built-in slope in its own standard errors (tests/test_demo.py holds |z| < 3).

    python tests/demo_truth.py                 # builds the demo in a temporary folder
    python tests/demo_truth.py --db demo.sqlite
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

SCALE = {"count": "mean count", "cover": "odds of cover", "frequency": "odds of a cell",
         "pin_hits": "odds of a pin hit", "presence": "odds of presence"}


def realised_slope(entry: dict) -> float:
    """Built-in log(1 + change) plus the least-squares slope of the drawn year effects (link scale)."""
    years = np.array(sorted(int(y) for y in entry["year_effects"]), float)
    draws = np.array([entry["year_effects"][str(int(y))] for y in years])
    return math.log1p(entry["annual_change"]) + float(np.polyfit(years - years.mean(), draws, 1)[0])


def rows(db: str, truth: dict) -> list[dict]:
    """One row per species of the programme's overall trend: truth, estimate, interval, call, z."""
    from monitor.services import trend

    out = []
    for t in trend.fit_programme(db, save=False):
        if t.area_kind != "all" or t.species not in truth:
            continue
        entry = truth[t.species]
        r = t.result
        built_in = math.log1p(entry["annual_change"])
        out.append({"species": t.species, "measure": t.measure, "scale": SCALE.get(t.measure, t.measure),
                    "built_in": entry["annual_change"], "realised": math.expm1(realised_slope(entry)),
                    "estimate": r.annual_change.estimate, "lower": r.annual_change.lower,
                    "upper": r.annual_change.upper, "call": r.call, "year_sd_true": entry["year_sd"],
                    "year_sd_fitted": r.random_sd.get("year", float("nan")),
                    "z": (r.slope - built_in) / r.slope_se})
    return out


def markdown(table: list[dict]) -> str:
    pct = lambda v: f"{100 * v:+.1f} %"  # noqa: E731
    lines = ["| species | annual change of | built in | built in + drawn years | estimate (95 % interval) "
             "| call | year SD true / fitted | z |", "|---|---|---:|---:|---|---|---:|---:|"]
    for r in table:
        lines.append(f"| {r['species']} | {r['scale']} | {pct(r['built_in'])} | {pct(r['realised'])} | "
                     f"{pct(r['estimate'])} ({pct(r['lower'])} to {pct(r['upper'])}) | {r['call']} | "
                     f"{r['year_sd_true']:.2f} / {r['year_sd_fitted']:.2f} | {r['z']:+.2f} |")
    return "\n".join(lines)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--db", help="a built demo database (default: build one in a temporary folder)")
    a = p.parse_args(argv)
    truth = json.loads((ROOT / "demo_programme" / "truth.json").read_text(encoding="utf-8"))
    if a.db:
        print(markdown(rows(a.db, truth)))
        return 0
    from monitor.services import demo

    with tempfile.TemporaryDirectory() as tmp:
        run = demo.build_programme(Path(tmp) / "demo")
        print(markdown(rows(str(run.database), truth)))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
