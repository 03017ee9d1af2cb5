"""The audit API and commands as a partner uses them: checkpoints, proofs, the public key.

A partner trusts only the signed checkpoint, checked here with the ``cryptography`` library's
Ed25519 (RFC 8032) over the four documented lines it rebuilds itself, and computes every leaf
hash itself (RFC 6962 section 2.1: SHA-256(0x00 || entry)). Proofs are then checked with the pure
``merkle.verify_inclusion`` / ``merkle.verify_consistency`` (RFC 9162 sections 2.1.3.2, 2.1.4.2).
"""

from __future__ import annotations

import base64
import hashlib
import json

import pytest
from click.testing import CliRunner
from cryptography.hazmat.primitives import serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey
from sqlalchemy import select, text

from confirm_service.audit import merkle
from confirm_service.cli import main
from confirm_service.cli.context import settings as cli_settings
from confirm_service.models import AuditEntry
from tests.factories import SITE_NORTH, SITE_SOUTH

AUDIT = "/api/v1/audit"
READ_ROLES = ("viewer", "pipeline", "site", "coordinator", "admin")


def invented_site(n: int) -> dict:
    return {
        "code": f"QX{n}",
        "name": f"Quarry Hollow Dish {n}",
        "latitude_deg": 12.5 + n,
        "longitude_deg": 40.25 - n,
        "elevation_m": 800.0 + 10 * n,
    }


def add_sites(client, auth, first: int, count: int) -> None:
    for n in range(first, first + count):
        response = client.post("/api/v1/sites", json=invented_site(n), headers=auth("coordinator"))
        assert response.status_code == 201, response.get_data(as_text=True)


def take(client, auth, role: str = "coordinator", **body) -> dict:
    response = client.post(f"{AUDIT}/checkpoints", json=body, headers=auth(role))
    assert response.status_code == 201, response.get_data(as_text=True)
    return response.get_json()


def entry_count(db) -> int:
    with db.read() as session:
        return len(session.execute(select(AuditEntry.seq)).all())


class Partner:
    """What a partner site holds: the public key fetched once, and the checkpoints it kept."""

    def __init__(self, client, auth) -> None:
        document = client.get(f"{AUDIT}/public-key", headers=auth("site")).get_json()
        key = serialization.load_pem_public_key(document["public_key_pem"].encode())
        assert isinstance(key, Ed25519PublicKey)
        self.key = key
        self.key_id = document["key_id"]

    def accept(self, checkpoint: dict) -> tuple[int, bytes]:
        """Verify a checkpoint's signature over the lines rebuilt here; return (size, root)."""
        root = bytes.fromhex(checkpoint["root_hash_hex"])
        signed = (
            f"{checkpoint['origin']}\n{checkpoint['tree_size']}\n"
            f"{base64.b64encode(root).decode()}\n{checkpoint['timestamp']}\n"
        ).encode()
        assert checkpoint["signed_text"].encode() == signed
        assert checkpoint["key_id"] == self.key_id
        self.key.verify(base64.b64decode(checkpoint["signature_b64"]), signed)  # raises if bad
        return checkpoint["tree_size"], root


def inclusion_holds(partner: Partner, proof: dict) -> bool:
    size, root = partner.accept(proof["checkpoint"])
    leaf = hashlib.sha256(b"\x00" + proof["leaf_input"].encode("utf-8")).digest()
    path = [bytes.fromhex(node) for node in proof["audit_path_hex"]]
    return merkle.verify_inclusion(leaf, proof["seq"] - 1, size, path, root)


@pytest.fixture
def log_with_sites(client, auth, db):
    """Token entries (from the tokens fixture) plus two invented sites."""
    for site in (SITE_NORTH, SITE_SOUTH):
        assert (
            client.post("/api/v1/sites", json=site, headers=auth("coordinator")).status_code == 201
        )
    return entry_count(db)


