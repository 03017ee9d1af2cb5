"""final state renamed: confirmed -> passed_protocol

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-02 13:20:00.000000

A candidate that passed every stage of its protocol is not a verified signal, which is how
"confirmed" reads in this trade; the stored word says what happened. Audit entries keep the
words they were written with (the log is append-only).
"""

from __future__ import annotations

from alembic import op

revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None

# (table, column) pairs that hold a candidate state
STATE_COLUMNS = (
    ("candidates", "state"),
    ("stage_transitions", "from_state"),
    ("stage_transitions", "to_state"),
)


def _rename(old: str, new: str) -> None:
    for table, column in STATE_COLUMNS:
        op.execute(f"UPDATE {table} SET {column} = '{new}' WHERE {column} = '{old}'")


def upgrade() -> None:
    _rename("confirmed", "passed_protocol")


def downgrade() -> None:
    _rename("passed_protocol", "confirmed")
