"""The dossier: written from the demo scenario, verified offline with only it and the public
key, and refused after every kind of tampering. References: RFC 6962 section 2.1.1 (PATH) for
the shared-subtree proof builder, Ed25519 (RFC 8032) through the `cryptography` package."""

from __future__ import annotations

import hashlib
import json
import shutil

import pytest
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from cryptography.hazmat.primitives.serialization import Encoding, PublicFormat

from confirm_service.audit.checkpoints import service_public_key
from confirm_service.audit.merkle import inclusion_proof, leaf_hash
from confirm_service.audit.tree_cache import ProofBuilder
from confirm_service.demo import CHANNEL_HZ
from confirm_service.dossier.build import build_dossier
from confirm_service.dossier.render import write_dossier
from confirm_service.dossier.verify import verify_dossier
from tests.services.test_candidate_flow import post_scenario


@pytest.mark.parametrize("size", [1, 2, 3, 5, 8, 13, 64, 100])
def test_proof_builder_equals_rfc6962_path(size):
    leaves = [leaf_hash(bytes([i % 256, i // 256])) for i in range(size)]
    builder = ProofBuilder(leaves)
    for index in range(size):
        assert builder.path(index) == inclusion_proof(leaves, index, size)


@pytest.fixture
def written(app, client, auth, db, tmp_path):
    candidates = post_scenario(client, auth)
    sky = next(c for c in candidates if c["stage"] == "review")
    settings = app.extensions["confirm.settings"]
    with db.write() as session:
        document = build_dossier(session, settings, sky["id"])
    folder = tmp_path / "dossier"
    write_dossier(document, folder)
    public_pem, _ = service_public_key(settings)
    return folder, public_pem, document


def rewrite(folder, mutate):
    """Edit dossier.json and re-issue the manifest, as a forger who knows the format would."""
    path = folder / "dossier.json"
    document = json.loads(path.read_text())
    mutate(document)
    path.write_text(json.dumps(document))
    manifest = json.loads((folder / "manifest.json").read_text())
    manifest["dossier.json"] = hashlib.sha256(path.read_bytes()).hexdigest()
    (folder / "manifest.json").write_text(json.dumps(manifest))


def test_dossier_holds_the_record_and_verifies(written, client, auth):
    folder, public_pem, document = written
    report = verify_dossier(folder, public_pem)
    assert report.ok, report.problems
    names = {p.name for p in folder.iterdir()}
    assert {
        "dossier.json",
        "index.html",
        "protocol.toml",
        "public-key.pem",
        "manifest.json",
    } <= names
    page = (folder / "index.html").read_text()
    assert "not a detection" in page and "<svg" in page
    assert "post-detection principles" in page
    assert {p["site"] for p in document["predictions"]} == {"PRA", "TFO"}
    for comparison in document["predictions"]:
        # every linked detection lies within 3 sigma + one channel of its prediction
        miss = abs(comparison["observed_frequency_hz"] - comparison["predicted_frequency_hz"])
        assert miss <= 3 * comparison["frequency_sigma_hz"] + CHANNEL_HZ
    actions = {e["entry"]["action"] for e in document["audit"]["entries"]}
    assert {
        "candidate.created",
        "check.changed",
        "candidate.transition",
        "observation.created",
    } <= actions
    api = client.get(
        f"/api/v1/candidates/{document['candidate']['id']}/dossier", headers=auth("viewer")
    )
    assert api.status_code == 200
    assert (
        api.get_json()["audit"]["checkpoint"]["tree_size"]
        >= (document["audit"]["checkpoint"]["tree_size"])
    )


def test_wrong_public_key_is_refused(written):
    folder, _, _ = written
    other = (
        Ed25519PrivateKey.generate()
        .public_key()
        .public_bytes(Encoding.PEM, PublicFormat.SubjectPublicKeyInfo)
        .decode()
    )
    report = verify_dossier(folder, other)
    assert not report.ok
    assert "signature" in report.problems[0]


def test_changed_file_is_refused(written):
    folder, public_pem, _ = written
    (folder / "protocol.toml").write_text("name = 'lenient'\n")
    report = verify_dossier(folder, public_pem)
    assert not report.ok
    assert any("protocol.toml" in p for p in report.problems)


def _claim_better_check(document):
    check = document["candidate"]["checks"][0]
    check["measured"] = (check["measured"] or 0.0) + 1.0


def _drop_a_proof_element(document):
    document["audit"]["entries"][3]["audit_path_hex"].pop()


def _edit_an_entry(document):
    entry = document["audit"]["entries"][2]
    entry["entry"]["actor"] = "someone-else"


def _invent_a_signoff(document):
    document["candidate"]["signoffs"].append(
        {
            "id": 99,
            "stage": "review",
            "role": "coordinator",
            "person": "ghost",
            "approve": True,
            "rationale": "trust me",
            "at": "2026-11-25T00:00:00+00:00",
        }
    )


@pytest.mark.parametrize(
    "mutate", [_claim_better_check, _drop_a_proof_element, _edit_an_entry, _invent_a_signoff]
)
def test_rewritten_content_is_refused(written, tmp_path, mutate):
    folder, public_pem, _ = written
    copy = tmp_path / "copy"
    shutil.copytree(folder, copy)
    rewrite(copy, mutate)
    report = verify_dossier(copy, public_pem)
    assert not report.ok, mutate.__name__
