"""Check a dossier folder offline, holding only it and the log's public key.

1. every file matches the manifest; the protocol files hash to the recorded SHA-256 values;
2. the checkpoint's Ed25519 signature verifies with the given public key;
3. every entry's leaf input is the canonical form of its columns, and its inclusion proof
   leads to the signed root (RFC 6962 / RFC 9162);
4. what the dossier states (history, sign-offs, latest checks, creation under the protocol) is
   backed by proven entries.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any

from confirm_service.audit.log import entry_bytes
from confirm_service.audit.merkle import leaf_hash, verify_inclusion
from confirm_service.audit.signing import Checkpoint, verify_checkpoint
from confirm_service.states import CandidateState


@dataclass
class DossierReport:
    ok: bool = True
    checked: list[str] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)

    def fail(self, message: str) -> None:
        self.ok = False
        self.problems.append(message)


def _files(folder: Path, report: DossierReport) -> dict[str, Any] | None:
    try:
        manifest = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
        dossier = json.loads((folder / "dossier.json").read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        report.fail(f"cannot read the dossier: {exc}")
        return None
    for name, digest in sorted(manifest.items()):
        path = folder / name
        if not path.is_file() or hashlib.sha256(path.read_bytes()).hexdigest() != digest:
            report.fail(f"{name} does not match the manifest")
    protocol = dossier.get("protocol", {})
    on_disk = folder / "protocol.toml"
    if not on_disk.is_file() or hashlib.sha256(on_disk.read_bytes()).hexdigest() != protocol.get(
        "sha256"
    ):
        report.fail("protocol.toml does not hash to the recorded protocol SHA-256")
    if protocol.get("bands_file"):
        bands = folder / protocol["bands_file"]
        if not bands.is_file() or hashlib.sha256(bands.read_bytes()).hexdigest() != protocol.get(
            "bands_sha256"
        ):
            report.fail("the interference-band file does not hash to the recorded SHA-256")
    report.checked.append(f"{len(manifest)} files against the manifest, protocol hashes")
    return dossier


def _checkpoint(
    dossier: dict[str, Any], public_key_pem: str, report: DossierReport
) -> Checkpoint | None:
    document = dossier["audit"]["checkpoint"]
    try:
        checkpoint = Checkpoint.from_signed_bytes(
            document["signed_text"].encode("utf-8"), document["key_id"]
        )
        good = verify_checkpoint(public_key_pem, checkpoint, document["signature_b64"])
    except (ValueError, KeyError, TypeError) as exc:
        report.fail(f"checkpoint unreadable: {exc}")
        return None
    if not good:
        report.fail("the checkpoint signature does not verify with the given public key")
        return None
    if checkpoint.tree_size != document["tree_size"] or (
        checkpoint.root_hash_hex != document["root_hash_hex"]
    ):
        report.fail("the checkpoint fields differ from its signed text")
        return None
    report.checked.append(f"checkpoint signature (tree size {checkpoint.tree_size})")
    return checkpoint


def _entries(dossier: dict[str, Any], checkpoint: Checkpoint, report: DossierReport) -> list[dict]:
    proven = []
    for item in dossier["audit"]["entries"]:
        e = item["entry"]
        expected_input = entry_bytes(
            e["seq"],
            datetime.fromisoformat(e["at"]),
            e["actor"],
            e["role"],
            e["action"],
            e["subject"],
            e["payload"],
        )
        if expected_input != item["leaf_input"].encode("utf-8"):
            report.fail(f"entry {e['seq']}: leaf input is not the canonical form of its fields")
            continue
        path = [bytes.fromhex(h) for h in item["audit_path_hex"]]
        if item["leaf_index"] != e["seq"] - 1 or not verify_inclusion(
            leaf_hash(expected_input),
            item["leaf_index"],
            checkpoint.tree_size,
            path,
            checkpoint.root_hash,
        ):
            report.fail(f"entry {e['seq']}: inclusion proof does not reach the signed root")
            continue
        proven.append({**e, "payload": json.loads(e["payload"])})
    report.checked.append(f"{len(proven)} of {len(dossier['audit']['entries'])} inclusion proofs")
    return proven


def _backed(dossier: dict[str, Any], proven: list[dict], report: DossierReport) -> None:
    candidate = dossier["candidate"]
    subject = f"candidate:{candidate['id']}"
    mine = [e for e in proven if e["subject"] == subject]
    created = [e for e in mine if e["action"] == "candidate.created"]
    if not created or created[0]["payload"].get("protocol_sha256") != dossier["protocol"]["sha256"]:
        report.fail("no proven creation entry under the recorded protocol")
    transitions = {
        (e["payload"].get("to_stage"), e["payload"].get("to_state"))
        for e in mine
        if e["action"] == "candidate.transition"
    }
    decisions = {
        e["action"].split(".", 1)[1]
        for e in mine
        if e["action"] in ("candidate.rejected", "candidate.withdrawn")
    }
    for step in candidate["history"][1:]:
        if step["reason_class"] == "person":
            if step["to_state"] not in decisions:
                report.fail(f"decision {step['to_state']} has no proven entry")
        elif (step["to_stage"], step["to_state"]) not in transitions:
            report.fail(f"transition to {step['to_stage']}/{step['to_state']} has no proven entry")
    signed = {
        (e["payload"].get("person"), e["payload"].get("approve"), e["payload"].get("rationale"))
        for e in mine
        if e["action"] == "signoff.recorded"
    }
    for signoff in candidate["signoffs"]:
        if (signoff["person"], signoff["approve"], signoff["rationale"]) not in signed:
            report.fail(f"sign-off by {signoff['person']} has no proven entry")
    changes = [e["payload"] for e in mine if e["action"] == "check.changed"]
    for check in candidate["checks"]:
        latest = [c for c in changes if c.get("kind") == check["kind"]]
        if not latest or (
            latest[-1]["outcome"],
            latest[-1]["measured"],
            latest[-1]["expected"],
        ) != (check["outcome"], check["measured"], check["expected"]):
            report.fail(f"check {check['kind']}: the stated result has no proven entry")
    if (
        candidate["state"] != CandidateState.OPEN
        and candidate.get("decision_checkpoint_size") is None
    ):
        report.fail("a final state without the checkpoint it was decided at")
    report.checked.append("history, sign-offs and checks are backed by proven entries")


def verify_dossier(folder: Path, public_key_pem: str) -> DossierReport:
    report = DossierReport()
    dossier = _files(Path(folder), report)
    if dossier is None:
        return report
    checkpoint = _checkpoint(dossier, public_key_pem, report)
    if checkpoint is None:
        return report
    proven = _entries(dossier, checkpoint, report)
    _backed(dossier, proven, report)
    return report
