"""First schema: programme, sites, strata, panels, stations, species, measures, targets,
season windows, rounds, observers, protocol versions, visits, observations, covariates,
management events, photos, change log and import batches.

Revision ID: 0001
Revises:
Create Date: 2026-12-02
"""

from __future__ import annotations

import sqlalchemy as sa
import sqlmodel
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "measure",
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=20), nullable=False),
        sa.Column("description", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("unit", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("needs_n", sa.Boolean(), nullable=False),
        sa.PrimaryKeyConstraint("code", name=op.f("pk_measure")),
    )
    op.create_table(
        "programme",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
        sa.Column("name", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("description", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("organisation", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("contact", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("crs_epsg", sa.Integer(), nullable=False),
        sa.Column("default_quadrat_width_m", sa.Float(), nullable=False),
        sa.Column("default_quadrat_length_m", sa.Float(), nullable=False),
        sa.Column("blanks_mean_zero", sa.Boolean(), nullable=False),
        sa.Column("allow_lone_working", sa.Boolean(), nullable=False),
        sa.Column("change_margin", sa.Float(), nullable=False),
        sa.Column("settings_json", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("created_at", sqlmodel.sql.sqltypes.UTCDateTime(), nullable=False),
        sa.CheckConstraint("change_margin >= 0", name=op.f("ck_programme_margin_non_negative")),
        sa.CheckConstraint("default_quadrat_length_m > 0", name=op.f("ck_programme_quadrat_length_positive")),
        sa.CheckConstraint("default_quadrat_width_m > 0", name=op.f("ck_programme_quadrat_width_positive")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_programme")),
        sa.UniqueConstraint("code", name=op.f("uq_programme_code")),
    )
    op.create_table(
        "change_log",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("table_name", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("row_id", sa.Integer(), nullable=False),
        sa.Column("field", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("old_value", sqlmodel.sql.sqltypes.AutoString(), nullable=True),
        sa.Column("new_value", sqlmodel.sql.sqltypes.AutoString(), nullable=True),
        sa.Column("reason", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("changed_by", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("changed_at", sqlmodel.sql.sqltypes.UTCDateTime(), nullable=False),
        sa.CheckConstraint("length(reason) > 0", name=op.f("ck_change_log_reason_given")),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_change_log_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_change_log")),
    )
    with op.batch_alter_table("change_log", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_change_log_programme_id"), ["programme_id"], unique=False)

    op.create_table(
        "import_batch",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("kind", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("file_name", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("content_hash", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("row_count", sa.Integer(), nullable=False),
        sa.Column("imported_by", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("imported_at", sqlmodel.sql.sqltypes.UTCDateTime(), nullable=False),
        sa.CheckConstraint("row_count >= 0", name=op.f("ck_import_batch_row_count_non_negative")),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_import_batch_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_import_batch")),
        sa.UniqueConstraint(
            "programme_id", "kind", "content_hash", name="uq_import_batch_programme_kind_hash"
        ),
    )
    with op.batch_alter_table("import_batch", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_import_batch_programme_id"), ["programme_id"], unique=False)

    op.create_table(
        "observer",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
        sa.Column("name", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("trained", sa.Date(), nullable=True),
        sa.Column("calibrated", sa.Date(), nullable=True),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_observer_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_observer")),
        sa.UniqueConstraint("programme_id", "code", name="uq_observer_programme_code"),
    )
    with op.batch_alter_table("observer", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_observer_programme_id"), ["programme_id"], unique=False)

    op.create_table(
        "panel",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
        sa.Column("rule", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("start_year", sa.Integer(), nullable=False),
        sa.Column("description", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_panel_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_panel")),
        sa.UniqueConstraint("programme_id", "code", name="uq_panel_programme_code"),
    )
    with op.batch_alter_table("panel", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_panel_programme_id"), ["programme_id"], unique=False)

    op.create_table(
        "protocol_version",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
        sa.Column("description", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("effective_from", sa.Date(), nullable=False),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_protocol_version_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_protocol_version")),
        sa.UniqueConstraint("programme_id", "code", name="uq_protocol_version_programme_code"),
    )
    with op.batch_alter_table("protocol_version", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_protocol_version_programme_id"), ["programme_id"], unique=False)

    op.create_table(
        "round",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("year", sa.Integer(), nullable=False),
        sa.Column("window_start", sa.Date(), nullable=False),
        sa.Column("window_end", sa.Date(), nullable=False),
        sa.Column("status", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("certified_by", sqlmodel.sql.sqltypes.AutoString(), nullable=True),
        sa.Column("certified_at", sqlmodel.sql.sqltypes.UTCDateTime(), nullable=True),
        sa.CheckConstraint("status IN ('planned', 'open', 'certified')", name=op.f("ck_round_status_known")),
        sa.CheckConstraint("window_start <= window_end", name=op.f("ck_round_window_order")),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_round_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_round")),
        sa.UniqueConstraint("programme_id", "year", name="uq_round_programme_year"),
    )
    with op.batch_alter_table("round", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_round_programme_id"), ["programme_id"], unique=False)

    op.create_table(
        "site",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
        sa.Column("name", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("habitat", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("area_m2", sa.Float(), nullable=False),
        sa.Column("boundary_geojson", sqlmodel.sql.sqltypes.AutoString(), nullable=True),
        sa.Column("base_x", sa.Float(), nullable=True),
        sa.Column("base_y", sa.Float(), nullable=True),
        sa.Column("access_until", sa.Date(), nullable=True),
        sa.Column("access_notes", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.CheckConstraint("area_m2 > 0", name=op.f("ck_site_area_positive")),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_site_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_site")),
        sa.UniqueConstraint("programme_id", "code", name="uq_site_programme_code"),
    )
    with op.batch_alter_table("site", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_site_programme_id"), ["programme_id"], unique=False)

    op.create_table(
        "species",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
        sa.Column("scientific_name", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("common_name", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("sensitive", sa.Boolean(), nullable=False),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_species_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_species")),
        sa.UniqueConstraint("programme_id", "code", name="uq_species_programme_code"),
    )
    with op.batch_alter_table("species", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_species_programme_id"), ["programme_id"], unique=False)

    op.create_table(
        "season_window",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("species_id", sa.Integer(), nullable=True),
        sa.Column("year", sa.Integer(), nullable=True),
        sa.Column("start_md", sqlmodel.sql.sqltypes.AutoString(length=5), nullable=False),
        sa.Column("end_md", sqlmodel.sql.sqltypes.AutoString(length=5), nullable=False),
        sa.CheckConstraint(
            "length(start_md) = 5 AND length(end_md) = 5", name=op.f("ck_season_window_month_day_form")
        ),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_season_window_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["species_id"],
            ["species.id"],
            name=op.f("fk_season_window_species_id_species"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_season_window")),
    )
    with op.batch_alter_table("season_window", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_season_window_programme_id"), ["programme_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_season_window_species_id"), ["species_id"], unique=False)

    op.create_table(
        "stratum",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
        sa.Column("area_m2", sa.Float(), nullable=False),
        sa.Column("boundary_geojson", sqlmodel.sql.sqltypes.AutoString(), nullable=True),
        sa.CheckConstraint("area_m2 > 0", name=op.f("ck_stratum_area_positive")),
        sa.ForeignKeyConstraint(
            ["site_id"], ["site.id"], name=op.f("fk_stratum_site_id_site"), ondelete="RESTRICT"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_stratum")),
        sa.UniqueConstraint("site_id", "code", name="uq_stratum_site_code"),
    )
    with op.batch_alter_table("stratum", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_stratum_site_id"), ["site_id"], unique=False)

    op.create_table(
        "target",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("species_id", sa.Integer(), nullable=False),
        sa.Column("measure", sqlmodel.sql.sqltypes.AutoString(length=20), nullable=False),
        sa.Column("n", sa.Integer(), nullable=True),
        sa.CheckConstraint(
            "(measure IN ('frequency', 'pin_hits') AND n IS NOT NULL AND n > 0) OR (measure NOT IN ('frequency', 'pin_hits') AND n IS NULL)",
            name=op.f("ck_target_n_for_k_of_n"),
        ),
        sa.ForeignKeyConstraint(
            ["measure"], ["measure.code"], name=op.f("fk_target_measure_measure"), ondelete="RESTRICT"
        ),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_target_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["species_id"], ["species.id"], name=op.f("fk_target_species_id_species"), ondelete="RESTRICT"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_target")),
        sa.UniqueConstraint(
            "programme_id", "species_id", "measure", name="uq_target_programme_species_measure"
        ),
    )
    with op.batch_alter_table("target", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_target_programme_id"), ["programme_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_target_species_id"), ["species_id"], unique=False)

    op.create_table(
        "station",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("stratum_id", sa.Integer(), nullable=True),
        sa.Column("panel_id", sa.Integer(), nullable=True),
        sa.Column("placement", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("placement_seed", sa.Integer(), nullable=True),
        sa.Column("x", sa.Float(), nullable=False),
        sa.Column("y", sa.Float(), nullable=False),
        sa.Column("crs_epsg", sa.Integer(), nullable=False),
        sa.Column("fix_method", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("accuracy_m", sa.Float(), nullable=True),
        sa.Column("quadrat_width_m", sa.Float(), nullable=False),
        sa.Column("quadrat_length_m", sa.Float(), nullable=False),
        sa.Column("transect", sqlmodel.sql.sqltypes.AutoString(), nullable=True),
        sa.Column("distance_m", sa.Float(), nullable=True),
        sa.Column("established", sa.Date(), nullable=True),
        sa.Column("state", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("retired", sa.Date(), nullable=True),
        sa.Column("retired_reason", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("replaced_by_id", sa.Integer(), nullable=True),
        sa.Column("marker", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("relocation_notes", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.CheckConstraint(
            "(state = 'in_service') = (retired IS NULL)", name=op.f("ck_station_retired_has_date")
        ),
        sa.CheckConstraint(
            "placement IN ('random', 'stratified', 'balanced', 'systematic', 'transect', 'targeted')",
            name=op.f("ck_station_placement_known"),
        ),
        sa.CheckConstraint("state IN ('in_service', 'retired', 'lost')", name=op.f("ck_station_state_known")),
        sa.CheckConstraint(
            "accuracy_m IS NULL OR accuracy_m >= 0", name=op.f("ck_station_accuracy_non_negative")
        ),
        sa.CheckConstraint(
            "distance_m IS NULL OR distance_m >= 0", name=op.f("ck_station_distance_non_negative")
        ),
        sa.CheckConstraint("quadrat_length_m > 0", name=op.f("ck_station_quadrat_length_positive")),
        sa.CheckConstraint("quadrat_width_m > 0", name=op.f("ck_station_quadrat_width_positive")),
        sa.ForeignKeyConstraint(
            ["panel_id"], ["panel.id"], name=op.f("fk_station_panel_id_panel"), ondelete="RESTRICT"
        ),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_station_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["replaced_by_id"],
            ["station.id"],
            name=op.f("fk_station_replaced_by_id_station"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["site_id"], ["site.id"], name=op.f("fk_station_site_id_site"), ondelete="RESTRICT"
        ),
        sa.ForeignKeyConstraint(
            ["stratum_id"], ["stratum.id"], name=op.f("fk_station_stratum_id_stratum"), ondelete="RESTRICT"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_station")),
        sa.UniqueConstraint("programme_id", "code", name="uq_station_programme_code"),
    )
    with op.batch_alter_table("station", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_station_panel_id"), ["panel_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_station_programme_id"), ["programme_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_station_replaced_by_id"), ["replaced_by_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_station_site_id"), ["site_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_station_stratum_id"), ["stratum_id"], unique=False)

    op.create_table(
        "management_event",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("programme_id", sa.Integer(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=True),
        sa.Column("station_id", sa.Integer(), nullable=True),
        sa.Column("kind", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("start_date", sa.Date(), nullable=False),
        sa.Column("end_date", sa.Date(), nullable=True),
        sa.Column("notes", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.CheckConstraint(
            "end_date IS NULL OR end_date >= start_date", name=op.f("ck_management_event_dates_ordered")
        ),
        sa.CheckConstraint(
            "site_id IS NOT NULL OR station_id IS NOT NULL", name=op.f("ck_management_event_has_place")
        ),
        sa.ForeignKeyConstraint(
            ["programme_id"],
            ["programme.id"],
            name=op.f("fk_management_event_programme_id_programme"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["site_id"], ["site.id"], name=op.f("fk_management_event_site_id_site"), ondelete="RESTRICT"
        ),
        sa.ForeignKeyConstraint(
            ["station_id"],
            ["station.id"],
            name=op.f("fk_management_event_station_id_station"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_management_event")),
    )
    with op.batch_alter_table("management_event", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_management_event_programme_id"), ["programme_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_management_event_site_id"), ["site_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_management_event_station_id"), ["station_id"], unique=False)

    op.create_table(
        "visit",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("station_id", sa.Integer(), nullable=False),
        sa.Column("round_id", sa.Integer(), nullable=False),
        sa.Column("date", sa.Date(), nullable=False),
        sa.Column("status", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("repeat_no", sa.Integer(), nullable=False),
        sa.Column("protocol_id", sa.Integer(), nullable=True),
        sa.Column("notes", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("import_batch_id", sa.Integer(), nullable=True),
        sa.CheckConstraint(
            "status IN ('done', 'partial', 'missed', 'inaccessible')", name=op.f("ck_visit_status_known")
        ),
        sa.CheckConstraint("repeat_no >= 0", name=op.f("ck_visit_repeat_non_negative")),
        sa.ForeignKeyConstraint(
            ["import_batch_id"],
            ["import_batch.id"],
            name=op.f("fk_visit_import_batch_id_import_batch"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["protocol_id"],
            ["protocol_version.id"],
            name=op.f("fk_visit_protocol_id_protocol_version"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["round_id"], ["round.id"], name=op.f("fk_visit_round_id_round"), ondelete="RESTRICT"
        ),
        sa.ForeignKeyConstraint(
            ["station_id"], ["station.id"], name=op.f("fk_visit_station_id_station"), ondelete="RESTRICT"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_visit")),
        sa.UniqueConstraint("station_id", "round_id", "repeat_no", name="uq_visit_station_round_repeat"),
    )
    with op.batch_alter_table("visit", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_visit_import_batch_id"), ["import_batch_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_visit_protocol_id"), ["protocol_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_visit_round_id"), ["round_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_visit_station_id"), ["station_id"], unique=False)

    op.create_table(
        "covariate",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("station_id", sa.Integer(), nullable=False),
        sa.Column("visit_id", sa.Integer(), nullable=True),
        sa.Column("name", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("unit", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("value", sa.Float(), nullable=False),
        sa.ForeignKeyConstraint(
            ["station_id"], ["station.id"], name=op.f("fk_covariate_station_id_station"), ondelete="RESTRICT"
        ),
        sa.ForeignKeyConstraint(
            ["visit_id"], ["visit.id"], name=op.f("fk_covariate_visit_id_visit"), ondelete="RESTRICT"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_covariate")),
    )
    with op.batch_alter_table("covariate", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_covariate_station_id"), ["station_id"], unique=False)
        batch_op.create_index(
            "ix_covariate_station_visit_name", ["station_id", "visit_id", "name"], unique=True
        )
        batch_op.create_index(batch_op.f("ix_covariate_visit_id"), ["visit_id"], unique=False)

    op.create_table(
        "observation",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("visit_id", sa.Integer(), nullable=False),
        sa.Column("species_id", sa.Integer(), nullable=False),
        sa.Column("measure", sqlmodel.sql.sqltypes.AutoString(length=20), nullable=False),
        sa.Column("value", sa.Float(), nullable=False),
        sa.Column("n", sa.Integer(), nullable=True),
        sa.CheckConstraint(
            "measure <> 'count' OR (value >= 0 AND value = round(value))",
            name=op.f("ck_observation_count_whole"),
        ),
        sa.CheckConstraint(
            "measure <> 'cover' OR (value >= 0 AND value <= 100)", name=op.f("ck_observation_cover_percent")
        ),
        sa.CheckConstraint(
            "measure <> 'presence' OR value IN (0, 1)", name=op.f("ck_observation_presence_binary")
        ),
        sa.CheckConstraint(
            "measure IN ('frequency', 'pin_hits') OR n IS NULL", name=op.f("ck_observation_n_only_for_k_of_n")
        ),
        sa.CheckConstraint(
            "measure NOT IN ('frequency', 'pin_hits') OR (n IS NOT NULL AND n > 0 AND value >= 0 AND value <= n AND value = round(value))",
            name=op.f("ck_observation_k_of_n"),
        ),
        sa.ForeignKeyConstraint(
            ["measure"], ["measure.code"], name=op.f("fk_observation_measure_measure"), ondelete="RESTRICT"
        ),
        sa.ForeignKeyConstraint(
            ["species_id"],
            ["species.id"],
            name=op.f("fk_observation_species_id_species"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["visit_id"], ["visit.id"], name=op.f("fk_observation_visit_id_visit"), ondelete="RESTRICT"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_observation")),
        sa.UniqueConstraint("visit_id", "species_id", "measure", name="uq_observation_visit_species_measure"),
    )
    with op.batch_alter_table("observation", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_observation_species_id"), ["species_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_observation_visit_id"), ["visit_id"], unique=False)

    op.create_table(
        "photo",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("station_id", sa.Integer(), nullable=False),
        sa.Column("visit_id", sa.Integer(), nullable=True),
        sa.Column("path", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.Column("bearing_deg", sa.Float(), nullable=True),
        sa.Column("height_m", sa.Float(), nullable=True),
        sa.Column("notes", sqlmodel.sql.sqltypes.AutoString(), nullable=False),
        sa.CheckConstraint(
            "bearing_deg IS NULL OR (bearing_deg >= 0 AND bearing_deg < 360)",
            name=op.f("ck_photo_bearing_range"),
        ),
        sa.ForeignKeyConstraint(
            ["station_id"], ["station.id"], name=op.f("fk_photo_station_id_station"), ondelete="RESTRICT"
        ),
        sa.ForeignKeyConstraint(
            ["visit_id"], ["visit.id"], name=op.f("fk_photo_visit_id_visit"), ondelete="RESTRICT"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_photo")),
    )
    with op.batch_alter_table("photo", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_photo_station_id"), ["station_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_photo_visit_id"), ["visit_id"], unique=False)

    op.create_table(
        "visit_observer",
        sa.Column("visit_id", sa.Integer(), nullable=False),
        sa.Column("observer_id", sa.Integer(), nullable=False),
        sa.ForeignKeyConstraint(
            ["observer_id"],
            ["observer.id"],
            name=op.f("fk_visit_observer_observer_id_observer"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["visit_id"], ["visit.id"], name=op.f("fk_visit_observer_visit_id_visit"), ondelete="RESTRICT"
        ),
        sa.PrimaryKeyConstraint("visit_id", "observer_id", name=op.f("pk_visit_observer")),
    )

    measure = sa.table(
        "measure",
        sa.column("code", sa.String),
        sa.column("description", sa.String),
        sa.column("unit", sa.String),
        sa.column("needs_n", sa.Boolean),
    )
    op.bulk_insert(
        measure,
        [
            {"code": "count", "description": "individuals in the quadrat", "unit": "count", "needs_n": False},
            {
                "code": "cover",
                "description": "percent of quadrat area covered",
                "unit": "%",
                "needs_n": False,
            },
            {
                "code": "frequency",
                "description": "grid cells occupied (k of n)",
                "unit": "cells",
                "needs_n": True,
            },
            {
                "code": "pin_hits",
                "description": "point-frame pins touching (k of n)",
                "unit": "pins",
                "needs_n": True,
            },
            {"code": "presence", "description": "present (1) or absent (0)", "unit": "0/1", "needs_n": False},
        ],
    )


def downgrade() -> None:
    op.drop_table("visit_observer")
    with op.batch_alter_table("photo", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_photo_visit_id"))
        batch_op.drop_index(batch_op.f("ix_photo_station_id"))

    op.drop_table("photo")
    with op.batch_alter_table("observation", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_observation_visit_id"))
        batch_op.drop_index(batch_op.f("ix_observation_species_id"))

    op.drop_table("observation")
    with op.batch_alter_table("covariate", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_covariate_visit_id"))
        batch_op.drop_index("ix_covariate_station_visit_name")
        batch_op.drop_index(batch_op.f("ix_covariate_station_id"))

    op.drop_table("covariate")
    with op.batch_alter_table("visit", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_visit_station_id"))
        batch_op.drop_index(batch_op.f("ix_visit_round_id"))
        batch_op.drop_index(batch_op.f("ix_visit_protocol_id"))
        batch_op.drop_index(batch_op.f("ix_visit_import_batch_id"))

    op.drop_table("visit")
    with op.batch_alter_table("management_event", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_management_event_station_id"))
        batch_op.drop_index(batch_op.f("ix_management_event_site_id"))
        batch_op.drop_index(batch_op.f("ix_management_event_programme_id"))

    op.drop_table("management_event")
    with op.batch_alter_table("station", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_station_stratum_id"))
        batch_op.drop_index(batch_op.f("ix_station_site_id"))
        batch_op.drop_index(batch_op.f("ix_station_replaced_by_id"))
        batch_op.drop_index(batch_op.f("ix_station_programme_id"))
        batch_op.drop_index(batch_op.f("ix_station_panel_id"))

    op.drop_table("station")
    with op.batch_alter_table("target", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_target_species_id"))
        batch_op.drop_index(batch_op.f("ix_target_programme_id"))

    op.drop_table("target")
    with op.batch_alter_table("stratum", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_stratum_site_id"))

    op.drop_table("stratum")
    with op.batch_alter_table("season_window", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_season_window_species_id"))
        batch_op.drop_index(batch_op.f("ix_season_window_programme_id"))

    op.drop_table("season_window")
    with op.batch_alter_table("species", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_species_programme_id"))

    op.drop_table("species")
    with op.batch_alter_table("site", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_site_programme_id"))

    op.drop_table("site")
    with op.batch_alter_table("round", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_round_programme_id"))

    op.drop_table("round")
    with op.batch_alter_table("protocol_version", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_protocol_version_programme_id"))

    op.drop_table("protocol_version")
    with op.batch_alter_table("panel", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_panel_programme_id"))

    op.drop_table("panel")
    with op.batch_alter_table("observer", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_observer_programme_id"))

    op.drop_table("observer")
    with op.batch_alter_table("import_batch", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_import_batch_programme_id"))

    op.drop_table("import_batch")
    with op.batch_alter_table("change_log", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_change_log_programme_id"))

    op.drop_table("change_log")
    op.drop_table("programme")
    op.drop_table("measure")
