"""scan sensitivity, report instant and warnings

Revision ID: 0008
Revises: 0007
Create Date: 2026-12-02 13:30:00.000000
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0008"
down_revision = "0007"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("observations", schema=None) as batch_op:
        batch_op.add_column(sa.Column("sefd_jy", sa.Double(), nullable=True))
        batch_op.add_column(sa.Column("threshold_snr", sa.Double(), nullable=True))
    with op.batch_alter_table("followup_reports", schema=None) as batch_op:
        batch_op.add_column(
            sa.Column("time_offset_s", sa.Double(), nullable=False, server_default="0")
        )
        batch_op.add_column(sa.Column("warnings", sa.JSON(), nullable=False, server_default="[]"))


def downgrade() -> None:
    with op.batch_alter_table("followup_reports", schema=None) as batch_op:
        batch_op.drop_column("warnings")
        batch_op.drop_column("time_offset_s")
    with op.batch_alter_table("observations", schema=None) as batch_op:
        batch_op.drop_column("threshold_snr")
        batch_op.drop_column("sefd_jy")
