"""monitor.schedule: this season's rounds, from due stations to team, day and route.

Pure computation: no database, no click.  Inputs and outputs are DataFrames and frozen
dataclasses with ``to_dict()``.
"""

from monitor.schedule.fieldpack import (
    FieldSheetContext,
    SheetStation,
    field_sheet_columns,
    field_sheet_context,
    field_sheet_frame,
    render_field_sheet,
    team_day_calendar,
    team_day_gpx,
)
from monitor.schedule.planner import (
    CrewSettings,
    SeasonPlan,
    Team,
    TeamDay,
    nearest_neighbour_length,
    plan_season,
)
from monitor.schedule.network import PathNetwork, straight_distances
from monitor.schedule.routing import held_karp, order_route, route_length
from monitor.schedule.season import (
    EffortSettings,
    SeasonWindow,
    due_stations,
    overdue_table,
    station_window,
)

__all__ = [
    "CrewSettings",
    "EffortSettings",
    "FieldSheetContext",
    "PathNetwork",
    "SeasonPlan",
    "SeasonWindow",
    "SheetStation",
    "Team",
    "TeamDay",
    "due_stations",
    "field_sheet_columns",
    "field_sheet_context",
    "field_sheet_frame",
    "held_karp",
    "nearest_neighbour_length",
    "order_route",
    "overdue_table",
    "plan_season",
    "render_field_sheet",
    "route_length",
    "station_window",
    "straight_distances",
    "team_day_calendar",
    "team_day_gpx",
]
