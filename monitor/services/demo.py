"""The demo: build the invented Hollowmere Vale reserve into a fresh database and run the whole job on it.

Each capability of monitor adds its step here, so that ``monitor demo`` always shows the whole job.
"""

from __future__ import annotations

import json
import shutil
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from monitor.config import demo_source_dir
from monitor.errors import InputError, InputProblem
from monitor.services import (
    design,
    estimate,
    power,
    quality,
    report,
    schedule,
    setup,
    summary,
    trend,
)
from monitor.services.imports import import_records

#: the season the demo plans: the one after its last season of records
DEMO_SEASON = 2027


@dataclass
class DemoRun:
    """What the demo did, step by step, for the CLI to print."""

    folder: Path
    database: Path
    programme: str = ""
    steps: list[tuple[str, Any]] = field(default_factory=list)


def run_demo(folder: Path, *, echo: Callable[[str], None] = lambda _m: None) -> DemoRun:
    """Build the demo programme in ``folder`` (which must be empty or absent) and run the main job."""
    run = build_programme(folder, echo=echo)
    return analyse(run, echo=echo)


def build_programme(folder: Path, *, echo: Callable[[str], None] = lambda _m: None) -> DemoRun:
    """The demo's database: created, set up from its files, and filled through the records importer."""
    folder = Path(folder)
    if folder.exists() and any(folder.iterdir()):
        raise InputError(InputProblem(str(folder), None, None, None, "an empty or new folder for the demo"))
    folder.mkdir(parents=True, exist_ok=True)
    source = folder / "programme_files"
    shutil.copytree(demo_source_dir(), source, ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    database = folder / "monitor.sqlite"
    db = str(database)
    run = DemoRun(folder=folder, database=database)

    echo(f"1. creating the database {database}")
    setup.init_database(db)
    echo("2. setting the programme up from its files (sites, stations, species, panels, windows, observers)")
    code, loaded = setup.setup_folder(db, source)
    run.steps.append(("setup", {"programme": code, "added": loaded.added}))

    sheets = sorted((source / "records").glob("season_*.csv"))
    echo(f"3. importing {len(sheets)} seasons of field sheets through the records importer")
    imports = [import_records(db, sheet, programme_code=code, who="demo") for sheet in sheets]
    run.steps.append(("imports", imports))
    echo("4. checking the stored records (quality flags)")
    run.steps.append(("quality", quality.run_checks(db, code)))
    run.steps.append(("summary", summary.programme_summary(db, code)))
    run.programme = code
    return run


def analyse(run: DemoRun, *, echo: Callable[[str], None] = lambda _m: None) -> DemoRun:
    """The rest of the job on a built demo: panels, next season's plan and field pack, this season's
    estimates, trends, a power study and the annual report."""
    db, code, folder = str(run.database), run.programme, run.folder
    source = folder / "programme_files"
    truth = json.loads((source / "truth.json").read_text(encoding="utf-8"))
    latest = int(run.steps[-1][1]["visits_by_year"]["year"].max())
    figures = folder / "figures"

    echo(f"5. the revisit panels: which stations are due in {DEMO_SEASON}-{DEMO_SEASON + 2}")
    run.steps.append(("panels", design.panel_due_table(db, 3, first_year=DEMO_SEASON, programme_code=code)))
    echo(f"6. planning season {DEMO_SEASON} with 2 teams (due and overdue stations, routes, held-back sites)")
    plan = schedule.plan_season(db, DEMO_SEASON, teams=2, seed=DEMO_SEASON, programme_code=code)
    run.steps.append(("plan", plan))
    first = plan.plan.team_days[0]
    echo(f"7. writing the field pack for team {first.team} on {first.date.isoformat()}")
    pack = schedule.write_field_packs(db, DEMO_SEASON, folder / "field_packs", team=first.team, day=first.date,
                                      programme_code=code)
    run.steps.append(("field_pack", pack))

    echo(f"8. this season's estimates ({latest}), sample adequacy and the stream-transect gradient")
    run.steps.append(("estimates", estimate.season_table(db, latest, programme_code=code)))
    run.steps.append(("adequacy", estimate.sample_adequacy(db, "MARVIO", latest, "SM", programme_code=code,
                                                           figure=figures / "running_mean_MARVIO_SM.png")))
    gradient_truth = truth["_gradient"]
    run.steps.append(("gradient", (estimate.gradient(db, gradient_truth["species"], programme_code=code,
                                                     transect=gradient_truth["transect"],
                                                     figure=figures / "gradient_MARVIO_SM-T.png"),
                                   gradient_truth)))
    echo("9. fitting the trend of every target species across the years")
    trends = trend.fit_programme(db, programme_code=code, keep_data=True)
    run.steps.append(("trends", [(t, truth.get(t.species)) for t in trends]))

    echo("10. a small power study: can 20 or 40 quadrats detect a 50% fall of the marsh violetwort in 10 years?")
    marvio = next(t for t in trends if t.species == "MARVIO")
    from monitor.power import components_from_trend

    # every design from the same seeds (common random numbers), so the comparison of 20 and 40 stations
    # is not masked by independent Monte-Carlo noise; the year effect fitted to the demo is simulated too
    run.steps.append(("power", power.power_study(
        components_from_trend(marvio.result), "MARVIO (count) as fitted to the demo's data", change=-0.5,
        over_years=10, stations=[20, 40], years=[6, 11], replicates=60, seed=2027, workers=2,
        find_smallest=False, find_years=False, figure=figures / "power_MARVIO.png")))

    echo(f"11. writing the annual report for {latest}")
    run.steps.append(("report", report.write_report(db, latest, folder / "reports" / str(latest), programme_code=code)))
    from monitor.services.demo_growth import grow

    run.steps.append(("grow", grow(db, code, echo=echo)))
    return run
