"""Analyses: trends across years, this season's estimates, sample adequacy, gradients, two-season change."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import click

from monitor import measures
from monitor.cli.main import Context, cli
from monitor.cli.output import chosen_format, emit, format_option, progress, say
from monitor.cli.tables import trend_number_rows, write_workbook, xlsx_option
from monitor.families import FAMILIES
from monitor.families import NAMES as FAMILY_NAMES
from monitor.settings import DEFAULT_CHANGE_MARGIN, FEW_QUADRATS, MIN_YEAR_EFFECT_YEARS, change_margin


def _pct(x: float | None) -> str:
    return "" if x is None or x != x else f"{100 * x:+.1f}"


def _sig(x: float | None) -> str:
    return "" if x is None else f"{x:.3g}"


def trend_rows(trends, skipped=()) -> list[dict]:
    """One row per species: the annual change labelled with what it changes (count, odds, odds of cover),
    the fitted trend on the measure's own scale (first -> last year, difference with interval), the
    interval's reference and the call."""
    rows = []
    by_area = any(x.area_kind != "all" for x in trends)
    for t in trends:
        r = t.result
        ac = r.annual_change
        lc = r.level_change
        own = diff = ""
        if lc is not None:
            own = f"{_sig(lc.first.estimate)} -> {_sig(lc.last.estimate)} {lc.unit}"
            d = lc.difference
            diff = f"{d.estimate:+.3g} ({d.lower:+.3g} to {d.upper:+.3g})"
        area = {"area": "all" if t.area_kind == "all" else f"{t.area_kind} {t.area}"} if by_area else {}
        rows.append({
            "species": t.species, "measure": t.measure, **area, "model": r.model_label, "stations": r.n_stations,
            "years": f"{r.years[0]}-{r.years[1]}", "year effect": r.year_random,
            "change of": r.change_scale,
            "annual change %": f"{_pct(ac.estimate)} ({_pct(ac.lower)} to {_pct(ac.upper)})",
            "over period %": f"{_pct(r.period_change.estimate)}",
            "fitted, first -> last": own, "difference (95% CI)": diff,
            "interval": r.interval_label, "call": r.call, "fitted": _fitted(t),
        })
    for s in skipped:
        rows.append({"species": s["species"], "measure": s["measure"], "model": "", "stations": "", "years": "",
                     "year effect": "", "change of": "", "annual change %": "", "over period %": "",
                     "fitted, first -> last": "", "difference (95% CI)": "", "interval": "",
                     "call": f"not fitted: {s['reason']}", "fitted": ""})
    return rows


