"""Invented programmes and field sheets of any size, for the import tests and the import benchmark.

Everything here is invented: an imaginary reserve ("Gen Fen") with generated stations, the demo's
invented species, and seeded field sheets in the wide layout (docs/files.md, "field records").  No tests live
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


# --- databases for the tests: built once per session and engine, copied for each test ------------------------

def dump(url: str) -> dict[str, list[tuple]]:
    """Every row of every table of a database (sorted), for before/after comparisons."""
    from sqlalchemy import create_engine, inspect, text

    engine = create_engine(url if "://" in url else f"sqlite:///{url}")
    try:
        with engine.connect() as connection:
            names = sorted(inspect(connection).get_table_names())
            return {name: sorted(connection.execute(text(f'SELECT * FROM "{name}"')).fetchall(), key=repr)
                    for name in names}
    finally:
        engine.dispose()


def postgres_admin():
    from sqlalchemy import create_engine
    from sqlalchemy.engine import make_url

    from tests.conftest import POSTGRES_URL

    return make_url(POSTGRES_URL), create_engine(make_url(POSTGRES_URL), isolation_level="AUTOCOMMIT")


def create_postgres_database(template: str | None = None) -> str:
    import uuid

    from sqlalchemy import text

    url, admin = postgres_admin()
    name = f"monitor_t_{uuid.uuid4().hex[:12]}"
    try:
        with admin.connect() as connection:
            connection.execute(text(f'CREATE DATABASE "{name}"' + (f' TEMPLATE "{template}"' if template else "")))
    finally:
        admin.dispose()
    return url.set(database=name).render_as_string(hide_password=False)


def drop_postgres_database(db_url: str) -> None:
    from sqlalchemy import text
    from sqlalchemy.engine import make_url

    name = make_url(db_url).database
    _url, admin = postgres_admin()
    try:
        with admin.connect() as connection:
            connection.execute(text("SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE datname = :n"),
                               {"n": name})
            connection.execute(text(f'DROP DATABASE IF EXISTS "{name}"'))
    finally:
        admin.dispose()


def skip_without_postgres() -> None:
    import os

    import pytest

    from tests.conftest import POSTGRES_URL

    if not POSTGRES_URL:
        if os.environ.get("MONITOR_REQUIRE_POSTGRES"):
            pytest.fail("MONITOR_REQUIRE_POSTGRES is set but MONITOR_TEST_POSTGRES_URL is not")
        pytest.skip("PostgreSQL run skipped: set MONITOR_TEST_POSTGRES_URL to a server URL (.ci/run does)")


class Template:
    """A database built once (``build(url)``) and copied cheaply for each test: a file copy on SQLite,
    ``CREATE DATABASE ... TEMPLATE`` on PostgreSQL."""

    def __init__(self, engine: str, folder: Path, build):
        self.engine = engine
        self.folder = Path(folder)
        self.made: list[str] = []
        if engine == "sqlite":
            self.url = str(self.folder / "template.sqlite")
        else:
            self.url = create_postgres_database()
        from monitor.services import setup

        setup.init_database(self.url)
        build(self.url)

    def copy(self) -> str:
        from sqlalchemy.engine import make_url

        if self.engine == "sqlite":
            target = self.folder / f"copy_{len(self.made)}.sqlite"
            shutil.copy(self.url, target)
            url = str(target)
        else:
            url = create_postgres_database(make_url(self.url).database)
        self.made.append(url)
        return url

    def close(self) -> None:
        if self.engine == "postgresql":
            for url in [*self.made, self.url]:
                drop_postgres_database(url)


def build_demo(url: str, seasons=range(2015, 2024)) -> None:
    """The invented demo programme with the given seasons imported through the importer."""
    from monitor.services import setup
    from monitor.services.imports import import_records

    setup.setup_folder(url, DEMO)
    for year in seasons:
        import_records(url, DEMO / "records" / f"season_{year}.csv", who="fixture")


import pytest  # noqa: E402  (fixtures shared by the records, quality and export tests)


@pytest.fixture(scope="session", params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def demo_template(request, tmp_path_factory):
    """The demo programme with seasons 2015-2023 imported, once per engine and session."""
    if request.param == "postgresql":
        skip_without_postgres()
    template = Template(request.param, tmp_path_factory.mktemp(f"demo_{request.param}"), build_demo)
    yield template
    template.close()


@pytest.fixture
def demo_db(demo_template) -> str:
    """A fresh copy of the demo database (seasons 2015-2023 stored; 2024-2026 sheets not yet imported)."""
    return demo_template.copy()
