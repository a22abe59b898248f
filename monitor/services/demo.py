"""The demo: build the invented Hollowmere Vale reserve into a fresh database and run the whole job on it.

Each capability of monitor adds its step here, so that ``monitor demo`` always shows the whole job.
"""

from __future__ import annotations

import shutil
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from monitor.config import demo_source_dir
from monitor.errors import InputError, InputProblem
from monitor.services import design, records, schedule, setup, summary

#: the season the demo plans: the one after its last season of records
DEMO_SEASON = 2027


@dataclass
class DemoRun:
    """What the demo did, step by step, for the CLI to print."""

    folder: Path
    database: Path
    steps: list[tuple[str, Any]] = field(default_factory=list)


def run_demo(folder: Path, *, echo: Callable[[str], None] = lambda _m: None) -> DemoRun:
    """Build the demo programme in ``folder`` (which must be empty or absent) and run the main job."""
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
    code, report = setup.setup_folder(db, source)
    run.steps.append(("setup", {"programme": code, "added": report.added}))

    sheets = sorted((source / "records").glob("season_*.csv"))
    echo(f"3. importing {len(sheets)} seasons of field sheets through the records importer")
    imports = [records.import_records(db, sheet, programme_code=code, who="demo") for sheet in sheets]
    run.steps.append(("imports", imports))
    run.steps.append(("summary", summary.programme_summary(db, code)))

    echo(f"4. the revisit panels: which stations are due in {DEMO_SEASON}-{DEMO_SEASON + 2}")
    run.steps.append(("panels", design.panel_due_table(db, 3, first_year=DEMO_SEASON, programme_code=code)))
    echo(f"5. planning season {DEMO_SEASON} with 2 teams (due and overdue stations, routes, held-back sites)")
    plan = schedule.plan_season(db, DEMO_SEASON, teams=2, seed=DEMO_SEASON, programme_code=code)
    run.steps.append(("plan", plan))
    first = plan.plan.team_days[0]
    echo(f"6. writing the field pack for team {first.team} on {first.date.isoformat()}")
    pack = schedule.write_field_packs(db, DEMO_SEASON, folder / "field_packs", team=first.team, day=first.date,
                                      programme_code=code)
    run.steps.append(("field_pack", pack))
    return run
