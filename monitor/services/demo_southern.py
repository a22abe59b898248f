"""A southern-summer variant of the invented demo reserve: the same sites, stations and records, half a year on.

The variant is made from the demo's own files (never changing them): every date moves six months later, so
the field season runs from 1 December to 28 February across the new year, species windows move with it
(several of them now wrap the new year too), and the reserve lies in the southern hemisphere (EPSG:32755,
WGS 84 / UTM zone 55S: the same invented easting and northing, a different place).  A visit of mid-June
2020 becomes one of mid-December 2020, and one of early July 2020 becomes early January 2021: both belong to
season 2020, the season in which the round started.
"""

from __future__ import annotations

import calendar
import csv
import datetime as dt
import json
import re
import shutil
from collections.abc import Callable
from pathlib import Path

from monitor.config import demo_source_dir
from monitor.errors import InputError, InputProblem

SOUTHERN_EPSG = 32755
SOUTHERN_WINDOW = ("12-01", "02-28")
SHIFT_MONTHS = 6
_DATE = re.compile(r"^(\d{4})-(\d{2})-(\d{2})$")
_MONTH_DAY = re.compile(r"^(\d{2})-(\d{2})$")


def shift_date(day: dt.date, months: int = SHIFT_MONTHS) -> dt.date:
    """``day`` moved ``months`` later, the day of month kept where the month has it (else its last day)."""
    index = day.year * 12 + day.month - 1 + months
    year, month = divmod(index, 12)
    return dt.date(year, month + 1, min(day.day, calendar.monthrange(year, month + 1)[1]))


def shift_month_day(text: str, months: int = SHIFT_MONTHS) -> str:
    """A month-day ``MM-DD`` moved ``months`` later (29 February and other missing days become the month's last,
    28 February for February)."""
    m, d = (int(v) for v in text.split("-"))
    month = (m - 1 + months) % 12 + 1
    last = 28 if month == 2 else calendar.monthrange(2023, month)[1]
    return f"{month:02d}-{min(d, last):02d}"


def _shift_cell(value: str) -> str:
    m = _DATE.match(value.strip())
    if m:
        return shift_date(dt.date(int(m.group(1)), int(m.group(2)), int(m.group(3)))).isoformat()
    return value


