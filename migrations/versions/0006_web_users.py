"""People who sign in to the browser workspace (``monitor serve``) of a shared programme.

Revision ID: 0006
Revises: 0004
Create Date: 2026-12-02
"""

from __future__ import annotations

import sqlalchemy as sa
import sqlmodel
from alembic import op

revision = "0006"
down_revision = "0004"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "web_user",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("login", sqlmodel.sql.sqltypes.AutoString(length=80), nullable=False),
        sa.Column("role", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("password_hash", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("active", sa.Boolean(), nullable=False),
        sa.Column("created_at", sqlmodel.sql.sqltypes.UTCDateTime(), nullable=False),
        sa.CheckConstraint("role IN ('reader', 'recorder', 'owner')", name=op.f("ck_web_user_role_known")),
        sa.CheckConstraint("length(login) > 0", name=op.f("ck_web_user_login_given")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_web_user")),
        sa.UniqueConstraint("login", name=op.f("uq_web_user_login")),
    )


def downgrade() -> None:
    op.drop_table("web_user")
