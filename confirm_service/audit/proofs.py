"""Inclusion and consistency proofs against signed checkpoints, ready for offline checking.

Every proof is computed from the stored leaf hashes and is tied to stored checkpoints, whose
signed text and signature travel with it. A partner checks an inclusion proof by:

1. verifying ``checkpoint.signature_b64`` (Ed25519) over ``checkpoint.signed_text`` with the
   log's public key, obtained out of band and matching ``checkpoint.key_id``;
2. computing the leaf hash ``SHA-256(0x00 || UTF-8(leaf_input))`` (RFC 6962 section 2.1) itself;
3. running RFC 9162 section 2.1.3.2 with ``leaf_index``, ``tree_size`` (from the signed text)
   and ``audit_path_hex`` against the signed root.

A consistency proof is checked with RFC 9162 section 2.1.4.2 between the root the partner kept
from its own old checkpoint and the newly signed root. Proofs are served even when the stored
log was rewritten: then they simply fail to verify, which is the point.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

from sqlalchemy.orm import Session

from confirm_service.audit import store
from confirm_service.audit.checkpoints import (
    checkpoint_at_size,
    checkpoint_document,
    latest_checkpoint,
)
from confirm_service.audit.merkle import consistency_proof
from confirm_service.audit.tree_cache import builder_for_checkpoint
from confirm_service.errors import Conflict, Invalid, NotFound
from confirm_service.models import AuditCheckpoint

INCLUSION_METHOD = (
    "leaf_hash = SHA-256(0x00 || UTF-8(leaf_input)) (RFC 6962 section 2.1); check audit_path_hex "
    "from leaf_index in a tree of tree_size leaves against checkpoint.root_hash_hex with RFC 9162 "
    "section 2.1.3.2; check checkpoint.signature_b64 (Ed25519, RFC 8032) over "
    "checkpoint.signed_text with the log's public key"
)
CONSISTENCY_METHOD = (
    "check proof_hex from old_size to new_size with RFC 9162 section 2.1.4.2, using the root of "
    "the old checkpoint you kept and new_checkpoint.root_hash_hex; check both signatures "
    "(Ed25519, RFC 8032) over signed_text with the log's public key"
)


@dataclass(frozen=True)
class InclusionProof:
    """Entry ``seq`` (leaf ``seq - 1``) is in the tree of the signed ``checkpoint``."""

    seq: int
    leaf_index: int
    tree_size: int
    leaf_input: str
    leaf_hash_hex: str
    audit_path_hex: list[str]
    entry: dict[str, Any]
    checkpoint: dict[str, Any]
    method: str = INCLUSION_METHOD

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True)
class ConsistencyProof:
    """The tree of ``new_checkpoint`` extends the tree of ``old_checkpoint`` unchanged."""

    old_size: int
    new_size: int
    proof_hex: list[str]
    old_checkpoint: dict[str, Any]
    new_checkpoint: dict[str, Any]
    method: str = CONSISTENCY_METHOD

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def prove_inclusion(session: Session, seq: int, tree_size: int | None = None) -> InclusionProof:
    """Inclusion proof of entry ``seq`` against the checkpoint of ``tree_size`` (default: latest).

    Raises :class:`NotFound` for an unknown entry or a size no checkpoint has, :class:`Conflict`
    when no checkpoint covers the entry yet, :class:`~confirm_service.audit.store.LogDamaged`
    when the stored entries do not form a tree.
    """
    entry = store.entry_by_seq(session, seq) if seq >= 1 else None
    if entry is None:
        raise NotFound(f"no audit entry {seq}", [("seq", "no such entry")])
    checkpoint = _checkpoint_for(session, tree_size)
    size = int(checkpoint.tree_size)
    if seq > size:
        raise Conflict(
            f"entry {seq} is not in the tree of checkpoint {checkpoint.id} ({size} entries); "
            "ask for a newer checkpoint",
            [("tree_size", f"checkpoint covers entries 1..{size}")],
        )
    builder = builder_for_checkpoint(
        size, checkpoint.root_hash, lambda: store.load_leaf_hashes(session, size)
    )
    path = builder.path(seq - 1)
    return InclusionProof(
        seq=seq,
        leaf_index=seq - 1,
        tree_size=size,
        leaf_input=entry.leaf_input().decode("utf-8"),
        leaf_hash_hex=builder.leaves[seq - 1].hex(),
        audit_path_hex=[node.hex() for node in path],
        entry=entry.as_dict(),
        checkpoint=checkpoint_document(checkpoint),
    )


def prove_consistency(session: Session, old_size: int, new_size: int) -> ConsistencyProof:
    """Consistency proof between the checkpoints of ``old_size`` and ``new_size`` entries.

    Both sizes must be sizes of stored checkpoints (:class:`NotFound` otherwise).
    """
    if not 0 <= old_size <= new_size:
        raise Invalid(
            "sizes refused", [("old", f"must be between 0 and new ({new_size}), got {old_size}")]
        )
    old = _checkpoint_of_size(session, old_size, "old")
    new = _checkpoint_of_size(session, new_size, "new")
    hashes = store.load_leaf_hashes(session, new_size)
    proof = consistency_proof(hashes, old_size, new_size)
    return ConsistencyProof(
        old_size=old_size,
        new_size=new_size,
        proof_hex=[node.hex() for node in proof],
        old_checkpoint=checkpoint_document(old),
        new_checkpoint=checkpoint_document(new),
    )


def _checkpoint_for(session: Session, tree_size: int | None) -> AuditCheckpoint:
    if tree_size is not None:
        return _checkpoint_of_size(session, tree_size, "tree_size")
    latest = latest_checkpoint(session)
    if latest is None:
        raise Conflict(
            "no checkpoint has been taken yet", [("tree_size", "no signed checkpoint exists")]
        )
    return latest


def _checkpoint_of_size(session: Session, size: int, field: str) -> AuditCheckpoint:
    checkpoint = checkpoint_at_size(session, size)
    if checkpoint is None:
        raise NotFound(
            f"no checkpoint of size {size}", [(field, f"no signed checkpoint of {size} entries")]
        )
    return checkpoint
