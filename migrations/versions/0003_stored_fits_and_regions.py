"""Stored fits (each trend fitted once, reused while data, model and engine stand), the reports issued with
the fits they showed (the history of calls), and a region for each site (trends by region).

Revision ID: 0003
Revises: 0006
Create Date: 2026-12-02
"""

from __future__ import annotations

import sqlalchemy as sa
import sqlmodel
from alembic import op

revision = "0003"
down_revision = "0006"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('report_issue',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('programme_id', sa.Integer(), nullable=False),
    sa.Column('year', sa.Integer(), nullable=False),
    sa.Column('folder', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('issued_by', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('issued_at', sqlmodel.sql.sqltypes.UTCDateTime(), nullable=False),
    sa.ForeignKeyConstraint(['programme_id'], ['programme.id'], name=op.f('fk_report_issue_programme_id_programme'), ondelete='RESTRICT'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_report_issue'))
    )
    with op.batch_alter_table('report_issue', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_report_issue_programme_id'), ['programme_id'], unique=False)

    op.create_table('stored_fit',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('programme_id', sa.Integer(), nullable=False),
    sa.Column('species_id', sa.Integer(), nullable=False),
    sa.Column('measure', sqlmodel.sql.sqltypes.AutoString(length=20), nullable=False),
    sa.Column('area_kind', sqlmodel.sql.sqltypes.AutoString(length=10), nullable=False),
    sa.Column('area', sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
    sa.Column('spec_json', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('spec_hash', sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
    sa.Column('engine_version', sqlmodel.sql.sqltypes.AutoString(length=200), nullable=False),
    sa.Column('data_fingerprint', sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
    sa.Column('result_json', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('n_obs', sa.Integer(), nullable=False),
    sa.Column('first_year', sa.Integer(), nullable=False),
    sa.Column('last_year', sa.Integer(), nullable=False),
    sa.Column('call', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('annual_change', sa.Float(), nullable=True),
    sa.Column('annual_lower', sa.Float(), nullable=True),
    sa.Column('annual_upper', sa.Float(), nullable=True),
    sa.Column('fit_seconds', sa.Float(), nullable=False),
    sa.Column('fitted_by', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('fitted_at', sqlmodel.sql.sqltypes.UTCDateTime(), nullable=False),
    sa.CheckConstraint("(area_kind = 'all') = (area = '')", name=op.f('ck_stored_fit_area_named')),
    sa.CheckConstraint("area_kind IN ('all', 'site', 'stratum', 'region')", name=op.f('ck_stored_fit_area_kind_known')),
    sa.CheckConstraint('fit_seconds >= 0', name=op.f('ck_stored_fit_fit_seconds_non_negative')),
    sa.CheckConstraint('n_obs > 0', name=op.f('ck_stored_fit_n_obs_positive')),
    sa.ForeignKeyConstraint(['measure'], ['measure.code'], name=op.f('fk_stored_fit_measure_measure'), ondelete='RESTRICT'),
    sa.ForeignKeyConstraint(['programme_id'], ['programme.id'], name=op.f('fk_stored_fit_programme_id_programme'), ondelete='RESTRICT'),
    sa.ForeignKeyConstraint(['species_id'], ['species.id'], name=op.f('fk_stored_fit_species_id_species'), ondelete='RESTRICT'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_stored_fit')),
    sa.UniqueConstraint('programme_id', 'species_id', 'measure', 'area_kind', 'area', 'spec_hash', 'engine_version', 'data_fingerprint', name='uq_stored_fit_identity')
    )
    with op.batch_alter_table('stored_fit', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_stored_fit_programme_id'), ['programme_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_stored_fit_species_id'), ['species_id'], unique=False)

    op.create_table('report_fit',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('report_id', sa.Integer(), nullable=False),
    sa.Column('fit_id', sa.Integer(), nullable=False),
    sa.ForeignKeyConstraint(['fit_id'], ['stored_fit.id'], name=op.f('fk_report_fit_fit_id_stored_fit'), ondelete='RESTRICT'),
    sa.ForeignKeyConstraint(['report_id'], ['report_issue.id'], name=op.f('fk_report_fit_report_id_report_issue'), ondelete='RESTRICT'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_report_fit')),
    sa.UniqueConstraint('report_id', 'fit_id', name='uq_report_fit_report_fit')
    )
    with op.batch_alter_table('report_fit', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_report_fit_fit_id'), ['fit_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_report_fit_report_id'), ['report_id'], unique=False)

    with op.batch_alter_table('site', schema=None) as batch_op:
        batch_op.add_column(sa.Column('region', sqlmodel.sql.sqltypes.AutoString(length=40), nullable=True))



def downgrade() -> None:
    with op.batch_alter_table('site', schema=None) as batch_op:
        batch_op.drop_column('region')

    with op.batch_alter_table('report_fit', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_report_fit_report_id'))
        batch_op.drop_index(batch_op.f('ix_report_fit_fit_id'))

    op.drop_table('report_fit')
    with op.batch_alter_table('stored_fit', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_stored_fit_species_id'))
        batch_op.drop_index(batch_op.f('ix_stored_fit_programme_id'))

    op.drop_table('stored_fit')
    with op.batch_alter_table('report_issue', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_report_issue_programme_id'))

    op.drop_table('report_issue')
