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
from monitor.services import quality, records, setup, summary


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
    echo("4. checking the stored records (quality flags)")
    run.steps.append(("quality", quality.run_checks(db, code)))
    run.steps.append(("summary", summary.programme_summary(db, code)))
    return run
