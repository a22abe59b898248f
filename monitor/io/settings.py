"""Reader for ``programme.json``: the programme's name, CRS, quadrat size and settings."""

from __future__ import annotations

import datetime as dt
import json
import os
from pathlib import Path
from typing import Any

from monitor.errors import InputError, InputProblem
from monitor.io import filespec as FS
from monitor.io.programme import parse_epsg, projected_crs_problem
from monitor.settings import margin_problem, parse_settings, time_zone_problem

REQUIRED = tuple(FS.PROGRAMME.required())   # the one definition of the file (docs/files.md)
OPTIONAL = tuple(FS.PROGRAMME.optional())


def read_programme_json(source: str | os.PathLike[str]) -> dict[str, Any]:
    """Read and check a programme description.

    Keys: code, name, crs_epsg (a projected CRS in metres) required; description, organisation,
    contact, default_quadrat_width_m / _length_m (> 0, metres), blanks_mean_zero, allow_lone_working
    (true/false), change_margin (margin of change that matters, fraction a year, > 0), settings
    (object, checked by :func:`monitor.settings.parse_settings`), protocols (list of {code, description, effective_from ISO date}).
    """
    path = Path(source)
    file = path.name
    problems: list[InputProblem] = []

    def bad(field: str | None, value: object, expected: str) -> None:
        problems.append(InputProblem(file=file, row=None, field=field, value=value, expected=expected))

    try:
        doc = json.loads(path.read_text(encoding="utf-8-sig"))
    except FileNotFoundError:
        raise InputError(InputProblem(file, None, None, None, "an existing file")) from None
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(InputProblem(file, getattr(exc, "lineno", None), None, None,
                                      f"a JSON object in UTF-8 ({exc.__class__.__name__})")) from None
    if not isinstance(doc, dict):
        raise InputError(InputProblem(file, None, None, type(doc).__name__, "a JSON object"))
    for key in REQUIRED:
        if key not in doc or doc[key] in (None, ""):
            bad(key, None, "a value (required)")
    for key in doc:
        if key not in REQUIRED and key not in OPTIONAL:
            bad(key, None, f"a known key ({', '.join(REQUIRED + OPTIONAL)})")
    out: dict[str, Any] = {k: doc[k] for k in doc if k in REQUIRED + OPTIONAL}
    if "crs_epsg" in doc and doc["crs_epsg"] not in (None, ""):
        epsg = parse_epsg(doc["crs_epsg"])
        if epsg is None:
            bad("crs_epsg", doc["crs_epsg"], "an EPSG code such as 32630")
        else:
            why = projected_crs_problem(epsg)
            if why:
                bad("crs_epsg", doc["crs_epsg"], why)
            out["crs_epsg"] = epsg
    for key in ("default_quadrat_width_m", "default_quadrat_length_m"):
        if key in doc and not (isinstance(doc[key], (int, float)) and not isinstance(doc[key], bool) and doc[key] > 0):
            bad(key, doc[key], "a quadrat side in metres > 0")
    if "change_margin" in doc and margin_problem(doc["change_margin"]):
        bad("change_margin", doc["change_margin"], margin_problem(doc["change_margin"]))
    for key in ("blanks_mean_zero", "allow_lone_working"):
        if key in doc and not isinstance(doc[key], bool):
            bad(key, doc[key], "true or false")
    if "time_zone" in doc:
        out["time_zone"] = _time_zone(doc["time_zone"], bad)
    if "settings" in doc:  # checked as the database will hold it: one rule (monitor/settings.py)
        problems.extend(parse_settings(doc["settings"], file=file)[1])
    protocols = []
    for i, item in enumerate(doc.get("protocols", []) or []):
        field = f"protocols[{i}]"
        if not isinstance(item, dict) or not item.get("code"):
            bad(field, item, "an object with code, description and effective_from")
            continue
        try:
            start = dt.date.fromisoformat(str(item.get("effective_from", "")))
        except ValueError:
            bad(f"{field}.effective_from", item.get("effective_from"), "an ISO date YYYY-MM-DD")
            continue
        protocols.append({"code": str(item["code"]), "description": str(item.get("description", "")),
                          "effective_from": start})
        measures = item.get("measures")
        if measures is not None:
            from monitor import columns as C

            if not (isinstance(measures, list) and measures and all(m in C.MEASURES for m in measures)):
                bad(f"{field}.measures", measures, f"a list of the measures the protocol concerns ({', '.join(C.MEASURES)})")
            else:
                out.setdefault("protocol_measures", {})[str(item["code"])] = list(measures)
    out["protocols"] = protocols
    if problems:
        raise InputError(problems)
    return out


def _time_zone(value: object, bad) -> str | None:
    """An IANA time zone name (e.g. Europe/London), checked against the zone database."""
    why = time_zone_problem(value)
    if why:
        bad("time_zone", value, why)
        return None
    return str(value).strip()
