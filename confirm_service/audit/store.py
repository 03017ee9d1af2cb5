"""Reading the stored audit log in ``seq`` order, in batches, for trees, proofs and checks.

Rows are read by key ranges (``seq > last``), so a log of any length streams in constant memory
and the same way on SQLite and PostgreSQL. Nothing here writes.
"""

from __future__ import annotations

from collections.abc import Iterator
from datetime import datetime
from typing import NamedTuple

from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.audit.log import entry_bytes
from confirm_service.audit.merkle import HASH_SIZE
from confirm_service.errors import Conflict
from confirm_service.models import AuditEntry, AuditHead

DEFAULT_BATCH_SIZE = 2_000
"""Rows fetched per query while streaming."""


class LogDamaged(Conflict):
    """The stored log cannot form a tree: a gap in ``seq``, a malformed leaf hash, a bad head."""

    def __init__(self, detail: str) -> None:
        super().__init__(
            f"{detail}; run `confirm-service audit verify` to find the first bad entry",
            [("audit", detail)],
        )


class StoredEntry(NamedTuple):
    """One row of ``audit_entries`` as stored (``at`` timezone-aware UTC)."""

    seq: int
    at: datetime
    actor: str
    role: str
    action: str
    subject: str
    payload: str
    leaf_hash: str

    def leaf_input(self) -> bytes:
        """The canonical bytes this entry's columns hash to (see ``audit.log.entry_bytes``)."""
        return entry_bytes(
            self.seq, self.at, self.actor, self.role, self.action, self.subject, self.payload
        )

    def as_dict(self) -> dict[str, object]:
        """JSON-ready columns; ``at`` is ISO 8601 exactly as it enters the leaf input."""
        return {
            "seq": self.seq,
            "at": self.at.isoformat(),
            "actor": self.actor,
            "role": self.role,
            "action": self.action,
            "subject": self.subject,
            "payload": self.payload,
            "leaf_hash_hex": self.leaf_hash,
        }


_ENTRY_COLUMNS = (
    AuditEntry.seq,
    AuditEntry.at,
    AuditEntry.actor,
    AuditEntry.role,
    AuditEntry.action,
    AuditEntry.subject,
    AuditEntry.payload,
    AuditEntry.leaf_hash,
)


def head_size(session: Session) -> int | None:
    """``audit_head.size``: the number of entries the log claims; None if the row is missing."""
    size = session.execute(select(AuditHead.size).where(AuditHead.id == 1)).scalar_one_or_none()
    return None if size is None else int(size)


def iter_entries(
    session: Session,
    *,
    after_seq: int | None = None,
    up_to_seq: int | None = None,
    batch_size: int = DEFAULT_BATCH_SIZE,
) -> Iterator[StoredEntry]:
    """Every stored entry with ``after_seq < seq <= up_to_seq``, in ascending ``seq``.

    Yields what is stored, gaps and all; :func:`contiguous_leaf_hashes` is the checked variant.
    """
    last = after_seq
    while True:
        statement = select(*_ENTRY_COLUMNS).order_by(AuditEntry.seq).limit(batch_size)
        if last is not None:
            statement = statement.where(AuditEntry.seq > last)
        if up_to_seq is not None:
            statement = statement.where(AuditEntry.seq <= up_to_seq)
        rows = session.execute(statement).all()
        for row in rows:
            yield StoredEntry(*row)
        if len(rows) < batch_size:
            return
        last = rows[-1][0]


def iter_leaf_hashes(
    session: Session, *, up_to_seq: int | None = None, batch_size: int = DEFAULT_BATCH_SIZE * 5
) -> Iterator[tuple[int, str]]:
    """``(seq, stored leaf hash hex)`` for every stored entry up to ``up_to_seq``, by ``seq``."""
    last: int | None = None
    while True:
        statement = (
            select(AuditEntry.seq, AuditEntry.leaf_hash).order_by(AuditEntry.seq).limit(batch_size)
        )
        if last is not None:
            statement = statement.where(AuditEntry.seq > last)
        if up_to_seq is not None:
            statement = statement.where(AuditEntry.seq <= up_to_seq)
        rows = session.execute(statement).all()
        for seq, hashed in rows:
            yield int(seq), hashed
        if len(rows) < batch_size:
            return
        last = rows[-1][0]


def contiguous_leaf_hashes(session: Session, tree_size: int) -> Iterator[bytes]:
    """The stored leaf hashes of entries 1..``tree_size`` (leaf indices 0..tree_size-1).

    Raises :class:`LogDamaged` on a gap or extra row in ``seq``, a malformed stored hash, or
    fewer than ``tree_size`` entries.
    """
    expected = 1
    for seq, hashed in iter_leaf_hashes(session, up_to_seq=tree_size):
        if seq < expected:
            raise LogDamaged(f"an audit entry has seq {seq}, outside 1..{tree_size}")
        if seq > expected:
            raise LogDamaged(f"audit entry {expected} is missing (next stored is {seq})")
        yield _hash_bytes(seq, hashed)
        expected += 1
    if expected - 1 != tree_size:
        raise LogDamaged(f"the log holds {expected - 1} entries, {tree_size} were expected")


def load_leaf_hashes(session: Session, tree_size: int) -> list[bytes]:
    """:func:`contiguous_leaf_hashes` as a list (32 bytes per entry in memory)."""
    return list(contiguous_leaf_hashes(session, tree_size))


def entry_by_seq(session: Session, seq: int) -> StoredEntry | None:
    """The stored entry ``seq``, or None."""
    row = session.execute(select(*_ENTRY_COLUMNS).where(AuditEntry.seq == seq)).first()
    return None if row is None else StoredEntry(*row)


def parse_leaf_hash(text: object) -> bytes | None:
    """32 bytes from 64 lowercase hex digits, or None when ``text`` is not that."""
    if not isinstance(text, str) or len(text) != 2 * HASH_SIZE or text != text.lower():
        return None
    try:
        return bytes.fromhex(text)
    except ValueError:
        return None


def _hash_bytes(seq: int, text: str) -> bytes:
    hashed = parse_leaf_hash(text)
    if hashed is None:
        raise LogDamaged(f"audit entry {seq} has a malformed leaf hash")
    return hashed
