"""A sixth measure: shoot height in cm (a length above 0, no n).

Adds the ``measure`` row and the CHECK on ``observation`` that a shoot height is above 0 and carries no n.
The downgrade refuses while any target or record uses the measure: removing it would lose recorded values.

Revision ID: 0007
Revises: 0003
Create Date: 2026-12-02
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0007"
down_revision = "0003"
branch_labels = None
depends_on = None

CODE = "shoot_height"
# written out here, not read from monitor/measures.py: a migration is the schema as it was at this revision
CHECK_NAME = "ck_observation_height_positive"
CHECK = f"measure <> '{CODE}' OR (value > 0 AND n IS NULL)"


def upgrade() -> None:
    measure = sa.table("measure", sa.column("code", sa.String), sa.column("description", sa.String),
                       sa.column("unit", sa.String), sa.column("needs_n", sa.Boolean))
    op.bulk_insert(measure, [{"code": CODE, "description": "mean shoot height in the quadrat", "unit": "cm",
                              "needs_n": False}])
    # SQLite cannot add a CHECK to a table: batch mode rebuilds it with the constraint
    with op.batch_alter_table("observation", schema=None, recreate="auto") as batch_op:
        batch_op.create_check_constraint(op.f(CHECK_NAME), sa.text(CHECK))


def downgrade() -> None:
    bind = op.get_bind()
    used = {table: bind.execute(sa.text(f"SELECT count(*) FROM {table} WHERE measure = :code"), {"code": CODE}).scalar()
            for table in ("observation", "target")}
    if any(used.values()):
        raise RuntimeError(
            f"cannot go below revision 0007: {used['observation']} record(s) and {used['target']} target(s) use "
            f"measure {CODE!r}; export and remove them first (a downgrade never drops recorded values)")
    with op.batch_alter_table("observation", schema=None, recreate="auto") as batch_op:
        batch_op.drop_constraint(op.f(CHECK_NAME), type_="check")
    op.execute(sa.text("DELETE FROM measure WHERE code = :code").bindparams(code=CODE))