def _fitted(t) -> str:
    if t.fitted_at is None:
        return ""
    stamp = t.fitted_at.astimezone(dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
    return f"{stamp} (stored)" if t.reused else stamp


def parallel_options(func):
    """``--workers`` and ``--cluster``: where the fits run."""
    func = click.option("--cluster", default=None, metavar="tcp://HOST:PORT",
                        help="Run the fits on this Dask scheduler's workers (results are stored here).")(func)
    func = click.option("--workers", type=click.IntRange(min=1), default=None,
                        help="Local processes fitting at once (default: the cores).")(func)
    return func


@cli.group("trend", invoke_without_command=True)
@click.option("--species", "species", multiple=True, help="Species code (repeat for several; default all targets).")
@click.option("--site", "sites", multiple=True, help="Only these sites (repeat for several).")
@click.option("--from", "first_year", type=int, default=None, help="First season to use.")
@click.option("--to", "last_year", type=int, default=None, help="Last season to use.")
@click.option("--family", type=click.Choice(FAMILY_NAMES),
              default=None, help="Model family (default by measure: counts poisson-lognormal, k of n binomial, "
                                 "cover logit-normal, positive values lognormal).")
@click.option("--year-effect", "year_effect", type=click.Choice(["iid", "ar1"]), default=None,
              help="Form of the random year effect shared by all stations: independent years (iid) or an "
                   "order-1 autoregression, consecutive years alike (ar1; its interval is widened for "
                   "the uncertainty of the years' correlation, and may still be narrow when years are "
                   f"strongly alike). Default: iid from {MIN_YEAR_EFFECT_YEARS} years with data.")
@click.option("--no-year-effect", "no_year_effect", is_flag=True,
              help="Leave out the random year effect (intervals then ignore good and bad years shared by the "
                   "stations, and are too narrow when there are such years).")
@click.option("--site-year", "site_year", is_flag=True,
              help="Add a random site-by-year effect (sites fluctuating apart from each other).")
@click.option("--observation-effect/--no-observation-effect", "observation_effect", default=None,
              help="k-of-n data: a visit-level effect for extra variation (default: added when the data are "
                   "overdispersed).")
@click.option("--observer-effect", is_flag=True, help="Add a random intercept for observer (crossed with station); "
                                                      "visits with no observer form a level of their own.")
@click.option("--by", "by", type=click.Choice(["site", "stratum", "region"]), default=None,
              help="Also a trend for each site, stratum or region (a site's region is set in sites.geojson).")
@click.option("--refit", is_flag=True, help="Fit again even where a stored fit of the same data and model exists.")
@parallel_options
@click.option("--table", "table", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
              help="Fit a long table from elsewhere (station, year, optional site, and the columns of one measure: "
                   + " / ".join("+".join(m.columns) for m in measures.REGISTRY.values()) + ") instead of the database.")
@click.option("--margin", type=float, default=None,
              help=f"Margin of change that matters, fraction a year (with --table; default {DEFAULT_CHANGE_MARGIN:g}).")
@format_option
@xlsx_option
@click.pass_context
def trend_command(click_ctx: click.Context, species, sites, first_year, last_year, family, year_effect, no_year_effect,
                  site_year, observation_effect, observer_effect, by, refit, workers, cluster, table, margin,
                  as_json: bool, as_csv: bool, xlsx: Path | None) -> None:
    """Fit mixed models across years: annual change with 95% intervals and the call for each species.

    Fits are stored and reused while the data, the model and the engine are unchanged."""
    if click_ctx.invoked_subcommand is not None:
        return
    from monitor.services import trend

    ctx: Context = click_ctx.obj
    if no_year_effect and year_effect:
        raise click.UsageError("--no-year-effect and --year-effect exclude each other")
    choices = trend.ModelChoices(family=family, year_random="none" if no_year_effect else year_effect,
                                 site_by_year=site_year, observer_effect=observer_effect,
                                 observation_effect=observation_effect)
    fmt = chosen_format(as_json, as_csv)
    skipped: list[dict] = []
    if table is not None:
        trends = [trend.fit_table(table, margin=change_margin(margin), choices=choices)]
    else:
        with progress(1, "fitting") as bar:
            def tick(i: int, n: int, _name: str) -> None:
                bar.length = max(n, 1)
                bar.update(i - bar.pos)

            trends = trend.fit_programme(ctx.db, programme_code=ctx.programme, species=list(species) or None,
                                         sites=list(sites) or None, first_year=first_year, last_year=last_year,
                                         choices=choices, skipped=skipped, by=by, refit=refit, workers=workers,
                                         cluster=cluster, progress=tick)
        reused = sum(t.reused for t in trends)
        if reused:
            say(f"{reused} of {len(trends)} fits reused from the stored fits (unchanged data, model and engine)")
    for s in skipped:
        say(f"{s['species']} ({s['measure']}): not fitted: {s['reason']}")
    write_workbook(xlsx, {"trends": trend_number_rows(trends)})
    if fmt == "json":
        emit([t.to_dict() for t in trends] + [{**s, "call": None} for s in skipped], fmt)
    elif fmt == "csv":  # numbers in columns of their own, for spreadsheets
        emit(trend_number_rows(trends), fmt)
    else:
        emit(trend_rows(trends, skipped), fmt)


@trend_command.command("history")
@click.argument("species")
@click.option("--areas", is_flag=True, help="Also the calls by site, stratum or region.")
@format_option
@click.pass_obj
def trend_history_command(ctx: Context, species: str, areas: bool, as_json: bool, as_csv: bool) -> None:
    """The call each year's report gave a species, with its annual change and when the fit was made."""
    from monitor.services import analyses

    table = analyses.history(ctx.db, species, programme_code=ctx.programme, areas=areas)
    fmt = chosen_format(as_json, as_csv)
    if fmt != "table":
        emit(table, fmt)
        return
    if table.empty:
        say(f"no report recorded for {species} yet (reports are recorded from `monitor report YEAR`)")
        return
    emit([{"report": r["report_year"], "species": r["species"], "measure": r["measure"], "area": r["area"],
           "call": r["call"], "annual change %": f"{_pct(r['annual_change'])} ({_pct(r['lower'])} to "
           f"{_pct(r['upper'])})", "years": r["years"], "fitted": r["fitted_at"], "reported": r["reported_at"]}
          for r in table.to_dict(orient="records")])


@cli.command("estimate")
@click.argument("year", type=int)
@click.option("--species", "species", multiple=True, help="Species code (repeat; default all targets).")
@click.option("--site", "sites", multiple=True, help="Only these sites (repeat).")
@click.option("--precision", type=float, default=0.2, show_default=True,
              help="Target relative precision for the quadrats-needed column (0.2 = +/-20%).")
@format_option
@xlsx_option
@click.pass_obj
def estimate_command(ctx: Context, year: int, species, sites, precision: float, as_json: bool, as_csv: bool,
                     xlsx: Path | None) -> None:
    """This season's estimates per site and species: density and total with intervals, cover, frequency."""
    from monitor.services import estimate

    table = estimate.season_table(ctx.db, year, programme_code=ctx.programme, species=list(species) or None,
                                  sites=list(sites) or None, precision=precision)
    write_workbook(xlsx, {f"estimates {year}": table})
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
        row["caution"] = f"fewer than {FEW_QUADRATS} quadrats" if r["n"] < FEW_QUADRATS else ""
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
              help="Last year's report.json to compare with (default: the last report recorded in the database "
                   "for YEAR-1, else reports/YEAR-1/report.json next to --out, if present).")
