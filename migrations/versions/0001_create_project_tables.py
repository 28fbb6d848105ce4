"""Create the project tables: projects, sources, transformers, panels, circuits, revisions.

Revision ID: 0001
Revises: (none: first migration)
Create Date: 2026-12-02 00:24:58.687572
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0001"
down_revision: str | None = None
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "projects",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("number", sa.String(length=50), nullable=False),
        sa.Column("name", sa.String(length=200), nullable=False),
        sa.Column("code", sa.String(length=20), nullable=False),
        sa.Column("occupancy", sa.String(length=20), nullable=False),
        sa.Column("include_future", sa.Boolean(), nullable=False),
        sa.Column("vd_feeder_pct", sa.Float(), nullable=False),
        sa.Column("vd_total_pct", sa.Float(), nullable=False),
        sa.Column("imbalance_limit_pct", sa.Float(), nullable=False),
        sa.Column("growth_margin_pct", sa.Float(), nullable=False),
        sa.Column("area_ft2", sa.Float(), nullable=True),
        sa.Column("firm", sa.String(length=200), nullable=False),
        sa.Column("client", sa.String(length=200), nullable=False),
        sa.Column("address", sa.String(length=300), nullable=False),
        sa.Column("drawn_by", sa.String(length=20), nullable=False),
        sa.Column("checked_by", sa.String(length=20), nullable=False),
        sa.Column("paper", sa.String(length=30), nullable=False),
        sa.Column("archived", sa.Boolean(), nullable=False),
        sa.Column("data_version", sa.Integer(), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("updated_at", sa.DateTime(timezone=True), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_projects")),
    )
    with op.batch_alter_table("projects", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_projects_number"), ["number"], unique=False)

    op.create_table(
        "panels",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("project_id", sa.Integer(), nullable=False),
        sa.Column("position", sa.Integer(), nullable=False),
        sa.Column("tag", sa.String(length=40), nullable=False),
        sa.Column("system", sa.String(length=40), nullable=False),
        sa.Column("fed_from", sa.String(length=40), nullable=True),
        sa.Column("bus_amps", sa.Integer(), nullable=False),
        sa.Column("main_amps", sa.Integer(), nullable=True),
        sa.Column("spaces", sa.Integer(), nullable=False),
        sa.Column("sccr_ka", sa.Float(), nullable=True),
        sa.Column("description", sa.String(length=500), nullable=False),
        sa.Column("location", sa.String(length=500), nullable=False),
        sa.Column("mounting", sa.String(length=500), nullable=False),
        sa.Column("feeder_length_ft", sa.Float(), nullable=False),
        sa.Column("feeder_material", sa.String(length=4), nullable=False),
        sa.Column("feeder_conduit", sa.String(length=12), nullable=False),
        sa.Column("feeder_sets", sa.Integer(), nullable=True),
        sa.Column("feeder_size", sa.String(length=10), nullable=True),
        sa.Column("feeder_insulation_c", sa.Integer(), nullable=False),
        sa.Column("feeder_ambient_c", sa.Float(), nullable=False),
        sa.Column("feeder_terminal_c", sa.Integer(), nullable=False),
        sa.Column("feeder_ocpd_amps", sa.Integer(), nullable=True),
        sa.Column("feeder_egc", sa.String(length=10), nullable=True),
        sa.Column("feeder_neutral_size", sa.String(length=10), nullable=True),
        sa.ForeignKeyConstraint(
            ["project_id"], ["projects.id"], name=op.f("fk_panels_project_id_projects"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_panels")),
        sa.UniqueConstraint("project_id", "tag", name=op.f("uq_panels_project_id_tag")),
    )
    with op.batch_alter_table("panels", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_panels_project_id"), ["project_id"], unique=False)

    op.create_table(
        "revisions",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("project_id", sa.Integer(), nullable=False),
        sa.Column("number", sa.Integer(), nullable=False),
        sa.Column("issued_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("description", sa.String(length=500), nullable=False),
        sa.Column("issued_by", sa.String(length=100), nullable=False),
        sa.Column("project_json", sa.Text(), nullable=False),
        sa.Column("results_json", sa.Text(), nullable=False),
        sa.Column("content_hash", sa.String(length=64), nullable=False),
        sa.ForeignKeyConstraint(
            ["project_id"], ["projects.id"], name=op.f("fk_revisions_project_id_projects"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_revisions")),
        sa.UniqueConstraint("project_id", "number", name=op.f("uq_revisions_project_id_number")),
    )
    with op.batch_alter_table("revisions", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_revisions_project_id"), ["project_id"], unique=False)

    op.create_table(
        "sources",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("project_id", sa.Integer(), nullable=False),
        sa.Column("position", sa.Integer(), nullable=False),
        sa.Column("tag", sa.String(length=40), nullable=False),
        sa.Column("system", sa.String(length=40), nullable=False),
        sa.Column("fault_ka", sa.Float(), nullable=True),
        sa.Column("x_over_r", sa.Float(), nullable=True),
        sa.Column("description", sa.String(length=500), nullable=False),
        sa.ForeignKeyConstraint(
            ["project_id"], ["projects.id"], name=op.f("fk_sources_project_id_projects"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_sources")),
        sa.UniqueConstraint("project_id", "tag", name=op.f("uq_sources_project_id_tag")),
    )
    with op.batch_alter_table("sources", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_sources_project_id"), ["project_id"], unique=False)

    op.create_table(
        "transformers",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("project_id", sa.Integer(), nullable=False),
        sa.Column("position", sa.Integer(), nullable=False),
        sa.Column("tag", sa.String(length=40), nullable=False),
        sa.Column("kva", sa.Float(), nullable=False),
        sa.Column("primary_system", sa.String(length=40), nullable=False),
        sa.Column("secondary_system", sa.String(length=40), nullable=False),
        sa.Column("impedance_pct", sa.Float(), nullable=False),
        sa.Column("x_over_r", sa.Float(), nullable=True),
        sa.Column("fed_from", sa.String(length=40), nullable=True),
        sa.Column("loss_pct", sa.Float(), nullable=False),
        sa.Column("k_factor", sa.Integer(), nullable=True),
        sa.Column("description", sa.String(length=500), nullable=False),
        sa.Column("location", sa.String(length=500), nullable=False),
        sa.Column("feeder_length_ft", sa.Float(), nullable=False),
        sa.Column("feeder_material", sa.String(length=4), nullable=False),
        sa.Column("feeder_conduit", sa.String(length=12), nullable=False),
        sa.Column("feeder_sets", sa.Integer(), nullable=True),
        sa.Column("feeder_size", sa.String(length=10), nullable=True),
        sa.Column("feeder_insulation_c", sa.Integer(), nullable=False),
        sa.Column("feeder_ambient_c", sa.Float(), nullable=False),
        sa.Column("feeder_terminal_c", sa.Integer(), nullable=False),
        sa.Column("feeder_ocpd_amps", sa.Integer(), nullable=True),
        sa.Column("feeder_egc", sa.String(length=10), nullable=True),
        sa.Column("feeder_neutral_size", sa.String(length=10), nullable=True),
        sa.ForeignKeyConstraint(
            ["project_id"], ["projects.id"], name=op.f("fk_transformers_project_id_projects"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_transformers")),
        sa.UniqueConstraint("project_id", "tag", name=op.f("uq_transformers_project_id_tag")),
    )
    with op.batch_alter_table("transformers", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_transformers_project_id"), ["project_id"], unique=False)

    op.create_table(
        "circuits",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("panel_id", sa.Integer(), nullable=False),
        sa.Column("slot", sa.Integer(), nullable=False),
        sa.Column("poles", sa.Integer(), nullable=False),
        sa.Column("description", sa.String(length=500), nullable=False),
        sa.Column("category", sa.String(length=20), nullable=True),
        sa.Column("va", sa.Float(), nullable=True),
        sa.Column("pf", sa.Float(), nullable=True),
        sa.Column("continuous", sa.Boolean(), nullable=True),
        sa.Column("breaker_amps", sa.Integer(), nullable=True),
        sa.Column("status", sa.String(length=10), nullable=False),
        sa.Column("harmonic3_pct", sa.Float(), nullable=False),
        sa.Column("feeds", sa.String(length=40), nullable=True),
        sa.Column("locked", sa.Boolean(), nullable=False),
        sa.Column("notes", sa.Text(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.ForeignKeyConstraint(
            ["panel_id"], ["panels.id"], name=op.f("fk_circuits_panel_id_panels"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_circuits")),
        sa.UniqueConstraint("panel_id", "slot", name=op.f("uq_circuits_panel_id_slot")),
    )
    with op.batch_alter_table("circuits", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_circuits_panel_id"), ["panel_id"], unique=False)


def downgrade() -> None:
    with op.batch_alter_table("circuits", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_circuits_panel_id"))

    op.drop_table("circuits")
    with op.batch_alter_table("transformers", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_transformers_project_id"))

    op.drop_table("transformers")
    with op.batch_alter_table("sources", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_sources_project_id"))

    op.drop_table("sources")
    with op.batch_alter_table("revisions", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_revisions_project_id"))

    op.drop_table("revisions")
    with op.batch_alter_table("panels", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_panels_project_id"))

    op.drop_table("panels")
    with op.batch_alter_table("projects", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_projects_number"))

    op.drop_table("projects")
