"""Spatial balance of extended placements beside fresh BAS and simple random ones (Stevens & Olsen 2004).

    PYTHONPATH=. python tests/benchmarks/balance_extension.py [--seeds 50]

Prints the mean Voronoi balance B (lower is more balanced) of 30 stations on the L-shaped test site with
a pond (tests/design/test_extend.py): 12 BAS stations extended by 18, a fresh BAS sample of 30, and a
simple random sample of 30, each with a 10 m minimum separation, over the given number of seeds.
"""

from __future__ import annotations

import argparse

import numpy as np

from monitor import columns as C
from monitor.design import balanced_acceptance, extend_balanced, simple_random
from tests.design.test_extend import POND, SITE, voronoi_balance


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--seeds", type=int, default=50)
    args = parser.parse_args()
    rows = {"BAS 12 extended by 18": [], "BAS 30 fresh": [], "simple random 30": []}
    for s in range(args.seeds):
        first = balanced_acceptance(SITE, 12, s, exclusions=[POND], min_separation=10.0)
        grown = extend_balanced(first, SITE, 18, exclusions=[POND])
        rows["BAS 12 extended by 18"].append(voronoi_balance(grown.stations[[C.X, C.Y]].to_numpy()))
        fresh = balanced_acceptance(SITE, 30, 1000 + s, exclusions=[POND], min_separation=10.0)
        rows["BAS 30 fresh"].append(voronoi_balance(fresh.stations[[C.X, C.Y]].to_numpy()))
        rand = simple_random(SITE, 30, 2000 + s, exclusions=[POND], min_separation=10.0, resolution=1.0)
        rows["simple random 30"].append(voronoi_balance(rand.stations[[C.X, C.Y]].to_numpy()))
    base = np.mean(rows["simple random 30"])
    for name, values in rows.items():
        v = np.asarray(values)
        print(f"{name:24s} B = {v.mean():.3f} (SE {v.std(ddof=1) / np.sqrt(len(v)):.3f}), "
              f"{v.mean() / base:.2f} x simple random")


if __name__ == "__main__":
    main()
