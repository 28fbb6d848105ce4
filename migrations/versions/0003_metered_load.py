"""Add the metered_load table: existing loads from metered data (NEC 220.87) per project node.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-02 00:50:00.000000
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0003"
down_revision: str | None = "0002"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "metered_load",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("project_id", sa.Integer(), nullable=False),
        sa.Column("node_tag", sa.String(length=40), nullable=False),
        sa.Column("existing_load_kva", sa.Float(), nullable=False),
        sa.Column("basis", sa.String(length=40), nullable=False),
        sa.Column("peak_kva", sa.Float(), nullable=False),
        sa.Column("peak_at", sa.String(length=40), nullable=False),
        sa.Column("readings", sa.Integer(), nullable=False),
        sa.Column("bad_rows", sa.Integer(), nullable=False),
        sa.Column("coverage_days", sa.Float(), nullable=False),
        sa.Column("file_name", sa.String(length=255), nullable=False),
        sa.Column("uploaded_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("uploaded_by", sa.String(length=60), nullable=False),
        sa.Column("active", sa.Boolean(), nullable=False),
        sa.ForeignKeyConstraint(
            ["project_id"], ["projects.id"], name=op.f("fk_metered_load_project_id_projects"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_metered_load")),
    )
    with op.batch_alter_table("metered_load", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_metered_load_project_id"), ["project_id"], unique=False)


def downgrade() -> None:
    with op.batch_alter_table("metered_load", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_metered_load_project_id"))
    op.drop_table("metered_load")
