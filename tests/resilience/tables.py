"""Helpers for the resilience tests: the stored records by natural keys, and invented crew sheets.

Two databases that received the same work in a different order give rows different ids and times; the
``records_by_key`` dump names every row by what it is about (station, season, repeat number, species,
measure) instead, and leaves out ids and timestamps, so the two can be compared row for row.

No tests live here.
"""

from __future__ import annotations

import csv
from pathlib import Path

from tests.services.test_records_data import DEMO


def _engine(url: str):
    from sqlalchemy import create_engine

    return create_engine(url if "://" in url else f"sqlite:///{url}")


VISIT_KEY = """
    SELECT v.id, t.code, r.year, v.repeat_no FROM visit v
    JOIN station t ON t.id = v.station_id JOIN round r ON r.id = v.round_id
"""

QUERIES = {
    "round": "SELECT year, window_start, window_end, status FROM round",
    "import_batch": "SELECT file_name, content_hash, row_count, imported_by FROM import_batch",
    "visit": """
        SELECT t.code, r.year, v.repeat_no, v.date, v.status, v.notes, pv.code, b.file_name
        FROM visit v JOIN station t ON t.id = v.station_id JOIN round r ON r.id = v.round_id
        LEFT JOIN protocol_version pv ON pv.id = v.protocol_id LEFT JOIN import_batch b ON b.id = v.import_batch_id
    """,
    "observation": """
        SELECT t.code, r.year, v.repeat_no, sp.code, o.measure, o.value, o.n
        FROM observation o JOIN visit v ON v.id = o.visit_id JOIN station t ON t.id = v.station_id
        JOIN round r ON r.id = v.round_id JOIN species sp ON sp.id = o.species_id
    """,
    "visit_observer": """
        SELECT t.code, r.year, v.repeat_no, ob.code
        FROM visit_observer vo JOIN visit v ON v.id = vo.visit_id JOIN station t ON t.id = v.station_id
        JOIN round r ON r.id = v.round_id JOIN observer ob ON ob.id = vo.observer_id
    """,
    "covariate": """
        SELECT t.code, r.year, v.repeat_no, c.name, c.unit, c.value
        FROM covariate c JOIN station t ON t.id = c.station_id
        LEFT JOIN visit v ON v.id = c.visit_id LEFT JOIN round r ON r.id = v.round_id
    """,
}


def records_by_key(url: str) -> dict[str, list[tuple]]:
    """Rounds, import batches, visits, values, observers, covariates and the change log, by natural keys
    (sorted; no ids, no times)."""
    from sqlalchemy import text

    engine = _engine(url)
    try:
        with engine.connect() as connection:
            out = {name: sorted((tuple(_plain(x) for x in row) for row in connection.execute(text(sql))), key=repr)
                   for name, sql in QUERIES.items()}
            visit_key = {row[0]: tuple(row[1:]) for row in connection.execute(text(VISIT_KEY))}
            observation_key = {row[0]: (*visit_key[row[1]], row[2], row[3]) for row in connection.execute(text(
                "SELECT o.id, o.visit_id, sp.code, o.measure FROM observation o "
                "JOIN species sp ON sp.id = o.species_id"))}
            log = []
            for table, row_id, field, old, new, reason, who in connection.execute(text(
                    "SELECT table_name, row_id, field, old_value, new_value, reason, changed_by FROM change_log")):
                key = {"observation": observation_key, "visit": visit_key}.get(table, {}).get(row_id, (row_id,))
                log.append((table, key, field, old, new, reason, who))
            out["change_log"] = sorted(log, key=repr)
            return out
    finally:
        engine.dispose()


def _plain(value: object) -> object:
    """Dates as ISO text and numbers as floats, whichever the driver hands back."""
    import datetime as dt
    from decimal import Decimal

    if isinstance(value, (dt.date, dt.datetime)):
        return value.isoformat()[:10]
    if isinstance(value, Decimal):
        return float(value)
    return value


# --- invented crew sheets from the demo's seasons -------------------------------------------------------------

def demo_stations() -> list[str]:
    with open(DEMO / "stations.csv", newline="") as handle:
        return sorted(row["code"] for row in csv.DictReader(handle))


def season_rows(year: int) -> tuple[list[str], list[dict]]:
    with open(DEMO / "records" / f"season_{year}.csv", newline="", encoding="utf-8") as handle:
        reader = csv.DictReader(handle)
        return list(reader.fieldnames or []), list(reader)


def write_rows(path: Path, header: list[str], rows: list[dict]) -> Path:
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.DictWriter(handle, fieldnames=header)
        writer.writeheader()
        writer.writerows(rows)
    return path
