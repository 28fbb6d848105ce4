"""Add panels.feeder_rotation: the installer's cyclic landing of a panel's feeder (0, 1 or 2).

Existing panels get 0 (landed as labelled), so their results do not change.

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-02 03:30:00.000000
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0005"
down_revision: str | None = "0004"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    with op.batch_alter_table("panels", schema=None) as batch_op:
        batch_op.add_column(sa.Column("feeder_rotation", sa.Integer(), server_default="0", nullable=False))


def downgrade() -> None:
    with op.batch_alter_table("panels", schema=None) as batch_op:
        batch_op.drop_column("feeder_rotation")