@click.option("--site", default=None, help="A report for this one site (code): trends on its stations only.")
@click.option("--species", default=None, help="A report for this one species (code).")
@click.option("--no-pdf", "no_pdf", is_flag=True, help="Skip report.pdf (the printed report).")
@click.option("--by", "by", type=click.Choice(["site", "stratum", "region"]), default=None,
              help="Add a table of trends by site, stratum or region.")
@click.option("--refit", is_flag=True, help="Fit every trend again instead of reusing stored fits.")
@parallel_options
@click.pass_obj
def report_command(ctx: Context, year: int, out_dir, previous, site, species, no_pdf: bool, by, refit, workers,
                   cluster) -> None:
    """Write the annual trend summary for land managers: one self-contained HTML page, the printed
    report as PDF (report.pdf, A4 with page numbers), figures and numbers.

    Stored fits of unchanged data are reused; the report says when each fit was made."""
    from monitor.services import report

    folder = report.write_report(ctx.db, year, out_dir, programme_code=ctx.programme, previous=previous,
                                 site=site, species=species, pdf=not no_pdf, by=by, refit=refit, workers=workers,
                                 cluster=cluster)
    say(f"report written: {folder / 'index.html'}" + ("" if no_pdf else f" and {folder / 'report.pdf'}"))


