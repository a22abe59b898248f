"""Invented programmes and field sheets of any size, for the import tests and the import benchmark.

Everything here is invented: an imaginary reserve ("Gen Fen") with generated stations, the demo's
invented species, and seeded field sheets in the agreed wide layout (FIELD_LAYOUT.md).  No tests live
in this module; it only generates files.
"""

from __future__ import annotations

import csv
import datetime as dt
import json
import shutil
from pathlib import Path

import numpy as np

from tests.conftest import REPO_ROOT

DEMO = REPO_ROOT / "demo_programme"
SPECIES_COLUMNS = ["MARVIO:count", "CHAORC:count", "GLASED:cover", "HEABEL:frequency/25", "SILGRA:pin_hits/10"]
SITES = ("GA", "GB")
#: every species' own season window (demo species.csv) holds 15 June to 10 July
FIRST_DAY, DAYS = (6, 15), 25


def station_codes(n: int) -> list[str]:
    return [f"G{i:05d}" for i in range(1, n + 1)]


def make_programme(folder: Path, n_stations: int, *, first_year: int = 1990) -> list[str]:
    """Write an invented programme folder with ``n_stations`` annual stations; return the station codes."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "programme.json").write_text(json.dumps({
        "code": "GEN", "name": "Gen Fen invented test programme", "crs_epsg": 32630,
        "description": "Generated for tests (invented).", "organisation": "Gen Fen Trust (invented)",
        "contact": "test officer (invented)",
        "protocols": [{"code": "P1", "description": "generated protocol", "effective_from": f"{first_year}-01-01"}],
    }))
    features = []
    for k, code in enumerate(SITES):
        x0 = 500000.0 + k * 10000.0
        ring = [[x0, 5700000.0], [x0 + 5000.0, 5700000.0], [x0 + 5000.0, 5705000.0], [x0, 5705000.0],
                [x0, 5700000.0]]
        features.append({"type": "Feature", "properties": {"code": code, "name": f"Gen site {code}",
                                                           "habitat": "invented fen"},
                         "geometry": {"type": "Polygon", "coordinates": [ring]}})
    (folder / "sites.geojson").write_text(json.dumps({
        "type": "FeatureCollection", "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32630"}},
        "features": features}))
    codes = station_codes(n_stations)
    with open(folder / "stations.csv", "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["code", "site", "x", "y", "quadrat_width_m", "quadrat_length_m", "placement", "panel"])
        for i, code in enumerate(codes):
            k = i % len(SITES)
            col, row = divmod(i // len(SITES), 400)
            writer.writerow([code, SITES[k], f"{500005.0 + k * 10000.0 + 10.0 * col:.1f}",
                             f"{5700005.0 + 10.0 * row:.1f}", "1.0", "1.0", "random", "ANNUAL"])
    shutil.copy(DEMO / "species.csv", folder / "species.csv")
    shutil.copy(DEMO / "observers.csv", folder / "observers.csv")
    (folder / "panels.csv").write_text(f"code,rule,start_year\nANNUAL,[1-0],{first_year}\n")
    (folder / "windows.csv").write_text("scope,start,end\nprogramme,05-01,09-15\n")
    return codes


def sheet_rows(stations: list[str], years: list[int], rng: np.random.Generator, *,
               missed_share: float = 0.05) -> list[list[str]]:
    """Wide field-sheet rows: one visit per station and year, five target values on each done visit."""
    rows = []
    observers = ["OBS01;OBS02", "OBS03", "OBS04;OBS05", "OBS02"]
    for year in years:
        start = dt.date(year, *FIRST_DAY)
        n = len(stations)
        days = rng.integers(0, DAYS, n)
        missed = rng.random(n) < missed_share
        counts = rng.poisson(8.0, (n, 2))
        cover = np.round(rng.uniform(0, 60, n), 1)
        cells = rng.integers(0, 26, n)
        pins = rng.integers(0, 11, n)
        who = rng.integers(0, len(observers), n)
        for i, station in enumerate(stations):
            date = (start + dt.timedelta(days=int(days[i]))).isoformat()
            if missed[i]:
                rows.append([station, date, "", "missed", "no", "", "ran out of time", "", "", "", "", ""])
            else:
                rows.append([station, date, observers[who[i]], "done", "no", "", "",
                             str(counts[i, 0]), str(counts[i, 1]), f"{cover[i]:g}", str(cells[i]), str(pins[i])])
    return rows


HEADER = ["station", "date", "observers", "status", "repeat", "protocol", "notes", *SPECIES_COLUMNS]


def write_sheet(path: Path, rows: list[list[str]]) -> Path:
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(HEADER)
        writer.writerows(rows)
    return Path(path)
