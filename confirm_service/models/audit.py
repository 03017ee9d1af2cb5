"""The append-only audit log and its signed checkpoints."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import BigInteger, String, Text
from sqlalchemy.orm import Mapped, mapped_column

from confirm_service.models.base import Base


class AuditHead(Base):
    """One row: the number of entries so far. Updating it serialises appends on every backend."""

    __tablename__ = "audit_head"

    id: Mapped[int] = mapped_column(primary_key=True)
    size: Mapped[int] = mapped_column(BigInteger, default=0)


class AuditEntry(Base):
    """One change. ``leaf_hash`` is the RFC 6962 leaf hash of the entry's canonical bytes."""

    __tablename__ = "audit_entries"

    seq: Mapped[int] = mapped_column(BigInteger, primary_key=True, autoincrement=False)
    at: Mapped[datetime]
    actor: Mapped[str] = mapped_column(String(200))
    role: Mapped[str] = mapped_column(String(32))
    action: Mapped[str] = mapped_column(String(64), index=True)
    subject: Mapped[str] = mapped_column(String(200), index=True)
    payload: Mapped[str] = mapped_column(Text)
    leaf_hash: Mapped[str] = mapped_column(String(64))


class AuditCheckpoint(Base):
    """A signed statement of (tree size, root hash) at a moment."""

    __tablename__ = "audit_checkpoints"

    id: Mapped[int] = mapped_column(primary_key=True)
    tree_size: Mapped[int] = mapped_column(BigInteger, index=True)
    root_hash: Mapped[str] = mapped_column(String(64))
    at: Mapped[datetime]
    origin: Mapped[str] = mapped_column(String(200))
    key_id: Mapped[str] = mapped_column(String(64))
    signature: Mapped[str] = mapped_column(Text)
    reason: Mapped[str] = mapped_column(String(64))
