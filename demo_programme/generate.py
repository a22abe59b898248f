"""Generate the demo programme's input files (run once; the output is committed beside this script).

The scenario is invented: Hollowmere Vale, a small lowland reserve with a stream meadow, a chalk
bank, a woodland edge and a heath.  Nothing here describes a real place, person or species.

    python demo_programme/generate.py            # rewrites the files in demo_programme/

The truth built into the data (what the analyses should recover) is written to TRUTH.md.
Every random draw comes from one numpy Generator seeded with SEED, so the files are reproducible.
"""

from __future__ import annotations

import csv
import datetime as dt
import json
import math
from pathlib import Path

import numpy as np

SEED = 20150401
HERE = Path(__file__).resolve().parent
EPSG = 32630  # WGS 84 / UTM zone 30N: projected, metres
FIRST_YEAR, LAST_YEAR = 2015, 2026
ORIGIN = (512_000.0, 5_742_000.0)  # invented position

# site code -> name, habitat, rectangle (x0, y0, width, height) relative to ORIGIN, stations
SITES = {
    "SM": ("Stream Meadow", "wet grassland by the stream", (0, 0, 420, 260), 24),
    "CB": ("Chalk Bank", "calcareous grassland on a south slope", (520, 40, 260, 180), 16),
    "WE": ("Woodland Edge", "oak woodland margin and glades", (80, 360, 300, 120), 12),
    "HH": ("Hilltop Heath", "dry acid heath", (560, 320, 160, 140), 10),
}

# species: code, scientific (invented), common (invented), measure, n, sensitive, window, truth
SPECIES = [
    # rising count: +6 % a year
    ("MARVIO", "Viola paludicola (invented)", "marsh violetwort", "count", None, False, ("05-01", "07-15"),
     {"annual_change": 0.06, "mean_2015": 6.0, "sites": ["SM", "WE"]}),
    # declining count with many zeros: -8 % a year, low abundance
    ("CHAORC", "Orchidella cretacea (invented)", "chalk orchidlet", "count", None, True, ("06-01", "07-10"),
     {"annual_change": -0.08, "mean_2015": 1.2, "sites": ["CB", "HH"]}),
    # stable cover
    ("GLASED", "Carex nemoralis-ficta (invented)", "glade sedgelet", "cover", None, False, ("05-15", "08-31"),
     {"annual_change": 0.0, "mean_2015": 22.0, "sites": ["WE", "SM"]}),
    # declining frequency in a 25-cell grid: odds of a cell being occupied fall 5 % a year
    ("HEABEL", "Campanula ericetorum-ficta (invented)", "heath bellwort", "frequency", 25, False,
     ("06-15", "08-31"), {"annual_change": -0.05, "mean_2015": 0.45, "sites": ["HH", "CB"]}),
    # rising point-frame cover, 10 pins: odds of a pin hit rise 4 % a year
    ("SILGRA", "Festuca argentea-ficta (invented)", "silver tuftgrass", "pin_hits", 10, False,
     ("05-01", "09-15"), {"annual_change": 0.04, "mean_2015": 0.30, "sites": ["CB", "HH", "SM"]}),
]

OBSERVERS = [
    ("OBS01", "Ada Quillfeather", "2014-04-12"),
    ("OBS02", "Bram Holloway-Finch", "2014-04-12"),
    ("OBS03", "Cora Nettlebed", "2016-03-20"),
    ("OBS04", "Dev Marrowstone", "2018-04-02"),
    ("OBS05", "Elin Sedgewick", "2021-03-28"),
]

PANELS = [
    ("ANNUAL", "[1-0]", FIRST_YEAR, "every year"),
    ("ROT1", "[1-2]", FIRST_YEAR, "one year in three, starting 2015"),
    ("ROT2", "[1-2]", FIRST_YEAR + 1, "one year in three, starting 2016"),
    ("ROT3", "[1-2]", FIRST_YEAR + 2, "one year in three, starting 2017"),
]

STATION_SD, SITE_SD, OBS_SD = 0.6, 0.3, 0.25
# good and bad years: one fluctuation a year for each species, shared by every station (link scale)
YEAR_SD = 0.15
YEAR_SEED = (SEED, 1)  # drawn from a generator of their own, so the other draws stay as they were
COVER_RESID_SD = 0.35
P_MISSED, P_INACCESSIBLE_SM = 0.04, 0.05


