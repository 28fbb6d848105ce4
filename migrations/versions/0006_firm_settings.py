"""Add the firm_settings table: the firm's defaults for new projects and their title block (one row).

No row is written here: until an admin saves the settings, new projects start from the
project file's own defaults, exactly as before.

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-02 03:50:00.000000
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0006"
down_revision: str | None = "0005"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "firm_settings",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("firm", sa.String(length=200), nullable=False),
        sa.Column("code", sa.String(length=20), nullable=False),
        sa.Column("occupancy", sa.String(length=20), nullable=False),
        sa.Column("include_future", sa.Boolean(), nullable=False),
        sa.Column("vd_feeder_pct", sa.Float(), nullable=False),
        sa.Column("vd_total_pct", sa.Float(), nullable=False),
        sa.Column("imbalance_limit_pct", sa.Float(), nullable=False),
        sa.Column("growth_margin_pct", sa.Float(), nullable=False),
        sa.Column("paper", sa.String(length=30), nullable=False),
        sa.Column("updated_at", sa.DateTime(timezone=True), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_firm_settings")),
    )


def downgrade() -> None:
    op.drop_table("firm_settings")