def test_public_key_and_its_id(client, auth, app):
    document = client.get(f"{AUDIT}/public-key", headers=auth("viewer")).get_json()
    key = serialization.load_pem_public_key(document["public_key_pem"].encode())
    raw = key.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    assert len(raw) == 32  # RFC 8032 section 5.1.5: a 32-byte public key
    assert document["key_id"] == hashlib.sha256(raw).hexdigest()[:16]
    assert document["algorithm"] == "Ed25519"
    assert document["origin"] == app.extensions["confirm.settings"].service_origin


def test_checkpoints_are_taken_by_coordinators_and_read_by_everyone(
    client, auth, db, log_with_sites
):
    for role in ("viewer", "pipeline", "site"):
        assert client.post(f"{AUDIT}/checkpoints", json={}, headers=auth(role)).status_code == 403
    assert client.get(f"{AUDIT}/checkpoints/latest", headers=auth("viewer")).status_code == 404
    first = take(client, auth, reason="before the maintenance window")
    assert (
        first["tree_size"] == log_with_sites and first["reason"] == "before the maintenance window"
    )
    bare = client.post(f"{AUDIT}/checkpoints", headers=auth("admin"))  # no body: default reason
    assert bare.status_code == 201 and bare.get_json()["reason"]
    add_sites(client, auth, 1, 2)
    last = take(client, auth)
    assert last["tree_size"] == entry_count(db) == log_with_sites + 2
    for role in READ_ROLES:
        latest = client.get(f"{AUDIT}/checkpoints/latest", headers=auth(role))
        assert latest.status_code == 200 and latest.get_json()["id"] == last["id"]
    page = client.get(f"{AUDIT}/checkpoints?limit=2", headers=auth("viewer")).get_json()
    assert [c["id"] for c in page["items"]] == [first["id"], bare.get_json()["id"]]
    rest = client.get(page["next"], headers=auth("viewer")).get_json()
    assert [c["id"] for c in rest["items"]] == [last["id"]] and rest["next"] is None
    too_long = client.post(f"{AUDIT}/checkpoints", json={"reason": "x" * 65}, headers=auth("admin"))
    assert too_long.status_code == 422


def test_inclusion_proofs_verify_against_the_signed_checkpoint(client, auth, db, log_with_sites):
    partner = Partner(client, auth)
    add_sites(client, auth, 1, 6)
    checkpoint = take(client, auth)
    size = checkpoint["tree_size"]
    assert size == entry_count(db) and size >= 11  # a ragged tree: not a power of two
    for seq in range(1, size + 1):
        proof = client.get(f"{AUDIT}/entries/{seq}", headers=auth("site")).get_json()
        assert proof["checkpoint"]["id"] == checkpoint["id"]
        assert inclusion_holds(partner, proof), seq
        # The leaf input is the entry's own columns, so the partner can read what it proves.
        assert json.loads(proof["leaf_input"]) == {
            k: v for k, v in proof["entry"].items() if k != "leaf_hash_hex"
        }
        # A proof that cannot fail is worthless: a wrong index or a changed node is refused.
        leaf = hashlib.sha256(b"\x00" + proof["leaf_input"].encode()).digest()
        path = [bytes.fromhex(n) for n in proof["audit_path_hex"]]
        root = bytes.fromhex(proof["checkpoint"]["root_hash_hex"])
        assert not merkle.verify_inclusion(leaf, seq % size, size, path, root)
        if path:
            bent = [bytes([path[0][0] ^ 1]) + path[0][1:], *path[1:]]
            assert not merkle.verify_inclusion(leaf, seq - 1, size, bent, root)


def test_inclusion_against_an_older_checkpoint(client, auth, log_with_sites):
    partner = Partner(client, auth)
    old = take(client, auth)
    add_sites(client, auth, 1, 3)
    take(client, auth)
    proof = client.get(
        f"{AUDIT}/entries/2?tree_size={old['tree_size']}", headers=auth("viewer")
    ).get_json()
    assert proof["tree_size"] == old["tree_size"] and proof["checkpoint"]["id"] == old["id"]
    assert inclusion_holds(partner, proof)
    newer_entry = old["tree_size"] + 1
    refused = client.get(
        f"{AUDIT}/entries/{newer_entry}?tree_size={old['tree_size']}", headers=auth("viewer")
    )
    assert refused.status_code == 409


