"""Season plans (a station's team, day, route order and outcome) and quality flags.

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-02
"""

from __future__ import annotations

import sqlalchemy as sa
import sqlmodel
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "quality_flag",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("kind", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("station_id", sa.Integer(), nullable=True),
        sa.Column("species_id", sa.Integer(), nullable=True),
        sa.Column("year", sa.Integer(), nullable=True),
        sa.Column("detail", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("severity", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("state", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("note", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("raised_at", sqlmodel.sql.sqltypes.UTCDateTime(), nullable=False),
        sa.CheckConstraint(
            "state IN ('open', 'resolved', 'accepted')", name=op.f("ck_quality_flag_state_known")
        ),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_quality_flag_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["species_id"],
            ["species.id"],
            name=op.f("fk_quality_flag_species_id_species"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["station_id"],
            ["station.id"],
            name=op.f("fk_quality_flag_station_id_station"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_quality_flag")),
    )
    with op.batch_alter_table("quality_flag", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_quality_flag_programme_id"), ["programme_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_quality_flag_species_id"), ["species_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_quality_flag_station_id"), ["station_id"], unique=False)

    op.create_table(
        "planned_visit",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("round_id", sa.Integer(), nullable=False),
        sa.Column("station_id", sa.Integer(), nullable=False),
        sa.Column("team", sqlmodel.sql.sqltypes.AutoString(), nullable=True),
        sa.Column("day", sa.Date(), nullable=True),
        sa.Column("route_order", sa.Integer(), nullable=True),
        sa.Column("arrival", sqlmodel.sql.sqltypes.AutoString(length=5), nullable=True),
        sa.Column("reason", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("outcome", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("visit_id", sa.Integer(), nullable=True),
        sa.Column("seed", sa.Integer(), nullable=True),
        sa.CheckConstraint(
            "outcome IN ('planned', 'done', 'partial', 'missed', 'inaccessible', 'held_back')",
            name=op.f("ck_planned_visit_outcome_known"),
        ),
        sa.CheckConstraint(
            "route_order IS NULL OR route_order >= 1", name=op.f("ck_planned_visit_route_order_positive")
        ),
        sa.ForeignKeyConstraint(
            ["round_id"], ["round.id"], name=op.f("fk_planned_visit_round_id_round"), ondelete="RESTRICT"
        ),
        sa.ForeignKeyConstraint(
            ["station_id"],
            ["station.id"],
            name=op.f("fk_planned_visit_station_id_station"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["visit_id"], ["visit.id"], name=op.f("fk_planned_visit_visit_id_visit"), ondelete="RESTRICT"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_planned_visit")),
        sa.UniqueConstraint("round_id", "station_id", name="uq_planned_visit_round_station"),
    )
    with op.batch_alter_table("planned_visit", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_planned_visit_round_id"), ["round_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_planned_visit_station_id"), ["station_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_planned_visit_visit_id"), ["visit_id"], unique=False)



def downgrade() -> None:
    with op.batch_alter_table("planned_visit", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_planned_visit_visit_id"))
        batch_op.drop_index(batch_op.f("ix_planned_visit_station_id"))
        batch_op.drop_index(batch_op.f("ix_planned_visit_round_id"))

    op.drop_table("planned_visit")
    with op.batch_alter_table("quality_flag", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_quality_flag_station_id"))
        batch_op.drop_index(batch_op.f("ix_quality_flag_species_id"))
        batch_op.drop_index(batch_op.f("ix_quality_flag_programme_id"))

    op.drop_table("quality_flag")
