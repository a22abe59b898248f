"""Analyses: trends across years."""

from __future__ import annotations

from pathlib import Path

import click

from monitor.cli.main import Context, cli
from monitor.cli.output import chosen_format, emit, format_option, progress


def _pct(x: float | None) -> str:
    return "" if x is None else f"{100 * x:+.1f}"


def trend_rows(trends) -> list[dict]:
    rows = []
    for t in trends:
        r = t.result
        ac = r.annual_change
        rows.append({
            "species": t.species, "measure": t.measure, "family": r.family, "stations": r.n_stations,
            "years": f"{r.years[0]}-{r.years[1]}",
            "annual change %": f"{_pct(ac.estimate)} ({_pct(ac.lower)} to {_pct(ac.upper)})",
            "over period %": f"{_pct(r.period_change.estimate)}",
            "call": r.call,
        })
    return rows


@cli.command("trend")
@click.option("--species", "species", multiple=True, help="Species code (repeat for several; default all targets).")
@click.option("--site", "sites", multiple=True, help="Only these sites (repeat for several).")
@click.option("--from", "first_year", type=int, default=None, help="First season to use.")
@click.option("--to", "last_year", type=int, default=None, help="Last season to use.")
@click.option("--family", type=click.Choice(["poisson", "poisson-lognormal", "negbin", "binomial", "logit-normal"]),
              default=None, help="Model family (default by measure: counts poisson-lognormal, k of n binomial, "
                                 "cover logit-normal).")
@click.option("--observer-effect", is_flag=True, help="Add a random intercept for observer (crossed with station).")
@click.option("--table", "table", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
              help="Fit a long table from elsewhere (station, year, optional site, and count / cover_pct / "
                   "occupied+cells / hits+pins / present) instead of the database.")
@click.option("--margin", type=float, default=None,
              help="Margin of change that matters, fraction a year (with --table; default 0.02).")
@format_option
@click.pass_obj
def trend_command(ctx: Context, species, sites, first_year, last_year, family, observer_effect, table, margin,
                  as_json: bool, as_csv: bool) -> None:
    """Fit mixed models across years: annual change with 95% intervals and the call for each species."""
    from monitor.services import trend

    fmt = chosen_format(as_json, as_csv)
    if table is not None:
        trends = [trend.fit_table(table, family=family, margin=margin if margin is not None else 0.02,
                                  observer_effect=observer_effect)]
    else:
        bar = None
        with progress(1, "fitting") as bar:
            def tick(i: int, n: int, _name: str) -> None:
                bar.length = max(n, 1)
                bar.update(i - bar.pos)

            trends = trend.fit_programme(ctx.db, programme_code=ctx.programme, species=list(species) or None,
                                         sites=list(sites) or None, first_year=first_year, last_year=last_year,
                                         family=family, observer_effect=observer_effect, progress=tick)
    if fmt == "json":
        emit([t.to_dict() for t in trends], fmt)
    else:
        emit(trend_rows(trends), fmt)
