"""Reader for management events (grazing, cutting, burning, flooding, ...) per site or station."""

from __future__ import annotations

import os

import pandas as pd

from monitor import columns as C
from monitor.io import filespec as FS
from monitor.io._tables import Problems, check_columns, get, parse_date, read_raw_table

EVENT_COLUMNS = [C.SITE, C.STATION, "kind", "start_date", "end_date", "notes", "source_row"]
KNOWN_KINDS = FS.EVENT_KINDS


def read_management_events_csv(source: str | os.PathLike[str], *, sites: set[str] | None = None,
                               stations: set[str] | None = None) -> pd.DataFrame:
    """Read management events: site and/or station, kind, start_date, end_date (optional), notes.

    Each event names a site or a station (or both); dates are ISO YYYY-MM-DD and the end, when given,
    is not before the start.  ``kind`` is one of KNOWN_KINDS.
    """
    table = read_raw_table(source)
    problems = Problems(table.file)
    if check_columns(table, FS.EVENTS.required(), FS.EVENTS.optional(), problems):
        problems.raise_if_any()
    records = []
    for number, cells in table.rows:
        raw = table.raw_name
        site = get(table, cells, C.SITE) or None
        station = get(table, cells, C.STATION) or None
        if site is None and station is None:
            problems.add(number, C.SITE, None, "a site or a station code")
        if site is not None and sites is not None and site not in sites:
            problems.add(number, raw(C.SITE), site, "a site code of the programme")
        if station is not None and stations is not None and station not in stations:
            problems.add(number, raw(C.STATION), station, "a station code of the programme")
        kind = get(table, cells, "kind").strip().lower().replace(" ", "_")
        if kind not in KNOWN_KINDS:
            problems.add(number, raw("kind"), get(table, cells, "kind") or None, f"one of {', '.join(KNOWN_KINDS)}")
        start, why = parse_date(get(table, cells, "start_date"))
        if start is None:
            problems.add(number, raw("start_date"), get(table, cells, "start_date") or None, why or "an ISO date")
        end = None
        end_text = get(table, cells, "end_date")
        if end_text:
            end, why = parse_date(end_text)
            if end is None:
                problems.add(number, raw("end_date"), end_text, why or "an ISO date")
            elif start is not None and end < start:
                problems.add(number, raw("end_date"), end_text, "an end date on or after the start date")
        records.append({C.SITE: site, C.STATION: station, "kind": kind, "start_date": start, "end_date": end,
                        "notes": get(table, cells, "notes"), "source_row": number})
    problems.raise_if_any()
    frame = pd.DataFrame(records, columns=EVENT_COLUMNS)
    frame.attrs["file"] = table.file
    return frame
