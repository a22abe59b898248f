"""Listings of what the programme holds (stations, sites, species) and adding one station."""

from __future__ import annotations

import click

from monitor.cli.commands_records import station_group
from monitor.cli.main import Context, cli
from monitor.cli.output import chosen_format, emit, format_option, say
from monitor.columns import PLACEMENTS


@station_group.command("list")
@click.option("--site", default=None, help="Only the stations of this site (code).")
@click.option("--in-service", is_flag=True, help="Leave out retired and lost stations.")
@format_option
@click.pass_obj
def station_list(ctx: Context, site: str | None, in_service: bool, as_json: bool, as_csv: bool) -> None:
    """The programme's stations: site and its name, panel, transect, position, quadrat area, state."""
    from monitor.services import listings

    emit(listings.list_stations(ctx.db, programme_code=ctx.programme, site=site, include_retired=not in_service),
         chosen_format(as_json, as_csv))


def _quadrat(_ctx, _param, value: str | None) -> tuple[float, float] | None:
    if value is None:
        return None
    try:
        width, length = (float(v) for v in value.split(","))
    except ValueError:
        raise click.BadParameter("expected WIDTH,LENGTH in metres, e.g. 1,1") from None
    return width, length


@station_group.command("add")
@click.argument("code")
@click.option("--site", required=True, help="Code of the site the station lies in.")
@click.option("--x", "x", type=float, required=True, help="Easting [m] in the programme's CRS (or --epsg).")
@click.option("--y", "y", type=float, required=True, help="Northing [m].")
@click.option("--placement", type=click.Choice(PLACEMENTS), default="targeted", show_default=True,
              help="How the position was chosen.")
@click.option("--quadrat", callback=_quadrat, default=None,
              help="Quadrat WIDTH,LENGTH [m]; default: the programme's quadrat size.")
@click.option("--panel", default=None, help="Revisit panel code.")
@click.option("--transect", default=None, help="Transect code (as written on the ground).")
@click.option("--distance", "distance_m", type=float, default=None, help="Distance along the transect [m].")
@click.option("--epsg", type=int, default=None, help="EPSG code of --x/--y when not the programme's CRS.")
@click.option("--established", type=click.DateTime(["%Y-%m-%d"]), default=None, help="Date set out (YYYY-MM-DD).")
@click.option("--fix-method", default=None, help="How the position was fixed (e.g. handheld GPS).")
@click.option("--accuracy", "accuracy_m", type=float, default=None, help="Stated accuracy of the fix [m].")
@click.option("--marker", default=None, help="What marks the station on the ground.")
@click.option("--relocation-notes", default=None, help="Offsets, bearings, landmarks to find it again.")
@click.pass_obj
def station_add(ctx: Context, code: str, site: str, x: float, y: float, placement: str, quadrat, panel, transect,
                distance_m, epsg, established, fix_method, accuracy_m, marker, relocation_notes) -> None:
    """Add station CODE to a site, checked as a row of stations.csv would be (inside its site, known panel)."""
    from monitor.services import listings

    added = listings.add_station(
        ctx.db, code, site=site, x=x, y=y, placement=placement, quadrat=quadrat, panel=panel, transect=transect,
        distance_m=distance_m, epsg=epsg, established=established.date() if established else None,
        fix_method=fix_method, accuracy_m=accuracy_m, marker=marker, relocation_notes=relocation_notes,
        programme_code=ctx.programme)
    say(f"station {added['station']} added to site {added['site']} at ({added['x']:.2f}, {added['y']:.2f}) (logged)")


@cli.group("sites")
def sites_group() -> None:
    """The programme's sites."""


@sites_group.command("list")
@format_option
@click.pass_obj
def sites_list(ctx: Context, as_json: bool, as_csv: bool) -> None:
    """Sites: code, name, habitat, area [m²], stations in service and retired, access agreement end."""
    from monitor.services import listings

    emit(listings.list_sites(ctx.db, programme_code=ctx.programme), chosen_format(as_json, as_csv))


@cli.group("species")
def species_group() -> None:
    """The programme's target species."""


@species_group.command("list")
@format_option
@click.pass_obj
def species_list(ctx: Context, as_json: bool, as_csv: bool) -> None:
    """Target species: code, common and scientific name, measure (and cells or pins), sensitive or not."""
    from monitor.services import listings

    emit(listings.list_species(ctx.db, programme_code=ctx.programme), chosen_format(as_json, as_csv))