def _rect(x0: float, y0: float, w: float, h: float) -> list[list[float]]:
    ox, oy = ORIGIN
    return [[ox + x0, oy + y0], [ox + x0 + w, oy + y0], [ox + x0 + w, oy + y0 + h], [ox + x0, oy + y0 + h],
            [ox + x0, oy + y0]]


def _write_csv(path: Path, header: list[str], rows: list[list[object]]) -> None:
    with path.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        for row in rows:
            writer.writerow(["" if v is None else v for v in row])


def _logit(p: float) -> float:
    return math.log(p / (1 - p))


def main() -> None:
    rng = np.random.default_rng(SEED)
    out = HERE
    (out / "records").mkdir(exist_ok=True)

    programme = {
        "code": "HVR",
        "name": "Hollowmere Vale Reserve plant monitoring",
        "description": "Permanent-quadrat monitoring of five target plants across four sites (invented demo).",
        "organisation": "Hollowmere Vale Trust (invented)",
        "contact": "monitoring officer, Hollowmere Vale Trust (invented)",
        "crs_epsg": EPSG,
        "default_quadrat_width_m": 1.0,
        "default_quadrat_length_m": 1.0,
        "blanks_mean_zero": False,
        "allow_lone_working": False,
        "time_zone": "Europe/London",
        "change_margin": 0.02,
        "settings": {"minutes_per_quadrat": {"count": 6, "cover": 4, "frequency": 8, "pin_hits": 6},
                     "setup_minutes": 5, "covariate_units": {"soil_moisture": "%"},
                     # management triggers agreed with the reserve manager before the data came in
                     "triggers": [
                         {"species": "CHAORC", "measure": "count", "kind": "decline", "threshold": 0.4, "years": 10,
                          "objective": "Keep the chalk orchidlet population on Chalk Bank and Hilltop Heath",
                          "response": "Review the autumn grazing on Chalk Bank with the grazier within the year"},
                         {"species": "MARVIO", "measure": "count", "kind": "upper_bound_below", "threshold": 0.0,
                          "objective": "Keep the marsh violetwort in Stream Meadow",
                          "response": "Check the stream-side water levels and the sluice settings"},
                         {"species": "HEABEL", "measure": "frequency", "kind": "decline", "threshold": 0.5,
                          "years": 10, "objective": "Hold heath bellwort frequency on Hilltop Heath",
                          "response": "Bring forward the heath mowing rotation review"},
                     ]},
        "protocols": [
            {"code": "P1", "description": "2015 protocol: 10-pin frame, pins 10 cm apart", "effective_from": "2015-01-01"},
            {"code": "P2", "description": "2021 protocol: as P1, with frequency grid re-strung to 25 cells of 20 cm",
             "effective_from": "2021-01-01", "measures": ["frequency"]},
        ],
    }
    (out / "programme.json").write_text(json.dumps(programme, indent=2) + "\n", encoding="utf-8")

    features = []
    for code, (name, habitat, rect, _n) in SITES.items():
        features.append({
            "type": "Feature",
            "properties": {"code": code, "name": name, "habitat": habitat,
                           "access_until": "2030-12-31" if code != "HH" else "2026-09-30",
                           "base_x": _rect(*rect)[0][0] - 15.0, "base_y": _rect(*rect)[0][1] - 10.0},
            "geometry": {"type": "Polygon", "coordinates": [_rect(*rect)]},
        })
    sites_doc = {"type": "FeatureCollection", "name": "hollowmere_sites",
                 "crs": {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{EPSG}"}},
                 "features": features}
    (out / "sites.geojson").write_text(json.dumps(sites_doc, indent=1) + "\n", encoding="utf-8")

    # --- stations ---------------------------------------------------------------------------------
    stations = []  # dicts
    panel_cycle = ["ANNUAL", "ROT1", "ROT2", "ROT3"]
    for code, (_name, _habitat, (x0, y0, w, h), n) in SITES.items():
        ox, oy = ORIGIN
        k = 0
        if code == "SM":
            # a line transect of 10 quadrats running north, away from the stream along the meadow's south edge
            for i in range(10):
                k += 1
                stations.append({
                    "code": f"SM-T{i + 1:02d}", "site": code, "x": ox + x0 + 200.0, "y": oy + y0 + 5.0 + 25.0 * i,
                    "placement": "transect", "transect": "SM-T", "distance_m": 5.0 + 25.0 * i, "panel": "ANNUAL",
                })
        while k < n:
            k += 1
            # random grid coordinates on a 1 m grid inside the site, at least 10 m from the edge
            gx = int(rng.integers(10, int(w) - 10))
            gy = int(rng.integers(10, int(h) - 10))
            stations.append({
                "code": f"{code}-{k:02d}", "site": code, "x": ox + x0 + gx + 0.5, "y": oy + y0 + gy + 0.5,
                "placement": "random", "transect": None, "distance_m": None,
                "panel": panel_cycle[k % 4],
            })
    for i, s in enumerate(stations):
        s["established"] = f"{FIRST_YEAR}-04-{10 + i % 15:02d}"
        s["retired"] = None
        s["retired_reason"] = None
        s["replaced_by"] = None
        s["fix_method"] = "GNSS RTK" if i % 3 else "handheld GPS"
        s["accuracy_m"] = 0.05 if i % 3 else 3.0
        s["marker"] = "steel pin at SW corner, orange cap"
        s["relocation_notes"] = f"{5 + i % 7} m at bearing {(37 * i) % 360:03d} degrees from the nearest fence post"
        s["quadrat"] = (1.0, 1.0)
    # lineage: two stations lost in 2020 (path widened; marker pulled) and replaced nearby
    for old_code, reason in (("CB-14", "marker lost when the path was widened"),
                             ("WE-11", "quadrat trampled by a new desire line; moved 6 m east")):
        old = next(s for s in stations if s["code"] == old_code)
        new = dict(old)
        new.update({"code": old_code + "R", "x": old["x"] + 6.0, "established": "2020-04-20",
                    "relocation_notes": f"6 m east of retired {old_code}"})
        old.update({"retired": "2020-04-20", "retired_reason": reason, "replaced_by": new["code"]})
        stations.append(new)

    _write_csv(out / "stations.csv",
               ["code", "site", "x", "y", "fix_method", "accuracy_m", "quadrat_width_m", "quadrat_length_m",
                "placement", "transect", "distance_m", "panel", "established", "retired", "retired_reason",
                "replaced_by", "marker", "relocation_notes"],
               [[s["code"], s["site"], f"{s['x']:.2f}", f"{s['y']:.2f}", s["fix_method"], s["accuracy_m"],
                 s["quadrat"][0], s["quadrat"][1], s["placement"], s["transect"], s["distance_m"], s["panel"],
                 s["established"], s["retired"], s["retired_reason"], s["replaced_by"], s["marker"],
                 s["relocation_notes"]] for s in stations])

    _write_csv(out / "species.csv",
               ["code", "scientific_name", "common_name", "measure", "n", "sensitive", "window_start", "window_end"],
               [[c, sci, com, m, n, "yes" if sens else "no", w[0], w[1]]
                for c, sci, com, m, n, sens, w, _t in SPECIES])
    _write_csv(out / "panels.csv", ["code", "rule", "start_year"], [list(p[:3]) for p in PANELS])
    _write_csv(out / "windows.csv", ["scope", "start", "end"], [["programme", "05-01", "09-15"]])
    _write_csv(out / "observers.csv", ["code", "name", "trained"], [list(o) for o in OBSERVERS])
    _write_csv(out / "management_events.csv", ["site", "station", "kind", "start_date", "end_date", "notes"], [
        ["CB", None, "grazing", f"{y}-09-01", f"{y}-10-31", "sheep, light autumn grazing"]
        for y in range(FIRST_YEAR, LAST_YEAR + 1)
    ] + [["SM", None, "flooding", "2019-06-10", "2019-06-24", "stream over-topped the meadow"],
         ["HH", None, "cutting", "2022-02-15", "2022-02-15", "heath mown in rotation"]])

    # --- the truth and the records -----------------------------------------------------------------
    year_rng = np.random.default_rng(list(YEAR_SEED))
    year_effect = {(sp[0], y): float(year_rng.normal(0, YEAR_SD)) for sp in SPECIES
                   for y in range(FIRST_YEAR, LAST_YEAR + 1)}
    site_codes = list(SITES)
    site_effect = {(sp[0], s): rng.normal(0, SITE_SD) for sp in SPECIES for s in site_codes}
    station_effect = {(sp[0], st["code"]): rng.normal(0, STATION_SD) for sp in SPECIES for st in stations}
    moisture_base = {st["code"]: float(np.clip(rng.normal(45 if st["site"] == "SM" else 25, 8), 5, 90))
                     for st in stations}
    # along the stream transect the ground dries out away from the water: about 0.3 points per metre
    for st in stations:
        if st["transect"] == "SM-T":
            moisture_base[st["code"]] = float(np.clip(75.0 - 0.3 * st["distance_m"] + rng.normal(0, 3), 5, 90))
    panel_rule = {p[0]: (p[2], 1 if p[1] == "[1-0]" else 3) for p in PANELS}
    observer_years = {o[0]: int(o[2][:4]) + 1 for o in OBSERVERS}

    truth_rows = []
    for year in range(FIRST_YEAR, LAST_YEAR + 1):
        t = year - FIRST_YEAR
        active_observers = [o for o, y in observer_years.items() if y <= year]
        rows = []
        for st in stations:
            established = int(st["established"][:4])
            retired = int(st["retired"][:4]) if st["retired"] else None
            if year < established or (retired is not None and year >= retired):
                continue
            start, every = panel_rule[st["panel"]]
            if (year - start) % every != 0 or year < start:
                continue
            # inside every species window (06-15 to 07-10 is common to all five)
            day = dt.date(year, 6, 15) + dt.timedelta(days=int(rng.integers(0, 26)))
            pair = rng.choice(active_observers, size=2, replace=False)
            status = "done"
            u = rng.random()
            if st["site"] == "SM" and year == 2019 and u < 0.5:
                status = "inaccessible"  # the 2019 flood
            elif u < P_MISSED:
                status = "missed"
            elif st["site"] == "SM" and u < P_MISSED + P_INACCESSIBLE_SM:
                status = "inaccessible"
            protocol = "P1" if year < 2021 else "P2"
            values: dict[str, object] = {}
            moisture: float | None = None
            if status == "done":
                moisture = round(float(np.clip(moisture_base[st["code"]] + rng.normal(0, 5), 1, 99)), 1)
                for code, _sci, _com, measure, n, _sens, _w, truth in SPECIES:
                    present_here = st["site"] in truth["sites"]
                    eta_re = (site_effect[(code, st["site"])] + station_effect[(code, st["code"])]
                              + year_effect[(code, year)])
                    trend = math.log1p(truth["annual_change"]) * t
                    if measure == "count":
                        if not present_here:
                            values[code] = 0
                            continue
                        eta = math.log(truth["mean_2015"]) + trend + eta_re + rng.normal(0, OBS_SD)
                        # wetter quadrats suit the marsh violetwort: +2 % per moisture point
                        if code == "MARVIO":
                            eta += 0.03 * (moisture - 35.0)
                        values[code] = int(rng.poisson(math.exp(eta)))
                    elif measure == "cover":
                        if not present_here:
                            values[code] = 0
                            continue
                        eta = _logit(truth["mean_2015"] / 100) + trend + eta_re + rng.normal(0, COVER_RESID_SD)
                        values[code] = round(100 / (1 + math.exp(-eta)), 0)
                    else:
                        if not present_here:
                            values[code] = 0
                            continue
                        eta = _logit(truth["mean_2015"]) + trend + eta_re + rng.normal(0, OBS_SD)
                        values[code] = int(rng.binomial(n, 1 / (1 + math.exp(-eta))))
            rows.append((st, day, pair, status, protocol, moisture, values))
        rows.sort(key=lambda r: (r[1], r[0]["code"]))
        header = ["station", "date", "observers", "status", "repeat", "protocol", "notes"]
        for code, _sci, _com, measure, n, *_rest in SPECIES:
            header.append(f"{code}:{measure}" + (f"/{n}" if n else ""))
        header.append("cov:soil_moisture[%]")
        out_rows = []
        for st, day, pair, status, protocol, moisture, values in rows:
            note = ""
            if status == "inaccessible":
                note = "stream in flood, no safe crossing" if st["site"] == "SM" else "gate locked"
            elif status == "missed":
                note = "ran out of time in the window"
            out_rows.append([st["code"], day.isoformat(), ";".join(sorted(pair)) if status == "done" else "",
                             status, "no", protocol, note]
                            + [values.get(sp[0], "") for sp in SPECIES] + [moisture if moisture is not None else ""])
        _write_csv(out / "records" / f"season_{year}.csv", header, out_rows)
        truth_rows.append((year, len(out_rows), sum(1 for r in rows if r[3] == "done")))

    lines = [
        "# The truth built into the demo data",
        "",
        f"Generated by `generate.py` with seed {SEED}. Years {FIRST_YEAR}-{LAST_YEAR}; "
        f"{len(stations)} stations ({sum(1 for s in stations if s['retired'])} retired and replaced in 2020).",
        "",
        "Random effects on the link scale: station SD "
        f"{STATION_SD}, site SD {SITE_SD}, observation-level SD {OBS_SD} (counts, frequency, pin hits); "
        f"cover residual SD {COVER_RESID_SD} on the logit scale. Species are absent (recorded zero) outside "
        "their sites; the analyses use the stations where a species has ever been recorded.",
        "",
        f"Good and bad years: each species has one fluctuation a year shared by all its stations, drawn with "
        f"SD {YEAR_SD} on the link scale (log count, logit of cover or of a cell or pin) from a generator seeded "
        f"{list(YEAR_SEED)}; the draws are in truth.json (`year_effects`). So the trend a programme can see "
        "is the built-in change plus the slope of these twelve draws, and an honest interval reflects them.",
        "",
        "| species | measure | built-in annual change | sites | level in 2015 |",
        "|---|---|---|---|---|",
    ]
    for code, _sci, com, measure, n, _sens, _w, truth in SPECIES:
        scale = "odds of cover" if measure == "cover" else ("odds of a cell/pin" if n else "mean count")
        lines.append(f"| {code} ({com}) | {measure}{f' of {n}' if n else ''} | "
                     f"{truth['annual_change'] * 100:+.0f} % a year ({scale}) | {', '.join(truth['sites'])} | "
                     f"{truth['mean_2015']} |")
    lines += ["", "MARVIO counts also rise by about 3 % per point of soil moisture (visit covariate). Along the",
              "stream transect SM-T soil moisture falls about 0.3 points per metre from the water, so MARVIO",
              "falls by about 0.9 % per metre along it (exp(-0.03 * 0.3) - 1).",
              "Missed visits about 4 % a year; Stream Meadow inaccessible about 5 % a year and half its",
              "stations in 2019 (flood). Protocol P2 from 2021. Hilltop Heath's access permission ends 2026-09-30.",
              "", "| year | visits on the sheet | visits done |", "|---|---|---|"]
    lines += [f"| {y} | {n} | {d} |" for y, n, d in truth_rows]
    lines += ["", "Year effects drawn (link scale):", "",
              "| year | " + " | ".join(sp[0] for sp in SPECIES) + " |", "|---|" + "---|" * len(SPECIES)]
    lines += [f"| {y} | " + " | ".join(f"{year_effect[(sp[0], y)]:+.3f}" for sp in SPECIES) + " |"
              for y in range(FIRST_YEAR, LAST_YEAR + 1)]
    (out / "TRUTH.md").write_text("\n".join(lines) + "\n", encoding="utf-8")
    truth = {code: {"measure": measure, "annual_change": t["annual_change"], "sites": t["sites"],
                    "year_sd": YEAR_SD,
                    "year_effects": {str(y): round(year_effect[(code, y)], 6) for y in range(FIRST_YEAR, LAST_YEAR + 1)}}
             for code, _sci, _com, measure, _n, _sens, _w, t in SPECIES}
    truth["_gradient"] = {"species": "MARVIO", "transect": "SM-T", "change_per_m": math.exp(-0.03 * 0.3) - 1}
    (out / "truth.json").write_text(json.dumps(truth, indent=2) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
