"""Recompute the whole audit log and its checkpoints and report the first problem met.

The walk goes through the stored entries in ``seq`` order. For each entry it checks, in turn:
its ``seq`` is the next of 1..N (a gap means a deletion, an out-of-range number an insertion);
the stored leaf hash equals the RFC 6962 leaf hash of its columns (an edit); its time is not
earlier than the previous entry's (a reordering or re-dating). After entry S it checks every
checkpoint of size S: the key id, the Ed25519 signature, and the signed root against the root
recomputed from the stored leaf hashes 1..S. At the end ``audit_head.size`` must equal N and no
checkpoint may cover more than N entries.

An edit that also rewrites the stored leaf hash consistently is invisible entry by entry; only a
checkpoint signed before the edit reveals it, and only to the granularity of checkpoints: the
report then names the checkpoint and the first entry after the previous good one. Entries after
the last good checkpoint, and entries appended or removed at the very end together with
``audit_head``, are vouched for by nothing yet; ``covered_size`` says how far the signatures reach.
Partners who keep checkpoints and ask for consistency proofs catch what this local walk cannot.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Callable
from dataclasses import dataclass, replace
from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.audit import store
from confirm_service.audit.checkpoints import as_checkpoint
from confirm_service.audit.merkle import EMPTY_ROOT, MerkleAccumulator, leaf_hash
from confirm_service.audit.signing import key_id, load_public_key_pem, verify_checkpoint
from confirm_service.models import AuditCheckpoint


@dataclass(frozen=True)
class VerificationReport:
    """Outcome of :func:`verify_log`.

    ``first_bad_seq`` is the first entry that cannot be trusted (None when only a checkpoint row
    is damaged and the entries provably match a valid signature); ``bad_checkpoint_id`` names the
    checkpoint involved, if any; ``covered_size`` is the size of the largest checkpoint found
    good (entries beyond it are not yet vouched for by a signature).
    """

    ok: bool
    entries_checked: int
    checkpoints_checked: int
    first_bad_seq: int | None = None
    problem: str | None = None
    bad_checkpoint_id: int | None = None
    covered_size: int = 0
    head_size: int | None = None
    key_id: str = ""

    def summary(self) -> str:
        """One line for an operator."""
        if self.ok and self.checkpoints_checked == 0:
            return (
                f"audit log intact: {self.entries_checked} entries verified; no checkpoint "
                "exists yet, so no signature vouches for them"
            )
        if self.ok:
            line = (
                f"audit log intact: {self.entries_checked} entries and "
                f"{self.checkpoints_checked} checkpoints verified with key {self.key_id}"
            )
            if self.covered_size < self.entries_checked:
                line += (
                    f"; entries {self.covered_size + 1}..{self.entries_checked} "
                    "are not yet covered by a signed checkpoint"
                )
            return line
        where = (
            f"first bad entry {self.first_bad_seq}"
            if self.first_bad_seq is not None
            else f"checkpoint {self.bad_checkpoint_id} damaged, entries as signed"
        )
        return f"audit log NOT intact: {where}: {self.problem}"


@dataclass(frozen=True)
class _Finding:
    seq: int | None
    message: str
    checkpoint_id: int | None = None


class _Walk:
    """State of one pass over the log."""

    def __init__(self, public_key_pem: str | None, checkpoints: list[AuditCheckpoint]) -> None:
        self.public_key_pem = public_key_pem
        self.expected_key_id = key_id(load_public_key_pem(public_key_pem)) if public_key_pem else ""
        self.pending = deque(checkpoints)  # sorted by (tree_size, id)
        self.accumulator = MerkleAccumulator()
        self.previous_at: datetime | None = None
        self.entries_checked = 0
        self.checkpoints_checked = 0
        self.good_size = 0

    def check_entry(self, entry: store.StoredEntry) -> _Finding | None:
        expected = self.accumulator.size + 1
        if entry.seq < expected:
            return _Finding(entry.seq, f"entry with seq {entry.seq} is outside 1..N (inserted)")
        if entry.seq > expected:
            return _Finding(
                expected,
                f"entry {expected} is missing: the next stored entry is {entry.seq} (deleted)",
            )
        stored = store.parse_leaf_hash(entry.leaf_hash)
        finding = _leaf_finding(entry, stored)
        if finding is not None:
            return finding
        if self.previous_at is not None and entry.at < self.previous_at:
            return _Finding(
                entry.seq - 1,
                f"entries {entry.seq - 1} and {entry.seq} are out of time order: entry "
                f"{entry.seq} at {entry.at.isoformat()} is earlier than entry {entry.seq - 1} "
                f"at {self.previous_at.isoformat()} (reordered, inserted or re-dated)",
            )
        assert stored is not None
        self.accumulator.append(stored)
        self.previous_at = entry.at
        self.entries_checked += 1
        return self.check_checkpoints_at(self.accumulator.size)

    def check_checkpoints_at(self, size: int) -> _Finding | None:
        if self.pending and self.pending[0].tree_size < size:
            row = self.pending[0]
            return _Finding(None, f"checkpoint {row.id} has tree size {row.tree_size}", row.id)
        while self.pending and self.pending[0].tree_size == size:
            row = self.pending.popleft()
            root = EMPTY_ROOT if size == 0 else self.accumulator.root()
            finding = self.check_checkpoint(row, root)
            if finding is not None:
                return finding
            self.checkpoints_checked += 1
            self.good_size = max(self.good_size, size)
        return None

    def check_checkpoint(self, row: AuditCheckpoint, root: bytes) -> _Finding | None:
        size = int(row.tree_size)
        label = f"checkpoint {row.id} (size {size})"
        unvouched = self.good_size + 1 if self.good_size < size else None
        span = _span(self.good_size + 1, size)
        not_vouched = f"; {span} not vouched for by a valid checkpoint" if unvouched else ""
        if self.public_key_pem is None:
            return _Finding(unvouched, f"{label} cannot be checked: no public key given", row.id)
        try:
            signed = as_checkpoint(row)
        except ValueError as exc:
            return _Finding(unvouched, f"{label} is malformed ({exc}){not_vouched}", row.id)
        if signed.key_id != self.expected_key_id:
            return _Finding(
                unvouched,
                f"{label} names signing key {signed.key_id}, not this log's key "
                f"{self.expected_key_id} (signed by another key){not_vouched}",
                row.id,
            )
        signature_ok = verify_checkpoint(self.public_key_pem, signed, row.signature)
        if signature_ok and signed.root_hash == root:
            return None
        if signature_ok:
            return _rewritten_finding(label, row.id, size, self.good_size, unvouched)
        as_recomputed = replace(signed, root_hash_hex=root.hex())
        if signed.root_hash != root and verify_checkpoint(
            self.public_key_pem, as_recomputed, row.signature
        ):
            return _Finding(
                None,
                f"{label}: its stored root hash was altered; the signature matches the root "
                f"recomputed from entries 1..{size}, so those entries are as signed",
                row.id,
            )
        return _Finding(
            unvouched,
            f"{label}: the signature does not verify with key {self.expected_key_id} "
            f"(signature or signed fields altered){not_vouched}",
            row.id,
        )

    def check_end(self, head: int | None) -> _Finding | None:
        stored = self.accumulator.size
        if head is None:
            return _Finding(stored + 1, "the audit_head row is missing")
        if head > stored:
            return _Finding(
                stored + 1,
                f"audit_head counts {head} entries but {stored} are stored: "
                f"{_span(stored + 1, head)} missing (deleted)",
            )
        if head < stored:
            return _Finding(
                head + 1,
                f"audit_head counts {head} entries but {stored} are stored: "
                f"{_span(head + 1, stored)} not counted (inserted, or the head was changed)",
            )
        if self.pending:
            row = self.pending[0]
            return _Finding(
                stored + 1,
                f"checkpoint {row.id} vouches for {row.tree_size} entries but only {stored} "
                f"are stored: {_span(stored + 1, row.tree_size)} removed",
                row.id,
            )
        return None


def verify_log(
    session: Session,
    public_key_pem: str | None,
    batch_size: int = store.DEFAULT_BATCH_SIZE,
    progress: Callable[[int], None] | None = None,
) -> VerificationReport:
    """Recompute every leaf hash, root and signature; report the first problem (module doc).

    ``progress(batch_size)`` is called after every ``batch_size`` entries checked.

    ``public_key_pem`` None checks the entries alone, for a log with no checkpoint yet (a
    checkpoint found then is reported as unverifiable). Raises :class:`ValueError` if
    ``public_key_pem`` is not an Ed25519 public key.
    """
    checkpoints = list(
        session.execute(
            select(AuditCheckpoint).order_by(AuditCheckpoint.tree_size, AuditCheckpoint.id)
        ).scalars()
    )
    walk = _Walk(public_key_pem, checkpoints)
    head = store.head_size(session)
    finding = walk.check_checkpoints_at(0)
    if finding is None:
        for checked, entry in enumerate(store.iter_entries(session, batch_size=batch_size), 1):
            finding = walk.check_entry(entry)
            if finding is not None:
                break
            if progress is not None and checked % batch_size == 0:
                progress(batch_size)
    if finding is None:
        finding = walk.check_end(head)
    return VerificationReport(
        ok=finding is None,
        entries_checked=walk.entries_checked,
        checkpoints_checked=walk.checkpoints_checked,
        first_bad_seq=None if finding is None else finding.seq,
        problem=None if finding is None else finding.message,
        bad_checkpoint_id=None if finding is None else finding.checkpoint_id,
        covered_size=walk.good_size,
        head_size=head,
        key_id=walk.expected_key_id,
    )


def _leaf_finding(entry: store.StoredEntry, stored: bytes | None) -> _Finding | None:
    """None when the stored leaf hash is that of the entry's columns; else what went wrong."""
    try:
        recomputed = leaf_hash(entry.leaf_input())
    except (TypeError, ValueError) as exc:
        return _Finding(entry.seq, f"entry {entry.seq} cannot be encoded canonically ({exc})")
    if stored == recomputed:
        return None
    if stored is None:
        return _Finding(entry.seq, f"entry {entry.seq}: the stored leaf hash is malformed")
    seq = entry.seq
    if stored == _leaf_at(entry, seq + 1):
        return _Finding(
            seq,
            f"entry {seq} holds the leaf hash of its columns at seq {seq + 1}: it was renumbered "
            f"down, so an entry at {seq} was deleted and the following ones moved up",
        )
    if seq > 1 and stored == _leaf_at(entry, seq - 1):
        return _Finding(
            seq - 1,
            f"entry {seq} holds the leaf hash of its columns at seq {seq - 1}: it was renumbered "
            f"up, so entry {seq - 1} was inserted",
        )
    return _Finding(
        seq,
        f"entry {seq}: the stored leaf hash does not match its columns "
        "(the entry was changed or moved after it was written)",
    )