def _int_list(text: str) -> list[int]:
    try:
        return [int(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise click.BadParameter(f"expected whole numbers separated by commas, got {text!r}") from None


@cli.command("power")
@click.option("--species", default=None, help="Use the variance and level fitted to this stored species.")
@click.option("--family", type=click.Choice(FAMILY_NAMES),
              default="poisson-lognormal", show_default=True, help="Without --species: the model family.")
@click.option("--mean", type=float, default=None, help="Without --species: mean count per quadrat (or proportion).")
@click.option("--station-sd", type=float, default=0.5, show_default=True, help="Without --species: station SD.")
@click.option("--site-sd", type=float, default=0.0, show_default=True, help="Without --species: site SD.")
@click.option("--obs-sd", type=float, default=0.3, show_default=True,
              help="Without --species: observation-level SD (overdispersion), or residual SD for cover and lognormal.")
@click.option("--sd-year", type=float, default=None,
              help="SD of the year-to-year fluctuation shared by every station (link scale, e.g. 0.15); "
                   "without --species the default is 0, with it the fitted value, which this replaces.")
@click.option("--sd-site-year", type=float, default=None,
              help="SD of each site's own year-to-year fluctuation (link scale); default 0, or the fitted value.")
@click.option("--year-rho", type=float, default=None,
              help="Correlation of consecutive years' fluctuations, an AR(1) over years (-1 to 1, e.g. 0.4: "
                   "good years come in runs); default 0, or the value fitted with --year-effect ar1.")
@click.option("--trials", type=int, default=None,
              help="Without --species, family binomial: cells in the grid or pins in the frame (1: presence).")
@click.option("--change", type=float, required=True, help="Total change over --over years, e.g. -0.5 for a 50% fall.")
@click.option("--over", "over_years", type=int, default=10, show_default=True, help="Years the change happens over.")
@click.option("--stations", default="20,40,60", show_default=True, help="Numbers of stations to compare.")
@click.option("--years", default="6,11", show_default=True, help="Numbers of seasons to compare.")
@click.option("--revisit", default="[1-0]", show_default=True, help="Revisit design, e.g. [1-0] or [1-0,1-3].")
@click.option("--missed", type=float, default=0.0, show_default=True, help="Expected share of missed visits.")
@click.option("--alpha", type=float, default=0.05, show_default=True, help="Significance level.")
@click.option("--side", type=click.Choice(["decline", "rise", "two-sided"]), default="decline", show_default=True)
@click.option("--target", type=float, default=0.8, show_default=True,
              help="Target power for the smallest number of stations and of years.")
@click.option("--replicates", type=int, default=200, show_default=True, help="Simulated data sets per design.")
@click.option("--seed", type=int, default=1, show_default=True, help="Seed: the same seed gives the same answer.")
@click.option("--workers", type=int, default=1, show_default=True, help="Processes to run in parallel.")
@click.option("--cluster", default=None, metavar="tcp://HOST:PORT",
              help="Run the replicates on this Dask scheduler's workers instead (the same answer).")
@click.option("--no-search", is_flag=True,
              help="Compare the designs only: skip the searches for the smallest number of stations and of years.")
@click.option("--figure", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Save power against stations, one line per number of years, with the unlimited-stations ceiling.")
@format_option
@click.pass_obj
def power_command(ctx: Context, species, family, mean, station_sd, site_sd, obs_sd, sd_year, sd_site_year, year_rho,
                  trials,
                  change, over_years, stations, years, revisit, missed, alpha, side, target, replicates, seed,
                  workers, cluster, no_search, figure, as_json, as_csv):
    """Can the design detect the change that matters? Simulated power per design, with the approximation beside it."""
    from dataclasses import replace

    from monitor.power import VarianceComponents
    from monitor.services import power

    for name, value in (("--sd-year", sd_year), ("--sd-site-year", sd_site_year)):
        if value is not None and not value >= 0:
            raise click.BadParameter(f"{value}: expected an SD of 0 or more", param_hint=name)
    if year_rho is not None and not -1 < year_rho < 1:
        raise click.BadParameter(f"{year_rho}: expected a correlation strictly between -1 and 1",
                                 param_hint="--year-rho")
    if trials is not None and trials < 1:
        raise click.BadParameter(f"{trials}: expected a whole number of cells or pins, 1 or more",
                                 param_hint="--trials")
    if species:
        components, source = power.components_for(ctx.db, species, programme_code=ctx.programme)
        changed = {k: v for k, v in (("year_sd", sd_year), ("site_year_sd", sd_site_year), ("year_rho", year_rho))
                   if v is not None}
        if changed:
            components = replace(components, **changed)
            source += " (year-to-year SDs as given)"
    else:
        if mean is None:
            raise click.UsageError("give --species (fitted to the programme) or --mean with the SDs")
        sds = {"station_sd": station_sd, "site_sd": site_sd, "year_sd": sd_year or 0.0,
               "site_year_sd": sd_site_year or 0.0, "year_rho": year_rho or 0.0}
        fam = FAMILIES[family]
        sds["residual_sd" if fam.dispersion_field == "residual_sd" else "observation_sd"] = obs_sd
        if fam.has_trials:
            sds["trials"] = trials if trials is not None else 1
        components, source = VarianceComponents.from_mean(family, mean, **sds), "values given"
    station_list, year_list = _int_list(stations), _int_list(years)
    with progress(1, "simulating") as bar:
        def tick(done: int, total: int) -> None:
            bar.length = max(total, 1)
            bar.update(done - bar.pos)

        study = power.power_study(components, source, change=change, over_years=over_years, stations=station_list,
                                  years=year_list, revisit=revisit, missed_share=missed, alpha=alpha, side=side,
                                  target=target, replicates=replicates, seed=seed, workers=workers, cluster=cluster,
                                  figure=figure, find_smallest=not no_search, find_years=not no_search,
                                  progress=tick)
    fmt = chosen_format(as_json, as_csv)
    if fmt == "json":
        emit(study.to_dict(), fmt)
        return
    emit(power_rows(study), fmt)
    if fmt == "table":
        for line in power_sentences(study):
            say(line)
        if figure:
            say(f"figure: {figure} (error bars: +/- 2 Monte-Carlo SE)")


POWER_COLUMN = "power (simulated, +/- 1 MC SE)"


def power_rows(study) -> list[dict]:
    rows = []
    for r in study.results:
        approx = r.approximation.power if r.approximation is not None else None
        ceiling = r.approximation.ceiling if r.approximation is not None else None
        rows.append({"stations": r.design.n_stations, "seasons": r.design.n_years,
                     POWER_COLUMN: f"{r.power:.2f} +/- {r.power_se:.2f}" if r.power == r.power else "not computed",
                     "approximation": "" if approx is None else f"{approx:.2f}",
                     "ceiling (unlimited stations)": "" if ceiling is None else f"{ceiling:.2f}",
                     "median CI width % a year": f"{100 * r.median_interval_width:.1f}",
                     "right call": f"{r.share_right_call:.2f}" if r.share_right_call == r.share_right_call else ""})
    return rows


def power_sentences(study) -> list[str]:
    """The study's answers in plain words: how many stations, how many years, and what stations cannot buy."""
    lines = ["Power is the share of simulated data sets in which the decline was detected; "
             "the table shows +/- 1 Monte-Carlo SE, the figure +/- 2."]
    pct = f"{100 * study.target:.0f}%"
    for n_years, ceiling in sorted(study.ceilings().items()):
        if ceiling < study.target:
            lines.append(f"Over {n_years} seasons no number of stations reaches {pct} power: the good and bad years "
                         f"all stations share cap it at about {ceiling:.2f} (approximation); only more years help.")
    s = study.smallest
    if s is not None:
        if s.value is None:
            lines.append(f"No design on the grid up to {max(r.design.n_stations for r in s.evaluated)} stations "
                         f"reaches {pct} power over {s.evaluated[0].design.n_years if s.evaluated else 'the'} seasons.")
        else:
            r = s.result
            lines.append(f"Smallest number of stations reaching {pct} power over {r.design.n_years} seasons: "
                         f"{s.value} (simulated power {r.power:.2f} +/- {r.power_se:.2f}; the approximation suggested "
                         f"{s.approximate_value}).")
    y = study.years
    if y is not None and y.evaluated:
        stations_here = y.evaluated[0].design.n_stations
        if y.value is None:
            lines.append(f"With {stations_here} stations no series up to {max(r.design.n_years for r in y.evaluated)} "
                         f"seasons reaches {pct} power.")
        else:
            r = y.result
            lines.append(f"How many years: with {stations_here} stations, {y.value} consecutive seasons reach {pct} "
                         f"power (simulated power {r.power:.2f} +/- {r.power_se:.2f}; the approximation suggested "
                         f"{y.approximate_value}).")
    return lines