"""Appending to the audit log inside the caller's transaction.

Entry ``seq`` starts at 1; its leaf index in the Merkle tree is ``seq - 1``. The leaf input is the
canonical JSON of the entry's columns (see :func:`entry_bytes`); ``payload`` is stored as
canonical JSON text, or as ``{"sha256": ..., ...}`` for bulk data.
"""

from __future__ import annotations

from datetime import datetime
from typing import Any, cast

from sqlalchemy import Table, insert, select, update
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.canonical import canonical_json
from confirm_service.audit.merkle import leaf_hash
from confirm_service.models import AuditEntry, AuditHead
from confirm_service.timeutil import utc_now


def entry_bytes(
    seq: int, at: datetime, actor: str, role: str, action: str, subject: str, payload: str
) -> bytes:
    """The exact bytes hashed into the tree for one entry."""
    return canonical_json(
        {
            "seq": seq,
            "at": at.isoformat(),
            "actor": actor,
            "role": role,
            "action": action,
            "subject": subject,
            "payload": payload,
        }
    )


def leaf_hash_of(entry: AuditEntry) -> bytes:
    """Recompute the RFC 6962 leaf hash of a stored entry from its columns."""
    raw = entry_bytes(
        entry.seq, entry.at, entry.actor, entry.role, entry.action, entry.subject, entry.payload
    )
    return leaf_hash(raw)


_HEAD_TABLE = cast(Table, AuditHead.__table__)
_ADVANCE_HEAD = (
    update(_HEAD_TABLE)
    .where(_HEAD_TABLE.c.id == 1)
    .values(size=_HEAD_TABLE.c.size + 1)
    .returning(_HEAD_TABLE.c.size)
)
_INSERT_ENTRY = insert(cast(Table, AuditEntry.__table__))


def _next_seq(session: Session) -> int:
    seq = session.connection().execute(_ADVANCE_HEAD).scalar_one_or_none()
    if seq is None:
        session.add(AuditHead(id=1, size=1))
        session.flush()
        seq = 1
    return int(seq)


def record(
    session: Session, actor: Actor, action: str, subject: str, payload: dict[str, Any]
) -> int:
    """Append one entry describing a change made in the same ``session`` transaction.

    Returns the entry's ``seq``. The row is written with a Core insert, not through the
    session's identity map, so that thousands of entries in one transaction stay linear.
    """
    seq = _next_seq(session)
    at = utc_now()
    payload_text = canonical_json(payload).decode("utf-8")
    raw = entry_bytes(seq, at, actor.name, actor.role, action, subject, payload_text)
    session.connection().execute(
        _INSERT_ENTRY,
        {
            "seq": seq,
            "at": at,
            "actor": actor.name,
            "role": actor.role,
            "action": action,
            "subject": subject,
            "payload": payload_text,
            "leaf_hash": leaf_hash(raw).hex(),
        },
    )
    return seq


def tree_size(session: Session) -> int:
    size = session.execute(select(AuditHead.size).where(AuditHead.id == 1)).scalar_one_or_none()
    return int(size or 0)
