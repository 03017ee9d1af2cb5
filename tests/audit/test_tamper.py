"""Every way of altering the stored log with raw SQL is caught and the right entry is named.

The log: entries 1..10, one second apart, with signed checkpoints after entry 4 (id 1) and after
entry 8 (id 2), built once per backend and restored row for row before each case. Each case
changes the tables directly, as someone with database access could,
then runs :func:`verify_log` and ``confirm-service audit verify``. Forged leaf hashes are computed
here, plainly from RFC 6962 section 2.1 (SHA-256(0x00 || entry)) and RFC 8785 (sorted members,
no whitespace; the keys are ASCII), not with the project's code. Signatures by a stranger's key
use the ``cryptography`` library's Ed25519 (RFC 8032) directly.
"""

from __future__ import annotations

import base64
import hashlib
import json
import shutil
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest
from click.testing import CliRunner
from cryptography.hazmat.primitives import serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from sqlalchemy import text
from sqlalchemy.engine import make_url

from confirm_service.actor import SYSTEM, Actor
from confirm_service.audit import checkpoints, log
from confirm_service.audit.verify import verify_log
from confirm_service.cli import main
from confirm_service.cli.context import settings as cli_settings
from confirm_service.config import load_settings
from confirm_service.db import Database
from confirm_service.models import AuditCheckpoint, AuditEntry, AuditHead

T0 = datetime(2031, 4, 5, 6, 0, tzinfo=UTC)  # invented moment
ANALYST = Actor(name="analyst-q", role="coordinator")  # invented person
ENTRIES = 10
FIRST_CHECKPOINT_SIZE, SECOND_CHECKPOINT_SIZE = 4, 8


