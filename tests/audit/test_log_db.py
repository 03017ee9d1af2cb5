"""The stored audit log on each backend: leaf hashes, tree roots and signed checkpoints.

References: RFC 6962 section 2.1 (leaf hash SHA-256(0x00 || entry), node hash
SHA-256(0x01 || left || right), empty root SHA-256 of the empty string, split at the largest power
of two below n); RFC 8785 section 3.2.3 (members sorted by name; for ASCII names that is plain
string order); RFC 8032 Ed25519, checked through the ``cryptography`` library rather than the
project's own verifier. The ``plain_*`` functions are a second computation written from those
texts, sharing no code with ``confirm_service.audit``.
"""

from __future__ import annotations

import base64
import hashlib
import json
import stat
from datetime import UTC, datetime, timedelta

import pytest
from cryptography.hazmat.primitives import serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey
from sqlalchemy import text

from confirm_service.actor import SYSTEM, Actor
from confirm_service.audit import checkpoints, log, store
from confirm_service.audit.verify import verify_log
from confirm_service.errors import Invalid

# SHA-256 of the empty string, the RFC 6962 empty-tree root (FIPS 180-4 test value, from memory).
EMPTY_SHA256_HEX = "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"
T0 = datetime(2031, 4, 5, 6, 0, tzinfo=UTC)  # invented moment
ANALYST = Actor(name="analyst-q", role="coordinator")  # invented person


# --- second computation, written plainly from RFC 6962 section 2.1 and RFC 8785 ---------------