def test_entry_route_refusals(client, auth, log_with_sites):
    viewer = auth("viewer")
    assert client.get(f"{AUDIT}/entries/1", headers=viewer).status_code == 409  # no checkpoint
    take(client, auth)
    assert client.get(f"{AUDIT}/entries/999", headers=viewer).status_code == 404
    assert client.get(f"{AUDIT}/entries/1?tree_size=999", headers=viewer).status_code == 404
    assert client.get(f"{AUDIT}/entries/1?tree_size=big", headers=viewer).status_code == 422
    assert client.get(f"{AUDIT}/entries/1?colour=red", headers=viewer).status_code == 422


def test_partner_consistency_proof_holds_then_fails_after_a_rewrite(client, auth, db):
    partner = Partner(client, auth)
    kept_size, kept_root = partner.accept(take(client, auth))  # the partner keeps this one
    sizes = [kept_size]
    for round_number in range(3):
        add_sites(client, auth, 10 * round_number, 2 + round_number)
        sizes.append(partner.accept(take(client, auth))[0])
    new_size = sizes[-1]
    body = client.get(
        f"{AUDIT}/consistency?old={kept_size}&new={new_size}", headers=auth("site")
    ).get_json()
    _, new_root = partner.accept(body["new_checkpoint"])
    proof = [bytes.fromhex(node) for node in body["proof_hex"]]
    assert merkle.verify_consistency(kept_size, new_size, kept_root, new_root, proof)
    for old, new in zip(sizes, sizes[1:], strict=False):  # every step of the way
        step = client.get(f"{AUDIT}/consistency?old={old}&new={new}", headers=auth("site"))
        step_body = step.get_json()
        step_old = partner.accept(step_body["old_checkpoint"])
        step_new = partner.accept(step_body["new_checkpoint"])
        nodes = [bytes.fromhex(n) for n in step_body["proof_hex"]]
        assert merkle.verify_consistency(old, new, step_old[1], step_new[1], nodes)

    # Someone with database access rewrites entry 2 and its leaf hash consistently.
    with db.read() as session:
        e = session.get(AuditEntry, 2)
    forged_payload = '{"name":"nobody"}'
    forged = {
        "seq": 2,
        "at": e.at.isoformat(),
        "actor": e.actor,
        "role": e.role,
        "action": e.action,
        "subject": e.subject,
        "payload": forged_payload,
    }
    data = json.dumps(forged, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()
    with db.engine.begin() as connection:
        connection.execute(
            text("UPDATE audit_entries SET payload = :p, leaf_hash = :h WHERE seq = 2"),
            {"p": forged_payload, "h": hashlib.sha256(b"\x00" + data).hexdigest()},
        )
    again = client.get(
        f"{AUDIT}/consistency?old={kept_size}&new={new_size}", headers=auth("site")
    ).get_json()
    assert partner.accept(again["new_checkpoint"])[1] == new_root  # the signed root is unchanged
    proof = [bytes.fromhex(node) for node in again["proof_hex"]]
    assert not merkle.verify_consistency(kept_size, new_size, kept_root, new_root, proof)
    # The service also refuses to sign the rewritten history.
    assert client.post(f"{AUDIT}/checkpoints", json={}, headers=auth("admin")).status_code == 409


def test_consistency_route_refusals(client, auth, log_with_sites):
    site = auth("site")
    size = take(client, auth)["tree_size"]
    assert client.get(f"{AUDIT}/consistency", headers=site).status_code == 422
    assert client.get(f"{AUDIT}/consistency?old={size}&new=1", headers=site).status_code == 422
    assert client.get(f"{AUDIT}/consistency?old=1&new={size}", headers=site).status_code == 404
    same = client.get(f"{AUDIT}/consistency?old={size}&new={size}", headers=site).get_json()
    assert same["proof_hex"] == []  # RFC 6962 section 2.1.2: nothing to prove for equal sizes


def test_every_audit_route_is_in_the_openapi_document(client, auth, app):
    document = client.get("/api/v1/openapi.json", headers=auth("viewer")).get_json()
    audit_routes = {
        (method.lower(), rule.rule.replace("<int:seq>", "{seq}"))
        for rule in app.url_map.iter_rules()
        if rule.rule.startswith(AUDIT)
        for method in rule.methods - {"HEAD", "OPTIONS"}
    }
    assert len(audit_routes) == 6
    schemas = document["components"]["schemas"]
    for method, path in audit_routes:
        operation = document["paths"][path][method]
        assert operation["tags"] == ["audit"]
        ok = next(iter(r for s, r in operation["responses"].items() if s.startswith("2")))
        ref = ok["content"]["application/json"]["schema"]["$ref"]
        assert ref.rsplit("/", 1)[-1] in schemas
    assert {"InclusionProofOut", "ConsistencyProofOut", "CheckpointOut"} <= set(schemas)


# --- the command line ---------------------------------------------------------------------------


def run(app, *args: str):
    settings = app.extensions["confirm.settings"]
    env = {
        "CONFIRM_DATABASE_URL": settings.database_url,
        "CONFIRM_INSTANCE_PATH": str(settings.instance_path),
        "CONFIRM_SIGNING_KEY_FILE": str(settings.resolved_signing_key_file()),
    }
    cli_settings.cache_clear()
    try:
        return CliRunner().invoke(main, list(args), env=env)
    finally:
        cli_settings.cache_clear()


def test_commands_give_the_same_proofs_as_the_api(client, auth, app, log_with_sites):
    partner = Partner(client, auth)
    made = run(app, "audit", "checkpoint", "--reason", "nightly")
    assert made.exit_code == 0, made.output
    assert f"{log_with_sites} entries" in made.stdout
    add_sites(client, auth, 1, 4)
    assert run(app, "audit", "checkpoint").exit_code == 0
    latest = client.get(f"{AUDIT}/checkpoints/latest", headers=auth("viewer")).get_json()

    proved = run(app, "audit", "prove", "3", "--json")
    assert proved.exit_code == 0, proved.output
    document = json.loads(proved.stdout)
    assert document["checkpoint"]["id"] == latest["id"]
    assert inclusion_holds(partner, document)
    assert document == client.get(f"{AUDIT}/entries/3", headers=auth("viewer")).get_json()
    old = run(app, "audit", "prove", "3", "--tree-size", str(log_with_sites))
    assert old.exit_code == 0 and f"of {log_with_sites}" in old.stdout

    old_size, new_size = log_with_sites, latest["tree_size"]
    shown = run(app, "audit", "consistency", str(old_size), str(new_size), "--json")
    assert shown.exit_code == 0, shown.output
    body = json.loads(shown.stdout)
    _, old_root = partner.accept(body["old_checkpoint"])
    _, new_root = partner.accept(body["new_checkpoint"])
    nodes = [bytes.fromhex(n) for n in body["proof_hex"]]
    assert merkle.verify_consistency(old_size, new_size, old_root, new_root, nodes)
    text_form = run(app, "audit", "consistency", str(old_size), str(new_size))
    assert all(node in text_form.stdout for node in body["proof_hex"])

    key = run(app, "audit", "public-key")
    api_key = client.get(f"{AUDIT}/public-key", headers=auth("viewer")).get_json()
    assert key.stdout == api_key["public_key_pem"] and api_key["key_id"] in key.stderr
    missing = run(app, "audit", "prove", "999")
    assert missing.exit_code == 2 and "no audit entry 999" in missing.stderr
    assert run(app, "audit", "verify").exit_code == 0
