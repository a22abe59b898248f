"""Blank set-up files to fill in: each file's headers and one example row, from monitor.io.filespec.

The example rows agree with each other (the station lies inside the example site, its panel is the
example panel, the trigger watches the example species), so the folder as written loads with
``monitor setup all`` and can be edited row by row from there.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

from monitor import measures
from monitor.errors import InputError, InputProblem
from monitor.io import filespec as FS

# the example site: a 400 m square around the example station (FS.STATIONS' x/y example)
_SITE_RING = [[512000.0, 5741800.0], [512400.0, 5741800.0], [512400.0, 5742200.0], [512000.0, 5742200.0],
              [512000.0, 5741800.0]]


def _json_value(field: FS.Field):
    if field.type in ("EPSG code",):
        return int(field.example)
    if field.type.startswith("number") or field.type.startswith("fraction"):
        return float(field.example)
    if field.type == "true/false":
        return field.example == "true"
    return field.example


def _trigger() -> dict:
    out = {}
    for f in FS.TRIGGER.fields:
        out[f.name] = int(f.example) if f.name == "years" else float(f.example) if f.name == "threshold" else f.example
    return out


def programme_document() -> dict:
    doc = {}
    for f in FS.PROGRAMME.fields:
        if f.name == "settings":
            doc[f.name] = {"minutes_per_quadrat": {code: m.minutes_per_quadrat
                                                   for code, m in measures.REGISTRY.items()},
                           "setup_minutes": 5, "triggers": [_trigger()]}
        elif f.name == "protocols":
            doc[f.name] = json.loads(f.example)
        else:
            doc[f.name] = _json_value(f)
    return doc


def sites_document() -> dict:
    props = {f.name: (float(f.example) if f.type.startswith("number") else f.example)
             for f in FS.SITES.fields if f.name != "area_m2"}
    epsg = FS.PROGRAMME.field("crs_epsg").example
    return {"type": "FeatureCollection", "crs": {"type": "name", "properties": {"name": f"EPSG:{epsg}"}},
            "features": [{"type": "Feature", "properties": props,
                          "geometry": {"type": "Polygon", "coordinates": [_SITE_RING]}}]}


def blank_files() -> dict[str, str]:
    """File name -> text of every set-up file."""
    out = {FS.PROGRAMME.name: json.dumps(programme_document(), indent=2) + "\n",
           FS.SITES.name: json.dumps(sites_document(), indent=2) + "\n"}
    for spec in FS.SETUP_FOLDER:
        if spec.form != "CSV or .xlsx":
            continue
        lines: list[str] = []

        class _Sink:
            def write(self, text: str) -> None:
                lines.append(text)

        writer = csv.writer(_Sink(), lineterminator="\n")
        writer.writerow([f.name for f in spec.fields])
        writer.writerow([f.example for f in spec.fields])
        out[spec.name] = "".join(lines)
    return out


def write_blank_setup(folder: str | Path) -> list[Path]:
    """Write the blank set-up files into ``folder`` (created if needed); never overwrite a file."""
    folder = Path(folder)
    files = blank_files()
    existing = [name for name in files if (folder / name).exists()]
    if existing:
        raise InputError(InputProblem(str(folder / existing[0]), None, None, None,
                                      "a folder without set-up files (nothing is overwritten)"))
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for name, text in files.items():
        path = folder / name
        path.write_text(text, encoding="utf-8")
        written.append(path)
    return written
