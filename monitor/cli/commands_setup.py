"""Creating a database, setting a programme up from the files a user has, and the programme summary."""

from __future__ import annotations

from pathlib import Path

import click

from monitor.cli.main import Context, cli
from monitor.cli.output import chosen_format, emit, format_option, say
from monitor.cli.tables import write_workbook, xlsx_option


@cli.command("init")
@click.pass_obj
def init_command(ctx: Context) -> None:
    """Create the database, or upgrade its schema to this version of monitor."""
    from monitor.services import setup

    before, after = setup.init_database(ctx.db)
    if before == after:
        say(f"database schema is up to date (revision {after})")
    elif before is None:
        say(f"created a monitor database (schema revision {after})")
    else:
        say(f"upgraded the database schema from revision {before} to {after}")


@cli.group("setup")
def setup_group() -> None:
    """Set a programme up from files: a whole folder, or one kind of file at a time."""


def _report_added(report) -> None:
    say("added: " + ", ".join(f"{n} {kind}" for kind, n in report.added.items()))


@setup_group.command("all")
@click.argument("folder", type=click.Path(exists=True, file_okay=False, path_type=Path))
@click.pass_obj
def setup_all(ctx: Context, folder: Path) -> None:
    """Create a programme from FOLDER: programme.json, sites.geojson, stations.csv, species.csv and,
    when present, panels.csv, windows.csv, observers.csv and management_events.csv."""
    from monitor.services import setup

    code, report = setup.setup_folder(ctx.db, folder)
    say(f"programme {code} set up")
    _report_added(report)