def _rewrite_csv(path: Path, columns: dict[str, Callable[[str], str]]) -> None:
    with path.open(newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    header = rows[0]
    at = {i: columns[h] for i, h in enumerate(header) if h in columns}
    with path.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        for row in rows[1:]:
            writer.writerow([at[i](v) if i in at and v else v for i, v in enumerate(row)])


def write_southern_variant(folder: Path, source: Path | None = None) -> Path:
    """Write the southern variant's set-up files and field sheets into ``folder`` (empty or new)."""
    folder = Path(folder)
    if folder.exists() and any(folder.iterdir()):
        raise InputError(InputProblem(str(folder), None, None, None, "an empty or new folder for the variant"))
    source = Path(source or demo_source_dir())
    shutil.copytree(source, folder, dirs_exist_ok=True,
                    ignore=shutil.ignore_patterns("__pycache__", "*.pyc", "generate.py"))
    programme = json.loads((folder / "programme.json").read_text(encoding="utf-8"))
    programme["code"] = f"{programme['code']}S"
    programme["name"] += " (southern-summer variant)"
    programme["description"] = ("The demo reserve half a year on, in the southern hemisphere: field season "
                                "1 December to 28 February (invented).")
    programme["crs_epsg"] = SOUTHERN_EPSG
    for protocol in programme.get("protocols", []):
        protocol["effective_from"] = _shift_cell(protocol["effective_from"])
    (folder / "programme.json").write_text(json.dumps(programme, indent=2) + "\n", encoding="utf-8")
    sites = json.loads((folder / "sites.geojson").read_text(encoding="utf-8"))
    sites["crs"] = {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{SOUTHERN_EPSG}"}}
    for feature in sites["features"]:
        props = feature["properties"]
        if props.get("access_until"):
            props["access_until"] = _shift_cell(props["access_until"])
    (folder / "sites.geojson").write_text(json.dumps(sites, indent=1) + "\n", encoding="utf-8")
    with (folder / "windows.csv").open("w", newline="", encoding="utf-8") as handle:
        csv.writer(handle, lineterminator="\n").writerows([["scope", "start", "end"], ["programme", *SOUTHERN_WINDOW]])
    _rewrite_csv(folder / "species.csv", {"window_start": shift_month_day, "window_end": shift_month_day})
    _rewrite_csv(folder / "stations.csv", {"established": _shift_cell, "retired": _shift_cell})
    _rewrite_csv(folder / "observers.csv", {"trained": _shift_cell})
    _rewrite_csv(folder / "management_events.csv", {"start_date": _shift_cell, "end_date": _shift_cell})
    for sheet in sorted((folder / "records").glob("season_*.csv")):
        _rewrite_csv(sheet, {"date": _shift_cell})
    (folder / "crews.json").write_text(json.dumps(SOUTHERN_CREWS, indent=2) + "\n", encoding="utf-8")
    return folder


#: the season the variant plans: December 2026 to February 2027, after its last season of records (2025)
SOUTHERN_SEASON = 2026
#: holidays nobody works in the variant's plan (invented rule of the invented trust)
SOUTHERN_BLOCKED = (dt.date(2026, 12, 24), dt.date(2026, 12, 25), dt.date(2026, 12, 26), dt.date(2026, 12, 31),
                    dt.date(2027, 1, 1))
#: the variant's crew: one volunteer team of three working Tuesdays and Thursdays, six hours a day
SOUTHERN_CREWS = {"teams": [{"code": "V1", "members": ["OBS01", "OBS03", "OBS05"], "hours_per_day": 6,
                             "walking_speed_kmh": 3, "working_weekdays": ["tue", "thu"]}],
                  "blocked_dates": [d.isoformat() for d in SOUTHERN_BLOCKED], "day_start": "07:30"}


def run_southern_demo(folder: Path, *, echo: Callable[[str], None] = lambda _m: None,
                      last_season: int = SOUTHERN_SEASON - 1) -> list[tuple[str, object]]:
    """Build the southern variant in ``folder`` and plan its season across the new year.

    Steps: the variant's files, a fresh database, set-up, the seasons of records up to ``last_season``
    (January visits go to the round that opened in December), the stations due in the next season, the
    plan across the new year for the variant's crew (``crews.json``: one volunteer team on Tuesdays and
    Thursdays, holidays blocked), and the field pack and calendar of the
    first team-day in January.
    """
    from monitor.services import schedule, setup
    from monitor.services.imports import import_records

    folder = Path(folder)
    if folder.exists() and any(folder.iterdir()):
        raise InputError(InputProblem(str(folder), None, None, None, "an empty or new folder for the demo"))
    source = folder / "programme_files"
    echo(f"1. writing the southern-summer variant of the demo reserve into {source}")
    write_southern_variant(source)
    db = str(folder / "monitor.sqlite")
    setup.init_database(db)
    echo("2. setting it up (season window 1 December to 28 February)")
    code, _loaded = setup.setup_folder(db, source)
    sheets = [p for p in sorted((source / "records").glob("season_*.csv"))
              if int(p.stem.split("_")[1]) <= last_season]
    echo(f"3. importing {len(sheets)} seasons of field sheets (January visits belong to December's round)")
    imports = [import_records(db, sheet, programme_code=code, who="demo") for sheet in sheets]
    season = last_season + 1
    echo(f"4. stations due in season {season} (December {season} to February {season + 1})")
    due = schedule.due_for_season(db, season, programme_code=code)
    echo(f"5. planning season {season} across the new year: one volunteer team on Tuesdays and Thursdays "
         "(crews.json; the holidays off)")
    plan = schedule.plan_season(db, season, crews_file=source / "crews.json", seed=season, programme_code=code)
    january = [td for td in plan.plan.team_days if td.date.year == season + 1] or list(plan.plan.team_days)
    first = january[0]
    echo(f"6. writing the field pack for team {first.team} on {first.date.isoformat()}")
    pack = schedule.write_field_packs(db, season, folder / "field_packs", team=first.team, day=first.date,
                                      programme_code=code)
    return [("imports", imports), ("due", due), ("plan", plan), ("field_pack", pack)]
