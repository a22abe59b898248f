"""Placement runs, station relocations, and season plans as records of their own.

The crews and team-day times of stored season plans move out of
``programme.settings_json["season_plans"][YEAR]`` into ``season_plan``, ``season_plan_team`` and
``season_plan_team_day`` on upgrade; downgrade writes them back into the settings, value for value.
A plan whose season has no round (cannot happen through the program) stays in the settings.

Revision ID: 0004
Revises: 0002
Create Date: 2026-12-02
"""

from __future__ import annotations

import datetime as dt
import json

import sqlalchemy as sa
import sqlmodel
from alembic import op

SETTINGS_PLANS = "season_plans"


revision = '0004'
down_revision = '0002'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('placement_run',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('programme_id', sa.Integer(), nullable=False),
    sa.Column('site_id', sa.Integer(), nullable=False),
    sa.Column('method', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('seed', sa.Integer(), nullable=False),
    sa.Column('extends_id', sa.Integer(), nullable=True),
    sa.Column('n_stations', sa.Integer(), nullable=False),
    sa.Column('params_json', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('created_at', sqlmodel.sql.sqltypes.UTCDateTime(), nullable=False),
    sa.CheckConstraint("method IN ('random', 'stratified', 'balanced', 'systematic', 'transect', 'targeted')", name=op.f('ck_placement_run_method_known')),
    sa.CheckConstraint('n_stations >= 0', name=op.f('ck_placement_run_n_non_negative')),
    sa.ForeignKeyConstraint(['extends_id'], ['placement_run.id'], name=op.f('fk_placement_run_extends_id_placement_run'), ondelete='RESTRICT'),
    sa.ForeignKeyConstraint(['programme_id'], ['programme.id'], name=op.f('fk_placement_run_programme_id_programme'), ondelete='RESTRICT'),
    sa.ForeignKeyConstraint(['site_id'], ['site.id'], name=op.f('fk_placement_run_site_id_site'), ondelete='RESTRICT'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_placement_run'))
    )
    with op.batch_alter_table('placement_run', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_placement_run_extends_id'), ['extends_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_placement_run_programme_id'), ['programme_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_placement_run_site_id'), ['site_id'], unique=False)

    op.create_table('season_plan',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('round_id', sa.Integer(), nullable=False),
    sa.Column('seed', sa.Integer(), nullable=False),
    sa.Column('summary', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('extra_team_days', sa.Integer(), nullable=False),
    sa.Column('randomise_site_order', sa.Boolean(), nullable=False),
    sa.Column('site_order', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('day_start', sqlmodel.sql.sqltypes.AutoString(length=5), nullable=False),
    sa.Column('path_factor', sa.Float(), nullable=False),
    sa.Column('routing', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('allow_lone_working', sa.Boolean(), nullable=False),
    sa.Column('details_json', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('created_at', sqlmodel.sql.sqltypes.UTCDateTime(), nullable=False),
    sa.CheckConstraint("routing IN ('straight', 'paths')", name=op.f('ck_season_plan_routing_known')),
    sa.CheckConstraint('extra_team_days >= 0', name=op.f('ck_season_plan_extra_non_negative')),
    sa.CheckConstraint('path_factor >= 1', name=op.f('ck_season_plan_path_factor_at_least_one')),
    sa.ForeignKeyConstraint(['round_id'], ['round.id'], name=op.f('fk_season_plan_round_id_round'), ondelete='RESTRICT'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_season_plan')),
    sa.UniqueConstraint('round_id', name=op.f('uq_season_plan_round_id'))
    )
    op.create_table('season_plan_team',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('plan_id', sa.Integer(), nullable=False),
    sa.Column('code', sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
    sa.Column('members', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('hours_per_day', sa.Float(), nullable=False),
    sa.Column('walking_speed_kmh', sa.Float(), nullable=False),
    sa.Column('working_weekdays', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('blocked_dates', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.CheckConstraint('hours_per_day > 0', name=op.f('ck_season_plan_team_hours_positive')),
    sa.CheckConstraint('walking_speed_kmh > 0', name=op.f('ck_season_plan_team_speed_positive')),
    sa.ForeignKeyConstraint(['plan_id'], ['season_plan.id'], name=op.f('fk_season_plan_team_plan_id_season_plan'), ondelete='RESTRICT'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_season_plan_team')),
    sa.UniqueConstraint('plan_id', 'code', name='uq_season_plan_team_plan_code')
    )
    with op.batch_alter_table('season_plan_team', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_season_plan_team_plan_id'), ['plan_id'], unique=False)

    op.create_table('season_plan_team_day',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('plan_id', sa.Integer(), nullable=False),
    sa.Column('team', sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
    sa.Column('date', sa.Date(), nullable=False),
    sa.Column('site', sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
    sa.Column('start_x', sa.Float(), nullable=False),
    sa.Column('start_y', sa.Float(), nullable=False),
    sa.Column('route_m', sa.Float(), nullable=False),
    sa.Column('start_time', sqlmodel.sql.sqltypes.AutoString(length=5), nullable=False),
    sa.Column('end_time', sqlmodel.sql.sqltypes.AutoString(length=5), nullable=False),
    sa.CheckConstraint('route_m >= 0', name=op.f('ck_season_plan_team_day_route_non_negative')),
    sa.ForeignKeyConstraint(['plan_id'], ['season_plan.id'], name=op.f('fk_season_plan_team_day_plan_id_season_plan'), ondelete='RESTRICT'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_season_plan_team_day')),
    sa.UniqueConstraint('plan_id', 'team', 'date', name='uq_season_plan_team_day_plan_team_date')
    )
    with op.batch_alter_table('season_plan_team_day', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_season_plan_team_day_plan_id'), ['plan_id'], unique=False)

    op.create_table('station_relocation',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('programme_id', sa.Integer(), nullable=False),
    sa.Column('from_station_id', sa.Integer(), nullable=False),
    sa.Column('to_station_id', sa.Integer(), nullable=False),
    sa.Column('date', sa.Date(), nullable=False),
    sa.Column('reason', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('lost', sa.Boolean(), nullable=False),
    sa.Column('distance_m', sa.Float(), nullable=False),
    sa.Column('recorded_by', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('recorded_at', sqlmodel.sql.sqltypes.UTCDateTime(), nullable=False),
    sa.CheckConstraint('distance_m >= 0', name=op.f('ck_station_relocation_distance_non_negative')),
    sa.CheckConstraint('from_station_id <> to_station_id', name=op.f('ck_station_relocation_two_stations')),
    sa.CheckConstraint('length(reason) > 0', name=op.f('ck_station_relocation_reason_given')),
    sa.ForeignKeyConstraint(['from_station_id'], ['station.id'], name=op.f('fk_station_relocation_from_station_id_station'), ondelete='RESTRICT'),
    sa.ForeignKeyConstraint(['programme_id'], ['programme.id'], name=op.f('fk_station_relocation_programme_id_programme'), ondelete='RESTRICT'),
    sa.ForeignKeyConstraint(['to_station_id'], ['station.id'], name=op.f('fk_station_relocation_to_station_id_station'), ondelete='RESTRICT'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_station_relocation')),
    sa.UniqueConstraint('from_station_id', name=op.f('uq_station_relocation_from_station_id')),
    sa.UniqueConstraint('to_station_id', name=op.f('uq_station_relocation_to_station_id'))
    )
    with op.batch_alter_table('station_relocation', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_station_relocation_programme_id'), ['programme_id'], unique=False)

    _plans_to_tables(op.get_bind())


def downgrade() -> None:
    _plans_to_settings(op.get_bind())
    with op.batch_alter_table('station_relocation', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_station_relocation_programme_id'))

    op.drop_table('station_relocation')
    with op.batch_alter_table('season_plan_team_day', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_season_plan_team_day_plan_id'))

    op.drop_table('season_plan_team_day')
    with op.batch_alter_table('season_plan_team', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_season_plan_team_plan_id'))

    op.drop_table('season_plan_team')
    op.drop_table('season_plan')
    with op.batch_alter_table('placement_run', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_placement_run_site_id'))
        batch_op.drop_index(batch_op.f('ix_placement_run_programme_id'))
        batch_op.drop_index(batch_op.f('ix_placement_run_extends_id'))

    op.drop_table('placement_run')


# --- moving stored plans between the settings and the tables ------------------------------------------------

_programme = sa.table("programme", sa.column("id", sa.Integer), sa.column("settings_json", sa.String))
_round = sa.table("round", sa.column("id", sa.Integer), sa.column("programme_id", sa.Integer),
                  sa.column("year", sa.Integer))
_plan = sa.table("season_plan", *(sa.column(c) for c in (
    "id", "round_id", "seed", "summary", "extra_team_days", "randomise_site_order", "site_order", "day_start",
    "path_factor", "routing", "allow_lone_working", "details_json", "created_at")))
_team = sa.table("season_plan_team", *(sa.column(c) for c in (
    "id", "plan_id", "code", "members", "hours_per_day", "walking_speed_kmh", "working_weekdays", "blocked_dates")))
_day = sa.table("season_plan_team_day", *(sa.column(c) for c in (
    "id", "plan_id", "team", "date", "site", "start_x", "start_y", "route_m", "start_time", "end_time")))


def _hhmm(text: str) -> str:
    return dt.time.fromisoformat(str(text)).strftime("%H:%M")


def _plans_to_tables(connection) -> None:
    for pid, raw in connection.execute(sa.select(_programme.c.id, _programme.c.settings_json)).all():
        try:
            settings = json.loads(raw or "{}")
        except json.JSONDecodeError:
            continue
        plans = settings.get(SETTINGS_PLANS) if isinstance(settings, dict) else None
        if not isinstance(plans, dict) or not plans:
            continue
        kept = {}
        for year, meta in plans.items():
            round_id = connection.execute(sa.select(_round.c.id).where(
                _round.c.programme_id == pid, _round.c.year == int(year))).scalar()
            if round_id is None or not isinstance(meta, dict):
                kept[year] = meta
                continue
            crews = meta.get("crews") or {}
            details = {"start_points": crews.get("start_points") or {},
                       "blocked_dates": crews.get("blocked_dates") or [],
                       "unplanned": meta.get("unplanned") or []}
            connection.execute(_plan.insert().values(
                round_id=round_id, seed=int(meta.get("seed") or 0), summary=str(meta.get("summary") or ""),
                extra_team_days=int(meta.get("extra_team_days") or 0),
                randomise_site_order=bool(meta.get("randomise_site_order")),
                site_order=";".join(meta.get("site_order") or []),
                day_start=_hhmm(crews.get("day_start") or "09:00"), path_factor=float(crews.get("path_factor") or 1.0),
                routing="straight", allow_lone_working=bool(crews.get("allow_lone_working")),
                details_json=json.dumps(details, sort_keys=True), created_at=dt.datetime.now(dt.UTC)))
            plan_id = connection.execute(sa.select(_plan.c.id).where(_plan.c.round_id == round_id)).scalar()
            for team in crews.get("teams") or []:
                connection.execute(_team.insert().values(
                    plan_id=plan_id, code=team["code"], members=";".join(team.get("members") or []),
                    hours_per_day=float(team["hours_per_day"]), walking_speed_kmh=float(team["walking_speed_kmh"]),
                    working_weekdays=";".join(str(int(d)) for d in team.get("working_weekdays") or []),
                    blocked_dates=";".join(team.get("blocked_dates") or [])))
            for td in meta.get("team_days") or []:
                connection.execute(_day.insert().values(
                    plan_id=plan_id, team=td["team"], date=dt.date.fromisoformat(td["date"]), site=td["site"],
                    start_x=float(td["start"][0]), start_y=float(td["start"][1]), route_m=float(td["route_m"]),
                    start_time=_hhmm(td["start_time"]), end_time=_hhmm(td["end_time"])))
        if kept:
            settings[SETTINGS_PLANS] = kept
        else:
            settings.pop(SETTINGS_PLANS, None)
        connection.execute(_programme.update().where(_programme.c.id == pid).values(
            settings_json=json.dumps(settings, sort_keys=True)))


def _plans_to_settings(connection) -> None:
    rows = connection.execute(
        sa.select(_plan, _round.c.programme_id, _round.c.year).join(_round, _round.c.id == _plan.c.round_id)
        .order_by(_round.c.year)).mappings().all()
    by_programme: dict[int, dict[str, dict]] = {}
    for plan in rows:
        details = json.loads(plan["details_json"] or "{}")
        teams = connection.execute(sa.select(_team).where(_team.c.plan_id == plan["id"]).order_by(_team.c.id)
                                   ).mappings().all()
        members = {t["code"]: [m for m in t["members"].split(";") if m] for t in teams}
        days = connection.execute(sa.select(_day).where(_day.c.plan_id == plan["id"]).order_by(_day.c.id)
                                  ).mappings().all()
        crews = {
            "teams": [{"code": t["code"], "members": members[t["code"]], "hours_per_day": t["hours_per_day"],
                       "walking_speed_kmh": t["walking_speed_kmh"],
                       "working_weekdays": [int(d) for d in t["working_weekdays"].split(";") if d],
                       "blocked_dates": [d for d in t["blocked_dates"].split(";") if d]} for t in teams],
            "start_points": details.get("start_points") or {},
            "allow_lone_working": bool(plan["allow_lone_working"]),
            "blocked_dates": details.get("blocked_dates") or [],
            "day_start": f"{plan['day_start']}:00", "path_factor": plan["path_factor"],
        }
        team_days = [{"team": d["team"], "date": _iso(d["date"]), "site": d["site"],
                      "members": members.get(d["team"], []), "start": [d["start_x"], d["start_y"]],
                      "route_m": d["route_m"], "start_time": f"{d['start_time']}:00",
                      "end_time": f"{d['end_time']}:00"} for d in days]
        by_programme.setdefault(plan["programme_id"], {})[str(plan["year"])] = {
            "seed": plan["seed"], "summary": plan["summary"], "crews": crews, "team_days": team_days,
            "unplanned": details.get("unplanned") or [], "extra_team_days": plan["extra_team_days"],
            "site_order": [s for s in plan["site_order"].split(";") if s],
            "randomise_site_order": bool(plan["randomise_site_order"]),
        }
    for pid, plans in by_programme.items():
        raw = connection.execute(sa.select(_programme.c.settings_json).where(_programme.c.id == pid)).scalar()
        settings = json.loads(raw or "{}")
        merged = dict(settings.get(SETTINGS_PLANS) or {})
        merged.update(plans)
        settings[SETTINGS_PLANS] = merged
        connection.execute(_programme.update().where(_programme.c.id == pid).values(
            settings_json=json.dumps(settings, sort_keys=True)))


def _iso(value) -> str:
    return value.isoformat() if hasattr(value, "isoformat") else str(value)[:10]