def _leaf_at(entry: store.StoredEntry, seq: int) -> bytes:
    return leaf_hash(entry._replace(seq=seq).leaf_input())


def _rewritten_finding(
    label: str, checkpoint_id: int, size: int, good_size: int, unvouched: int | None
) -> _Finding:
    if unvouched is None:
        return _Finding(
            None,
            f"{label} is validly signed but its root differs from the root of entries 1..{size}, "
            "which an earlier checkpoint of the same size vouches for: two different trees "
            "were signed",
            checkpoint_id,
        )
    previous = (
        f"the first entry after the previous good checkpoint (size {good_size}) is {unvouched}"
        if good_size
        else "no earlier checkpoint is good, so the first entry not vouched for is 1"
    )
    return _Finding(
        unvouched,
        f"{label} is validly signed but its root does not match the root recomputed from "
        f"entries 1..{size}, although every leaf hash matches its entry: entries were rewritten "
        f"consistently (columns and leaf hashes), which only a checkpoint reveals; {previous}; "
        f"the rewrite lies in {_entries(unvouched, size)}",
        checkpoint_id,
    )


def _entries(first: int, last: int) -> str:
    """``entry 5`` or ``entries 5..8``."""
    return f"entry {first}" if first == last else f"entries {first}..{last}"


def _span(first: int, last: int) -> str:
    """``entry 5 is`` or ``entries 5..8 are``."""
    return _entries(first, last) + (" is" if first == last else " are")
