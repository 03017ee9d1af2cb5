"""token names unique, token expiry

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-02 10:40:00.000000
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

import confirm_service.models.base

revision = "0006"
down_revision = "0005"
branch_labels = None
depends_on = None


def upgrade() -> None:
    # Names were not unique before: keep the oldest token's name, suffix the others with their id.
    op.execute(
        "UPDATE api_tokens SET name = substr(name, 1, 180) || '#' || id "
        "WHERE id NOT IN (SELECT min(id) FROM api_tokens GROUP BY name)"
    )
    with op.batch_alter_table("api_tokens", schema=None) as batch_op:
        batch_op.add_column(
            sa.Column(
                "expires_at",
                confirm_service.models.base.UTCDateTime(timezone=True),
                nullable=True,
            )
        )
        batch_op.create_unique_constraint(batch_op.f("uq_api_tokens_name"), ["name"])


def downgrade() -> None:
    with op.batch_alter_table("api_tokens", schema=None) as batch_op:
        batch_op.drop_constraint(batch_op.f("uq_api_tokens_name"), type_="unique")
        batch_op.drop_column("expires_at")
