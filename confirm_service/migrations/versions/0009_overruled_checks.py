"""candidates: check kinds whose rejection a person overruled

Revision ID: 0009
Revises: 0008
Create Date: 2026-12-02 13:50:00.000000
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0009"
down_revision = "0008"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("candidates", schema=None) as batch_op:
        batch_op.add_column(sa.Column("overruled_checks", sa.JSON(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("candidates", schema=None) as batch_op:
        batch_op.drop_column("overruled_checks")
