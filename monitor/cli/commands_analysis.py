"""Analyses: trends across years, this season's estimates, sample adequacy, gradients, two-season change."""

from __future__ import annotations

from pathlib import Path

import click

from monitor.cli.main import Context, cli
from monitor.cli.output import chosen_format, emit, format_option, progress, say


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


@cli.command("estimate")
@click.argument("year", type=int)
@click.option("--species", "species", multiple=True, help="Species code (repeat; default all targets).")
@click.option("--site", "sites", multiple=True, help="Only these sites (repeat).")
@click.option("--precision", type=float, default=0.2, show_default=True,
              help="Target relative precision for the quadrats-needed column (0.2 = +/-20%).")
@format_option
@click.pass_obj
def estimate_command(ctx: Context, year: int, species, sites, precision: float, as_json: bool, as_csv: bool) -> None:
    """This season's estimates per site and species: density and total with intervals, cover, frequency."""
    from monitor.services import estimate

    table = estimate.season_table(ctx.db, year, programme_code=ctx.programme, species=list(species) or None,
                                  sites=list(sites) or None, precision=precision)
    fmt = chosen_format(as_json, as_csv)
    if fmt != "table":
        emit(table, fmt)
        return
    emit(estimate_rows(table))
    for reason in table.attrs.get("skipped", []):
        say(f"not estimated: {reason}")


def estimate_rows(table) -> list[dict]:
    rows = []
    for r in table.to_dict(orient="records"):
        row = {"site": r["site"], "species": r["species"], "measure": r["measure"], "n": r["n"],
               "estimate (95% CI)": f"{r['estimate']:.3g} ({r['lower']:.3g} to {r['upper']:.3g}) {r['unit']}"}
        if r.get("total") is not None and r["total"] == r["total"]:
            row["site total (95% CI)"] = f"{r['total']:,.0f} ({r['total_lower']:,.0f} to {r['total_upper']:,.0f})"
            row["quadrats for +/-20%"] = r.get("quadrats_needed")
        row["caution"] = "fewer than 10 quadrats" if r["n"] < 10 else ""
        rows.append(row)
    return rows


@cli.command("adequacy")
@click.argument("species")
@click.argument("year", type=int)
@click.option("--site", required=True, help="Site code.")
@click.option("--precision", type=float, default=0.2, show_default=True, help="Relative half-width wanted.")
@click.option("--figure", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Save the running mean with its interval as PNG/SVG/PDF.")
@format_option
@click.pass_obj
def adequacy_command(ctx: Context, species: str, year: int, site: str, precision: float, figure, as_json, as_csv):
    """Sample adequacy: quadrats needed for the mean within +/-precision, and the running mean."""
    from monitor.services import estimate

    report = estimate.sample_adequacy(ctx.db, species, year, site, programme_code=ctx.programme,
                                      precision=precision, figure=figure)
    fmt = chosen_format(as_json, as_csv)
    if fmt == "json":
        emit(report.to_dict(), fmt)
        return
    a = report.adequacy
    emit({"quadrats taken": a.n, "mean per quadrat": a.mean, "sd": a.sd,
          f"quadrats needed for +/-{100 * precision:.0f}%": a.n_required, "more needed": a.additional_required,
          "precision now (+/-%)": None if a.achieved_precision is None else 100 * a.achieved_precision,
          "adequate": a.adequate}, fmt)
    if figure:
        say(f"running mean figure: {figure}")


@cli.command("gradient")
@click.argument("species")
@click.option("--transect", default=None, help="Transect code: abundance against distance along it.")
@click.option("--covariate", default=None, help="Visit covariate name (e.g. soil_moisture) instead of a transect.")
@click.option("--year", "years", type=int, multiple=True, help="Seasons to use (repeat; default all).")
@click.option("--figure", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Save abundance along the gradient per season.")
@format_option
@click.pass_obj
def gradient_command(ctx: Context, species, transect, covariate, years, figure, as_json, as_csv):
    """Abundance along a transect or covariate: Spearman's rho and a GLM slope with its interval per season."""
    from monitor.services import estimate

    result = estimate.gradient(ctx.db, species, programme_code=ctx.programme, transect=transect, covariate=covariate,
                               years=list(years) or None, figure=figure)
    fmt = chosen_format(as_json, as_csv)
    if fmt == "json":
        emit(result.to_dict(), fmt)
        return
    emit(gradient_rows(result), fmt)
    for d in result.diagnostics:
        say(f"note: {d.message}")
    if figure:
        say(f"gradient figure: {figure}")


def gradient_rows(result) -> list[dict]:
    return [{"season": f.season, "n": f.n, "spearman rho": f.spearman_rho, "p": f.spearman_p, "family": f.family,
             "change per unit (95% CI)": f"{100 * (f.rate_ratio - 1):+.2f}% ({100 * (f.rate_ratio_lower - 1):+.2f} to "
                                         f"{100 * (f.rate_ratio_upper - 1):+.2f})"} for f in result.fits]


@cli.command("change")
@click.argument("species")
@click.argument("first", type=int)
@click.argument("second", type=int)
@click.option("--site", default=None, help="Only this site.")
@click.option("--figure", type=click.Path(dir_okay=False, path_type=Path), default=None, help="Save the paired plot.")
@format_option
@click.pass_obj
def change_command(ctx: Context, species, first, second, site, figure, as_json, as_csv):
    """Change between two seasons at the permanent quadrats: paired t and Wilcoxon beside the unpaired test."""
    from monitor.services import estimate

    r = estimate.two_seasons(ctx.db, species, first, second, programme_code=ctx.programme, site=site, figure=figure)
    fmt = chosen_format(as_json, as_csv)
    if fmt == "json":
        emit(r.to_dict(), fmt)
        return
    emit([{"analysis": "paired t (same quadrats)", "n": r.n, "change": r.mean_difference, "lower": r.paired_lower,
           "upper": r.paired_upper, "p": r.paired_p},
          {"analysis": "Wilcoxon signed-rank", "n": r.wilcoxon_nonzero, "change": None, "lower": None, "upper": None,
           "p": r.wilcoxon_p},
          {"analysis": "Welch (as if unpaired)", "n": r.n_first + r.n_second, "change": r.welch_difference,
           "lower": r.welch_lower, "upper": r.welch_upper, "p": r.welch_p}], fmt)
    say(f"between-season correlation at the same quadrats r = {r.correlation:.2f}; pairing is {r.efficiency:.1f} times "
        "as efficient as unpaired sampling")


@cli.command("report")
@click.argument("year", type=int)
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=None,
              help="Folder to write (default reports/YEAR); replaced as a whole, atomically.")
@click.option("--previous", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
              help="Last year's report.json (default: reports/YEAR-1/report.json next to --out, if present).")
@click.pass_obj
def report_command(ctx: Context, year: int, out_dir, previous) -> None:
    """Write the annual trend summary for land managers: one self-contained HTML page, figures and numbers."""
    from monitor.services import report

    folder = report.write_report(ctx.db, year, out_dir, programme_code=ctx.programme, previous=previous)
    say(f"report written: {folder / 'index.html'}")