def plain_leaf_input(seq, at, actor, role, action, subject, payload) -> bytes:
    """Keys are ASCII, so RFC 8785 ordering is sort_keys; no whitespace; UTF-8."""
    record = {
        "seq": seq,
        "at": at.isoformat(),
        "actor": actor,
        "role": role,
        "action": action,
        "subject": subject,
        "payload": payload,
    }
    return json.dumps(record, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()


def plain_leaf(data: bytes) -> bytes:
    return hashlib.sha256(b"\x00" + data).digest()


def plain_mth(leaves: list[bytes]) -> bytes:
    """MTH over already hashed leaves by the RFC 6962 recursion."""
    if not leaves:
        return hashlib.sha256(b"").digest()
    if len(leaves) == 1:
        return leaves[0]
    k = 1
    while k * 2 < len(leaves):
        k *= 2
    return hashlib.sha256(b"\x01" + plain_mth(leaves[:k]) + plain_mth(leaves[k:])).digest()


def stored_rows(db) -> list[tuple]:
    with db.read() as session:
        entries = list(store.iter_entries(session))
    return [tuple(e) for e in entries]


def stored_leaf_bytes(db) -> list[bytes]:
    with db.engine.connect() as connection:
        rows = connection.execute(text("SELECT leaf_hash FROM audit_entries ORDER BY seq")).all()
    return [bytes.fromhex(r[0]) for r in rows]


def append(db, count: int, start: int = 0) -> None:
    for i in range(start, start + count):
        with db.write() as session:
            payload = {"site": f"site-{i}", "elevation_m": 100.0 + i, "note": "ünïcode ok"}
            log.record(session, ANALYST if i % 2 else SYSTEM, "site.created", f"site:{i}", payload)


def checkpoint(db, settings, reason: str = "test"):
    with db.write() as session:
        return checkpoints.checkpoint_document(
            checkpoints.take_checkpoint(session, settings, reason)
        )


@pytest.fixture
def settings(app):
    return app.extensions["confirm.settings"]


@pytest.fixture
def clock(monkeypatch):
    """Entries one second apart from T0, so their times are strictly increasing."""
    moments = (T0 + timedelta(seconds=s, microseconds=7) for s in range(10_000))
    monkeypatch.setattr(log, "utc_now", lambda: next(moments))


def public_key(settings) -> Ed25519PublicKey:
    pem, _ = checkpoints.service_public_key(settings)
    key = serialization.load_pem_public_key(pem.encode())
    assert isinstance(key, Ed25519PublicKey)
    return key


def plain_signed_text(document: dict) -> bytes:
    """The four lines of the checkpoint format, built from the documented fields."""
    root_b64 = base64.b64encode(bytes.fromhex(document["root_hash_hex"])).decode()
    return (
        f"{document['origin']}\n{document['tree_size']}\n{root_b64}\n{document['timestamp']}\n"
    ).encode()


# --- tests ---------------------------------------------------------------------------------------


def test_empty_log_checkpoint_has_the_rfc6962_empty_root(db, settings):
    document = checkpoint(db, settings)
    # RFC 6962 section 2.1: MTH({}) = SHA-256() of the empty string.
    assert document["tree_size"] == 0
    assert document["root_hash_hex"] == EMPTY_SHA256_HEX
    assert document["root_hash_hex"] == hashlib.sha256(b"").hexdigest()
    with db.read() as session:
        report = verify_log(session, checkpoints.service_public_key(settings)[0])
    assert report.ok and report.entries_checked == 0 and report.checkpoints_checked == 1


def test_stored_leaf_hashes_are_rfc6962_leaves_of_the_canonical_columns(db, clock):
    append(db, 7)
    rows = stored_rows(db)
    assert [r[0] for r in rows] == list(range(1, 8))  # seq starts at 1, contiguous
    for seq, at, actor, role, action, subject, payload, leaf_hex in rows:
        assert at.tzinfo is not None and at.utcoffset() == timedelta(0)
        # RFC 6962 section 2.1 leaf hash over the RFC 8785 form of the columns.
        expected = plain_leaf(plain_leaf_input(seq, at, actor, role, action, subject, payload))
        assert leaf_hex == expected.hex(), seq
        # The payload column is itself canonical JSON text (RFC 8785: sorted, no spaces).
        decoded = json.loads(payload)
        assert payload == json.dumps(
            decoded, sort_keys=True, separators=(",", ":"), ensure_ascii=False
        )


def test_streaming_crosses_batch_boundaries_in_seq_order(db, clock):
    append(db, 11)
    with db.read() as session:
        seqs = [e.seq for e in store.iter_entries(session, batch_size=3)]
        pairs = list(store.iter_leaf_hashes(session, batch_size=2))
        window = [e.seq for e in store.iter_entries(session, after_seq=4, up_to_seq=9)]
        hashes = store.load_leaf_hashes(session, 11)
        prefix = store.load_leaf_hashes(session, 5)
    assert seqs == list(range(1, 12))
    assert [seq for seq, _ in pairs] == list(range(1, 12))
    assert window == [5, 6, 7, 8, 9]
    assert hashes == stored_leaf_bytes(db)
    assert prefix == hashes[:5]


def test_checkpoint_roots_match_a_plain_recursive_tree_for_every_size(db, settings, clock):
    key = public_key(settings)
    for size in range(1, 18):  # covers perfect (1, 2, 4, 8, 16) and ragged trees
        append(db, 1, start=size)
        document = checkpoint(db, settings)
        leaves = stored_leaf_bytes(db)
        assert document["tree_size"] == size == len(leaves)
        # RFC 6962 section 2.1 recursion over the stored leaf hashes.
        assert document["root_hash_hex"] == plain_mth(leaves).hex(), size
        # The signed text is exactly the documented four lines, and Ed25519 (RFC 8032) accepts
        # the signature over it; key.verify raises InvalidSignature otherwise.
        assert document["signed_text"].encode() == plain_signed_text(document)
        key.verify(base64.b64decode(document["signature_b64"]), plain_signed_text(document))


def test_checkpoint_fields_and_key_file(db, settings, clock):
    append(db, 3)
    document = checkpoint(db, settings, reason="hourly")
    assert document["origin"] == settings.service_origin
    assert document["reason"] == "hourly"
    moment = datetime.fromisoformat(document["timestamp"])
    assert moment.utcoffset() == timedelta(0)
    assert document["timestamp"].endswith("+00:00")
    raw = public_key(settings).public_bytes(
        serialization.Encoding.Raw, serialization.PublicFormat.Raw
    )
    # Key id: first 16 hex digits of SHA-256 of the raw 32-byte key (the project's definition).
    assert document["key_id"] == hashlib.sha256(raw).hexdigest()[:16]
    key_file = settings.resolved_signing_key_file()
    assert stat.S_IMODE(key_file.stat().st_mode) == 0o600  # common practice, no source


def test_latest_and_size_lookups(db, settings, clock):
    append(db, 2)
    first = checkpoint(db, settings)
    again = checkpoint(db, settings)
    append(db, 3, start=2)
    last = checkpoint(db, settings)
    with db.read() as session:
        assert checkpoints.latest_checkpoint(session).id == last["id"]
        assert checkpoints.checkpoint_at_size(session, 2).id == again["id"]
        assert checkpoints.checkpoint_at_size(session, 3) is None
        listed = checkpoints.list_checkpoints(session, after_id=first["id"], limit=10)
    assert [c.id for c in listed] == [again["id"], last["id"]]
    assert first["root_hash_hex"] == again["root_hash_hex"]
    assert first["timestamp"] < again["timestamp"]


def test_checkpoint_refuses_a_log_with_a_gap(db, settings, clock):
    append(db, 5)
    with db.engine.begin() as connection:
        connection.execute(text("DELETE FROM audit_entries WHERE seq = 3"))
    with pytest.raises(store.LogDamaged, match="entry 3 is missing"), db.write() as session:
        checkpoints.take_checkpoint(session, settings, "test")


def test_checkpoint_refuses_to_sign_a_rewritten_history(db, settings, clock):
    append(db, 4)
    old = checkpoint(db, settings)
    append(db, 2, start=4)
    forged = plain_leaf(b"a different entry 2").hex()
    with db.engine.begin() as connection:
        connection.execute(
            text("UPDATE audit_entries SET leaf_hash = :h WHERE seq = 2"), {"h": forged}
        )
    with pytest.raises(store.LogDamaged, match=f"checkpoint {old['id']}"), db.write() as session:
        checkpoints.take_checkpoint(session, settings, "test")


@pytest.mark.parametrize("reason", ["", "   ", "x" * 65])
def test_checkpoint_reason_is_checked(db, settings, reason):
    with pytest.raises(Invalid), db.write() as session:
        checkpoints.take_checkpoint(session, settings, reason)


def test_intact_log_verifies_and_reports_coverage(db, settings, clock):
    append(db, 6)
    checkpoint(db, settings)
    append(db, 3, start=6)
    checkpoint(db, settings)
    append(db, 2, start=9)
    steps: list[int] = []
    with db.read() as session:
        key = checkpoints.service_public_key(settings)[0]
        report = verify_log(session, key, batch_size=4, progress=steps.append)
    assert report.ok, report.problem
    assert steps == [4, 4]  # after entries 4 and 8 of 11, for a progress bar
    assert (report.entries_checked, report.checkpoints_checked) == (11, 2)
    assert report.covered_size == 9 and report.head_size == 11
    assert report.first_bad_seq is None and report.problem is None
    assert "entries 10..11 are not yet covered" in report.summary()


def test_entries_in_the_same_transaction_share_it(db, clock):
    with pytest.raises(RuntimeError), db.write() as session:
        log.record(session, SYSTEM, "site.created", "site:x", {"a": 1})
        raise RuntimeError("roll back")
    append(db, 1)
    assert [r[0] for r in stored_rows(db)] == [1]  # the rolled-back entry left no gap
