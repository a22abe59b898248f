"""The crews file (JSON) for season planning: teams with members, hours, walking speed, working weekdays and
blocked dates; programme-wide blocked dates, day start, path factor and start points per site.  Its keys
are those of its one definition (``monitor.io.filespec``, docs/files.md)."""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Any

from monitor.errors import InputError, InputProblem
from monitor.io import filespec as FS
from monitor.io.geojson import read_json

WEEKDAYS = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")


def _crew_problem(file: str, fld: str, value: object, expected: str) -> InputError:
    return InputError(InputProblem(file, None, fld, value, expected))


def _dates(values: Any, file: str, fld: str) -> tuple[dt.date, ...]:
    if values is None:
        return ()
    if not isinstance(values, list):
        raise _crew_problem(file, fld, values, "a list of ISO dates")
    out = []
    for v in values:
        try:
            out.append(dt.date.fromisoformat(str(v)))
        except ValueError:
            raise _crew_problem(file, fld, v, "an ISO date YYYY-MM-DD") from None
    return tuple(out)


def _weekdays(values: Any, file: str, fld: str) -> tuple[int, ...]:
    if values is None:
        return (0, 1, 2, 3, 4)
    if not isinstance(values, list):
        raise _crew_problem(file, fld, values, "a list of weekdays (mon..sun or 0..6, Monday = 0)")
    out = []
    for v in values:
        if isinstance(v, int) and 0 <= v <= 6:
            out.append(v)
        elif isinstance(v, str) and v.strip().lower()[:3] in WEEKDAYS:
            out.append(WEEKDAYS.index(v.strip().lower()[:3]))
        else:
            raise _crew_problem(file, fld, v, "a weekday (mon..sun or 0..6, Monday = 0)")
    return tuple(sorted(set(out)))


def _number(value: Any, file: str, fld: str, default: float) -> float:
    if value is None:
        return default
    try:
        return float(value)
    except (TypeError, ValueError):
        raise _crew_problem(file, fld, value, "a number") from None


def read_crews(path: str | Path) -> dict[str, Any]:
    """Read a crews file (JSON): teams (each a dict of the planner's team fields) with members, hours, walking speed, working weekdays and blocked
    dates; programme-wide blocked dates, day start, path factor and start points per site.

    ``{"teams": [{"code": "A", "members": ["OBS01", "OBS02"], "hours_per_day": 7, "walking_speed_kmh": 3,
    "working_weekdays": ["mon", "tue", "wed", "thu", "fri"], "blocked_dates": ["2027-06-21"]}],
    "blocked_dates": [], "day_start": "08:30", "path_factor": 1.2, "start_points": {"SM": [511985, 5741990]}}``
    """
    file, doc = read_json(path, "a crews file in JSON")
    if not isinstance(doc, dict) or not isinstance(doc.get("teams"), list):
        raise _crew_problem(file, "teams", None, "a list of teams")
    known = [f.name for f in FS.CREWS.fields]
    for key in doc:
        if key not in known:
            raise _crew_problem(file, key, None, f"a known key ({', '.join(known)})")
    known_team = [f.name for f in FS.CREW_TEAM.fields]
    teams = []
    for i, t in enumerate(doc["teams"], start=1):
        if not isinstance(t, dict) or not str(t.get("code") or "").strip():
            raise _crew_problem(file, f"teams[{i}].code", None, "a team code")
        for key in t:
            if key not in known_team:
                raise _crew_problem(file, f"teams[{i}].{key}", None, f"a known key ({', '.join(known_team)})")
        members = t.get("members")
        if not isinstance(members, list) or not all(isinstance(m, str) and m.strip() for m in members):
            raise _crew_problem(file, f"teams[{i}].members", members, "a list of member codes or names")
        teams.append(dict(
            code=str(t["code"]).strip(), members=tuple(m.strip() for m in members),
            hours_per_day=_number(t.get("hours_per_day"), file, f"teams[{i}].hours_per_day", 7.0),
            walking_speed_kmh=_number(t.get("walking_speed_kmh"), file, f"teams[{i}].walking_speed_kmh", 3.0),
            working_weekdays=_weekdays(t.get("working_weekdays"), file, f"teams[{i}].working_weekdays"),
            blocked_dates=_dates(t.get("blocked_dates"), file, f"teams[{i}].blocked_dates")))
    starts = {}
    for site, xy in (doc.get("start_points") or {}).items():
        if not (isinstance(xy, list) and len(xy) == 2 and all(isinstance(v, int | float) for v in xy)):
            raise _crew_problem(file, f"start_points.{site}", xy, "[easting, northing] in metres")
        starts[str(site)] = (float(xy[0]), float(xy[1]))
    day_start = dt.time(9, 0)
    if doc.get("day_start") is not None:
        try:
            day_start = dt.time.fromisoformat(str(doc["day_start"]))
        except ValueError:
            raise _crew_problem(file, "day_start", doc["day_start"], "a time HH:MM") from None
    return {"teams": tuple(teams), "start_points": starts, "day_start": day_start,
            "blocked_dates": _dates(doc.get("blocked_dates"), file, "blocked_dates"),
            "path_factor": _number(doc.get("path_factor"), file, "path_factor", 1.0)}