def _one_kind(kind: str, what: str) -> None:
    @setup_group.command(kind, help=f"Add {what} from FILE to the programme.")
    @click.argument("file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
    @click.pass_obj
    def command(ctx: Context, file: Path) -> None:
        from monitor.services import setup

        _report_added(setup.load_file(ctx.db, kind, file, ctx.programme))


for _kind, _what in (
    ("sites", "sites with boundaries (GeoJSON in the programme's projected CRS)"),
    ("stations", "permanent quadrats (CSV or .xlsx)"),
    ("species", "target species and their measures (CSV or .xlsx)"),
    ("panels", "revisit panels, rule in [visit-rest] notation (CSV or .xlsx)"),
    ("windows", "season windows, programme-wide or per species (CSV or .xlsx)"),
    ("observers", "the register of observers (CSV or .xlsx)"),
    ("events", "management events per site or station (CSV or .xlsx)"),
):
    _one_kind(_kind, _what)


@setup_group.command("blank")
@click.argument("folder", type=click.Path(file_okay=False, path_type=Path))
def setup_blank(folder: Path) -> None:
    """Write blank set-up files into FOLDER: each with its headers and one example row, ready to fill in
    (docs/files.md describes every column). Nothing is overwritten."""
    from monitor.io.blank import write_blank_setup

    for path in write_blank_setup(folder):
        say(f"wrote {path}")
    say(f"fill them in, then: monitor setup all {folder}")


@cli.command("summary")
@format_option
@xlsx_option
@click.pass_obj
def summary_command(ctx: Context, as_json: bool, as_csv: bool, xlsx: Path | None) -> None:
    """The programme at a glance: sites, stations in service and retired, species, visits per year.
    --csv writes the three tables as one CSV whose first column, table, names the table of each row."""
    from monitor.io.sheets import tables_csv
    from monitor.services import summary

    result = summary.programme_summary(ctx.db, ctx.programme)
    tables = {"sites": result["sites"], "species": result["species"], "visits_by_year": result["visits_by_year"]}
    write_workbook(xlsx, tables)
    fmt = chosen_format(as_json, as_csv)
    if fmt == "json":
        emit(result, fmt)
        return
    if fmt == "csv":
        click.echo(tables_csv(tables), nl=False)
        return
    p = result["programme"]
    click.echo(f"{p['name']} ({p['code']}), CRS EPSG:{p['crs_epsg']}")
    emit(result["sites"], columns=["site", "name", "habitat", "area_m2", "in_service", "retired"], title="\nSites")
    emit(result["species"], title="\nTarget species")
    emit(result["visits_by_year"], title="\nVisits per season by outcome")


@cli.command("demo")
@click.option("--dir", "folder", type=click.Path(file_okay=False, path_type=Path), default=Path("demo_out"),
              show_default=True, help="Folder to build the demo in (new or empty).")
@click.option("--southern", is_flag=True,
              help="The southern-summer variant instead: season 1 December to 28 February, planned across the "
                   "new year.")
@click.option("--serve", "then_serve", is_flag=True,
              help="Then open the demo in the browser workspace (as `monitor serve` on its database).")
@click.option("--port", type=int, default=8765, show_default=True, help="Port of the workspace (with --serve).")
def demo_command(folder: Path, southern: bool, then_serve: bool, port: int) -> None:
    """Build the invented demo reserve in a fresh database and run the whole job on it."""
    from monitor.services import demo

    if southern:
        from monitor.cli.commands_plan import show_southern_demo

        show_southern_demo(folder)
        return

    run = demo.run_demo(folder, echo=say)
    for name, result in run.steps:
        if name == "imports":
            from monitor.cli.commands_records import describe_import

            click.echo("\nImported field records")
            for report in result:
                click.echo("  " + describe_import(report).splitlines()[0])
        if name == "quality":
            from monitor.services.quality import FLAG_TABLE_COLUMNS

            click.echo(f"\nQuality checks on the stored records: {result.summary()}")
            emit(result.open_flags, columns=FLAG_TABLE_COLUMNS)
        if name == "summary":
            click.echo("\nProgramme summary")
            emit(result["sites"], columns=["site", "name", "habitat", "area_m2", "in_service", "retired"],
                 title="Sites")
            emit(result["species"], title="\nTarget species")
            emit(result["visits_by_year"], title="\nVisits per season by outcome")
        if name == "panels":
            shown = result.panels.copy()
            for y in result.years:
                shown[y] = ["X" if v else "" for v in shown[y]]
            shown.columns = [str(c) for c in shown.columns]
            click.echo(f"\nRevisit design {result.notation} (McDonald 2003 notation); X = due")
            emit(shown)
        if name == "grow":
            from monitor.cli.commands_plan import show_growth

            show_growth(result)
        if name == "plan":
            click.echo(f"\nSeason {result.year} plan: {result.summary()}")
            emit(result.team_day_table())
            if not result.plan.held_back.empty:
                emit(result.plan.held_back, title="Held back")
        if name == "field_pack":
            for day in result.team_days:
                click.echo(f"\nField pack for team {day['team']} on {day['date']} ({day['site']}, "
                           f"{day['stations']} stations): {day['folder']}")
            click.echo(f"Calendar: {result.calendar}")
        if name == "estimates":
            from monitor.cli.commands_analysis import estimate_rows

            emit(estimate_rows(result), title=f"\nThis season's estimates ({int(result['year'].iloc[0])})")
        if name == "adequacy":
            a = result.adequacy
            click.echo(f"\nSample adequacy, {result.species} at site {result.site} in {result.year}: "
                       f"{a.n} quadrats give +/-{100 * a.achieved_precision:.0f}% (95% CI); "
                       f"{a.n_required} would give +/-{100 * a.precision:.0f}% ({a.additional_required} more)")
        if name == "gradient":
            from monitor.cli.commands_analysis import gradient_rows

            gradient, truth = result
            emit(gradient_rows(gradient)[-3:], title=f"\nAbundance of {truth['species']} along the stream transect "
                 f"{truth['transect']} (last 3 seasons; built-in truth {100 * truth['change_per_m']:+.2f}% per m)")
        if name == "trends":
            click.echo("\nTrends across years: our estimate beside the truth built into the demo data")
            rows = []
            for fitted, truth in result:
                ac = fitted.result.annual_change
                rows.append({"species": fitted.species, "measure": fitted.measure,
                             "truth % a year": "" if truth is None else f"{100 * truth['annual_change']:+.1f}",
                             "estimate % a year (95% CI)": f"{100 * ac.estimate:+.1f} ({100 * ac.lower:+.1f} to "
                                                           f"{100 * ac.upper:+.1f})",
                             "call": fitted.result.call})
            emit(rows)
        if name == "power":
            from monitor.cli.commands_analysis import power_rows, power_sentences

            emit(power_rows(result), title=f"\nPower to detect a 50% fall over 10 years ({result.source}; "
                 f"{result.results[0].n_replicates} simulated data sets per design, the same seeds for every "
                 "design, one-sided 5% test)")
            for line in power_sentences(result):
                click.echo(line)
        if name == "report":
            click.echo(f"\nThe annual report for land managers: {result / 'index.html'}")
    click.echo(f"\nFigures are in {run.folder / 'figures'}")
    click.echo(f"The demo database is {run.database}; try: monitor --db {run.database} summary")
    if then_serve:
        from monitor.cli.commands_web import start_workspace

        start_workspace(str(run.database), host="127.0.0.1", port=port, workdir=Path(folder) / "monitor_web",
                        programme=None, open_browser=True)