def plain_leaf_hex(seq: int, at: datetime, actor, role, action, subject, payload) -> str:
    record = {
        "seq": seq,
        "at": at.isoformat(),
        "actor": actor,
        "role": role,
        "action": action,
        "subject": subject,
        "payload": payload,
    }
    data = json.dumps(record, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()
    return hashlib.sha256(b"\x00" + data).hexdigest()


def plain_mth(leaves: list[bytes]) -> bytes:
    """RFC 6962 section 2.1 Merkle Tree Hash over leaf hashes, by its recursion."""
    if len(leaves) == 1:
        return leaves[0]
    k = 1
    while k * 2 < len(leaves):
        k *= 2
    return hashlib.sha256(b"\x01" + plain_mth(leaves[:k]) + plain_mth(leaves[k:])).digest()


def plain_signed_text(origin: str, size: int, root_hex: str, timestamp: str) -> bytes:
    root_b64 = base64.b64encode(bytes.fromhex(root_hex)).decode()
    return f"{origin}\n{size}\n{root_b64}\n{timestamp}\n".encode()


@dataclass(frozen=True)
class Log:
    db: object
    settings: object

    def sql(self, statement: str, **values: object) -> None:
        with self.db.engine.begin() as connection:
            connection.execute(text(statement), values)

    def entry(self, seq: int) -> AuditEntry:
        with self.db.read() as session:
            return session.get(AuditEntry, seq)

    def checkpoint(self, checkpoint_id: int) -> AuditCheckpoint:
        with self.db.read() as session:
            return session.get(AuditCheckpoint, checkpoint_id)

    def rehash(self, seq: int) -> None:
        """Recompute a stored leaf hash from the row's columns, as a careful forger would."""
        e = self.entry(seq)
        forged = plain_leaf_hex(e.seq, e.at, e.actor, e.role, e.action, e.subject, e.payload)
        self.sql("UPDATE audit_entries SET leaf_hash = :h WHERE seq = :s", h=forged, s=seq)

    def insert(self, seq: int, at: datetime) -> None:
        """A self-consistent forged entry at ``seq``."""
        columns = dict(actor="analyst-q", role="coordinator", action="site.updated")
        columns |= dict(subject="site:forged", payload='{"note":"never happened"}')
        self.sql(
            "INSERT INTO audit_entries (seq, at, actor, role, action, subject, payload, leaf_hash)"
            " VALUES (:seq, :at, :actor, :role, :action, :subject, :payload, :leaf_hash)",
            seq=seq,
            at=at if not self.db.is_sqlite else at.replace(tzinfo=None),
            leaf_hash=plain_leaf_hex(seq, at, **columns),
            **columns,
        )

    def shift_seq(self, from_seq: int, by: int) -> None:
        """Renumber entries ``seq >= from_seq`` by ``by``; in two steps so no key collides."""
        self.sql("UPDATE audit_entries SET seq = -(seq + :by) WHERE seq >= :f", by=by, f=from_seq)
        self.sql("UPDATE audit_entries SET seq = -seq WHERE seq < 0")

    def swap(self, a: int, b: int) -> None:
        self.sql("UPDATE audit_entries SET seq = -1 WHERE seq = :a", a=a)
        self.sql("UPDATE audit_entries SET seq = :a WHERE seq = :b", a=a, b=b)
        self.sql("UPDATE audit_entries SET seq = :b WHERE seq = -1", b=b)

    def resign(self, checkpoint_id: int, key: Ed25519PrivateKey, key_id: str) -> None:
        c = self.checkpoint(checkpoint_id)
        signed = plain_signed_text(
            c.origin, c.tree_size, c.root_hash, c.at.isoformat(timespec="microseconds")
        )
        signature = base64.b64encode(key.sign(signed)).decode()
        self.sql(
            "UPDATE audit_checkpoints SET signature = :s, key_id = :k WHERE id = :i",
            s=signature,
            k=key_id,
            i=checkpoint_id,
        )


def stranger_key_id(key: Ed25519PrivateKey) -> str:
    raw = key.public_key().public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    return hashlib.sha256(raw).hexdigest()[:16]


# --- the mutations ------------------------------------------------------------------------------


def payload_changed(t: Log) -> None:
    t.sql("UPDATE audit_entries SET payload = :p WHERE seq = 6", p='{"elevation_m":9999}')


def payload_and_leaf_hash_rewritten(t: Log) -> None:
    payload_changed(t)
    t.rehash(6)


def early_entry_rewritten(t: Log) -> None:
    t.sql("UPDATE audit_entries SET actor = 'someone-else' WHERE seq = 2")
    t.rehash(2)


def entry_deleted(t: Log) -> None:
    t.sql("DELETE FROM audit_entries WHERE seq = 6")


def entry_deleted_and_renumbered(t: Log) -> None:
    entry_deleted(t)
    t.shift_seq(7, -1)
    t.sql("UPDATE audit_head SET size = size - 1")


def last_entry_deleted(t: Log) -> None:
    t.sql("DELETE FROM audit_entries WHERE seq = 10")


def entry_inserted_at_the_end(t: Log) -> None:
    t.insert(11, t.entry(10).at + timedelta(seconds=1))


def entry_inserted_and_renumbered(t: Log) -> None:
    t.shift_seq(6, +1)
    t.insert(6, t.entry(5).at)
    t.sql("UPDATE audit_head SET size = size + 1")


def entries_swapped(t: Log) -> None:
    t.swap(3, 7)


def entries_reordered_with_hashes_recomputed(t: Log) -> None:
    t.swap(9, 10)
    t.rehash(9)
    t.rehash(10)


def head_size_increased(t: Log) -> None:
    t.sql("UPDATE audit_head SET size = size + 1")


def head_size_decreased(t: Log) -> None:
    t.sql("UPDATE audit_head SET size = size - 1")


def checkpoint_root_changed(t: Log) -> None:
    t.sql(
        "UPDATE audit_checkpoints SET root_hash = :r WHERE id = 2",
        r=hashlib.sha256(b"another root").hexdigest(),
    )


def checkpoint_signature_changed(t: Log) -> None:
    other = t.checkpoint(1).signature  # a genuine signature, of the other checkpoint's text
    t.sql("UPDATE audit_checkpoints SET signature = :s WHERE id = 2", s=other)


def first_checkpoint_signature_bit_flipped(t: Log) -> None:
    raw = bytearray(base64.b64decode(t.checkpoint(1).signature))
    raw[10] ^= 0x01
    t.sql(
        "UPDATE audit_checkpoints SET signature = :s WHERE id = 1",
        s=base64.b64encode(bytes(raw)).decode(),
    )


def checkpoint_signed_by_another_key(t: Log) -> None:
    key = Ed25519PrivateKey.generate()
    t.resign(2, key, stranger_key_id(key))


def checkpoint_signed_by_another_key_under_our_key_id(t: Log) -> None:
    key = Ed25519PrivateKey.generate()
    t.resign(2, key, t.checkpoint(2).key_id)


def rewrite_covered_by_a_stranger_signature(t: Log) -> None:
    """Entry 6 rewritten, then checkpoint 2 recomputed and re-signed with the forger's key."""
    payload_and_leaf_hash_rewritten(t)
    with t.db.engine.connect() as connection:
        leaves = connection.execute(
            text("SELECT leaf_hash FROM audit_entries WHERE seq <= 8 ORDER BY seq")
        ).scalars()
        root = plain_mth([bytes.fromhex(h) for h in leaves]).hex()
    t.sql("UPDATE audit_checkpoints SET root_hash = :r WHERE id = 2", r=root)
    key = Ed25519PrivateKey.generate()
    t.resign(2, key, stranger_key_id(key))


def checkpoint_size_changed(t: Log) -> None:
    t.sql("UPDATE audit_checkpoints SET tree_size = 7 WHERE id = 2")


@dataclass(frozen=True)
class Case:
    mutate: Callable[[Log], None]
    first_bad_seq: int | None  # the first entry that cannot be trusted
    checkpoint_id: int | None  # the checkpoint that reveals it, when one does
    says: str  # a phrase the explanation must contain


CASES = [
    Case(payload_changed, 6, None, "does not match its columns"),
    # Only checkpoint 2 (size 8) sees it; the previous good checkpoint has size 4, so entry 5.
    Case(payload_and_leaf_hash_rewritten, 5, 2, "rewritten consistently"),
    Case(early_entry_rewritten, 1, 1, "rewritten consistently"),
    Case(entry_deleted, 6, None, "entry 6 is missing"),
    Case(entry_deleted_and_renumbered, 6, None, "renumbered"),
    Case(last_entry_deleted, 10, None, "audit_head counts 10"),
    Case(entry_inserted_at_the_end, 11, None, "not counted"),
    Case(entry_inserted_and_renumbered, 6, None, "entry 6 was inserted"),
    Case(entries_swapped, 3, None, "does not match its columns"),
    Case(entries_reordered_with_hashes_recomputed, 9, None, "out of time order"),
    Case(head_size_increased, 11, None, "entry 11 is missing"),
    Case(head_size_decreased, 10, None, "not counted"),
    # The signature still matches the recomputed root: the entries are as signed.
    Case(checkpoint_root_changed, None, 2, "stored root hash was altered"),
    Case(checkpoint_signature_changed, 5, 2, "signature does not verify"),
    Case(first_checkpoint_signature_bit_flipped, 1, 1, "signature does not verify"),
    Case(checkpoint_signed_by_another_key, 5, 2, "another key"),
    Case(checkpoint_signed_by_another_key_under_our_key_id, 5, 2, "signature does not verify"),
    Case(rewrite_covered_by_a_stranger_signature, 5, 2, "another key"),
    Case(checkpoint_size_changed, 5, 2, "signature does not verify"),
]


AUDIT_TABLES = (AuditHead.__table__, AuditEntry.__table__, AuditCheckpoint.__table__)


def build_log(db, settings) -> None:
    """Entries 1..10 one second apart, signed checkpoints after entries 4 and 8."""
    moments = (T0 + timedelta(seconds=s, microseconds=250) for s in range(ENTRIES))
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(log, "utc_now", lambda: next(moments))
        for i in range(ENTRIES):
            with db.write() as session:
                actor = ANALYST if i % 3 else SYSTEM
                payload = {"elevation_m": 100.0 + i}
                log.record(session, actor, "site.created", f"site:S{i}", payload)
            if i + 1 in (FIRST_CHECKPOINT_SIZE, SECOND_CHECKPOINT_SIZE):
                with db.write() as session:
                    checkpoints.take_checkpoint(session, settings, "test")


@pytest.fixture(scope="module")
def pristine(backend, tmp_path_factory) -> Iterator[tuple[Log, dict]]:
    """The log built once per backend; each test gets the audit tables restored from it.

    SQLite: a private copy of the migrated template. PostgreSQL: the worker's database, whose
    audit tables are emptied first (other tables are not read here).
    """
    folder = tmp_path_factory.mktemp("tamper")
    url = backend
    if backend.startswith("sqlite"):
        url = f"sqlite:///{folder / 'tamper.db'}"
        shutil.copyfile(make_url(backend).database, folder / "tamper.db")
    settings = load_settings({"database_url": url, "instance_path": folder / "instance"})
    db = Database(url)
    with db.engine.begin() as connection:
        for table in reversed(AUDIT_TABLES):
            connection.execute(table.delete())
        connection.execute(AuditHead.__table__.insert(), [{"id": 1, "size": 0}])
    with db.read() as session:
        checkpoints.set_up_signing_key(session, settings)
    build_log(db, settings)
    with db.engine.connect() as connection:
        snapshot = {
            t: [dict(r._mapping) for r in connection.execute(t.select())] for t in AUDIT_TABLES
        }
    yield Log(db, settings), snapshot
    db.dispose()


@pytest.fixture
def built(pristine) -> Log:
    """The pristine log, restored row for row before each test."""
    t, snapshot = pristine
    with t.db.engine.begin() as connection:
        for table in reversed(AUDIT_TABLES):
            connection.execute(table.delete())
        for table in AUDIT_TABLES:
            connection.execute(table.insert(), snapshot[table])
    return t


def report_of(t: Log):
    with t.db.read() as session:
        return verify_log(session, checkpoints.service_public_key(t.settings)[0], batch_size=3)


def cli_verify(t: Log, *extra: str, key_file: Path | None = None):
    cli_settings.cache_clear()
    env = {
        "CONFIRM_DATABASE_URL": t.db.url,
        "CONFIRM_INSTANCE_PATH": str(t.settings.instance_path),
        "CONFIRM_SIGNING_KEY_FILE": str(key_file or t.settings.resolved_signing_key_file()),
    }
    try:
        return CliRunner().invoke(main, ["audit", "verify", *extra], env=env)
    finally:
        cli_settings.cache_clear()


def test_intact_log_verifies(built):
    report = report_of(built)
    assert report.ok, report.problem
    assert (report.entries_checked, report.checkpoints_checked) == (ENTRIES, 2)
    assert report.covered_size == SECOND_CHECKPOINT_SIZE
    result = cli_verify(built)
    assert result.exit_code == 0, result.output
    assert "audit log intact: 10 entries and 2 checkpoints" in result.stdout
    assert "entries 9..10 are not yet covered" in result.stdout


@pytest.mark.parametrize("case", CASES, ids=[c.mutate.__name__ for c in CASES])
def test_tampering_is_caught_and_named(built, case):
    assert report_of(built).ok  # a mutation-free baseline, so the case below is the cause
    case.mutate(built)
    report = report_of(built)
    assert not report.ok
    assert report.first_bad_seq == case.first_bad_seq, report.problem
    assert report.bad_checkpoint_id == case.checkpoint_id, report.problem
    assert case.says in report.problem
    result = cli_verify(built)
    assert result.exit_code == 1, result.output
    named = (
        f"first bad entry {case.first_bad_seq}:"
        if case.first_bad_seq is not None
        else f"checkpoint {case.checkpoint_id} damaged"
    )
    for stream in (result.stdout, result.stderr):
        assert named in stream and case.says in stream
    if case.checkpoint_id is not None:
        assert f"checkpoint {case.checkpoint_id} " in result.stdout


def test_a_rewrite_after_the_last_checkpoint_is_invisible_until_the_next_one(built):
    """The limit of local checking: consistent rewrites beyond the last signature pass."""
    built.sql("UPDATE audit_entries SET payload = '{}' WHERE seq = 9")
    built.rehash(9)
    report = report_of(built)
    assert report.ok and report.covered_size == SECOND_CHECKPOINT_SIZE < ENTRIES


def test_verify_with_another_published_key_fails_at_the_first_checkpoint(built, tmp_path):
    from confirm_service.audit.signing import public_key_pem

    stranger = tmp_path / "stranger.pem"
    stranger.write_text(public_key_pem(Ed25519PrivateKey.generate()))
    result = cli_verify(built, "--public-key", str(stranger))
    assert result.exit_code == 1
    assert "first bad entry 1:" in result.stderr and "another key" in result.stderr


def test_verify_needs_a_key(built, tmp_path):
    result = cli_verify(built, key_file=tmp_path / "no-such-key.pem")
    assert result.exit_code == 2
    assert "--public-key" in result.stderr and "Traceback" not in result.output
    not_a_key = tmp_path / "junk.pem"
    not_a_key.write_text("not a key")
    result = cli_verify(built, "--public-key", str(not_a_key))
    assert result.exit_code == 2 and "not an Ed25519 public key" in result.stderr
