"""``confirm-service audit``: verify the log, sign checkpoints, print proofs and the key."""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Any

import click

from confirm_service.audit import checkpoints, proofs
from confirm_service.audit.signing import load_private_key, load_public_key_pem, public_key_pem
from confirm_service.audit.verify import verify_log
from confirm_service.cli import main
from confirm_service.cli.context import open_database, settings
from confirm_service.config import ConfigError


@main.group("audit")
def audit_group() -> None:
    """The tamper-evident audit log (RFC 6962 tree, Ed25519-signed checkpoints)."""


@audit_group.command("verify")
@click.option(
    "--public-key",
    "public_key_file",
    type=click.Path(exists=True, dir_okay=False, path_type=Path),
    default=None,
    help="PEM public key to check signatures with. Default: the instance's signing key. "
    "An auditor should pass a copy obtained independently of the server.",
)
def verify(public_key_file: Path | None) -> None:
    """Recompute every entry, root and signature; exit 1 naming the first bad entry.

    Before the first checkpoint there is no key yet: the entries are checked alone.
    """
    from confirm_service.audit.store import head_size
    from confirm_service.cli.progress import counted

    database = open_database()
    try:
        with database.read() as session:
            if public_key_file is None and checkpoints.latest_checkpoint(session) is None:
                pem = _verifying_key_pem_if_any()
            else:
                pem = _verifying_key_pem(public_key_file)
            with counted("verifying the audit log", head_size(session) or 0) as advance:
                report = verify_log(session, pem, progress=advance)
    finally:
        database.dispose()
    line = report.summary()
    click.echo(line)
    if not report.ok:
        click.echo(line, err=True)
        sys.exit(1)


@audit_group.command("checkpoint")
@click.option("--reason", default="operator", show_default=True, help="Why (1-64 characters).")
def checkpoint(reason: str) -> None:
    """Sign a checkpoint of the whole current tree and print it."""
    database = open_database()
    try:
        with database.write() as session:
            document = checkpoints.checkpoint_document(
                checkpoints.take_checkpoint(session, settings(), reason)
            )
    finally:
        database.dispose()
    click.echo(
        f"checkpoint {document['id']}: {document['tree_size']} entries, "
        f"root {document['root_hash_hex']}, key {document['key_id']}, at {document['timestamp']}"
    )


@audit_group.command("prove")
@click.argument("seq", type=int)
@click.option("--tree-size", type=int, default=None, help="Checkpoint size (default: latest).")
@click.option("--json", "as_json", is_flag=True, help="Print the proof document as JSON.")
def prove(seq: int, tree_size: int | None, as_json: bool) -> None:
    """Inclusion proof of entry SEQ against a signed checkpoint."""
    database = open_database()
    try:
        with database.read() as session:
            document = proofs.prove_inclusion(session, seq, tree_size).to_dict()
    finally:
        database.dispose()
    if as_json:
        click.echo(json.dumps(document, indent=2, ensure_ascii=False))
        return
    _echo_checkpoint("checkpoint", document["checkpoint"])
    click.echo(f"entry {seq} is leaf {document['leaf_index']} of {document['tree_size']}")
    click.echo(f"leaf input: {document['leaf_input']}")
    click.echo(f"leaf hash:  {document['leaf_hash_hex']}")
    _echo_hashes("audit path (nearest the leaf first)", document["audit_path_hex"])


@audit_group.command("consistency")
@click.argument("old", type=int)
@click.argument("new", type=int)
@click.option("--json", "as_json", is_flag=True, help="Print the proof document as JSON.")
def consistency(old: int, new: int, as_json: bool) -> None:
    """Consistency proof from the checkpoint of OLD entries to that of NEW entries."""
    database = open_database()
    try:
        with database.read() as session:
            document = proofs.prove_consistency(session, old, new).to_dict()
    finally:
        database.dispose()
    if as_json:
        click.echo(json.dumps(document, indent=2, ensure_ascii=False))
        return
    _echo_checkpoint("old checkpoint", document["old_checkpoint"])
    _echo_checkpoint("new checkpoint", document["new_checkpoint"])
    _echo_hashes(f"consistency proof {old} -> {new}", document["proof_hex"])


@audit_group.command("public-key")
def public_key() -> None:
    """Print the checkpoint signing key's public half (PEM) on stdout, its id on stderr."""
    pem, identifier = checkpoints.service_public_key(settings())
    click.echo(pem, nl=False)
    click.echo(f"key id {identifier}", err=True)


def _verifying_key_pem(public_key_file: Path | None) -> str:
    if public_key_file is not None:
        try:
            pem = public_key_file.read_text(encoding="ascii")
            load_public_key_pem(pem)
        except (UnicodeDecodeError, ValueError) as exc:
            raise ConfigError(f"{public_key_file} is not an Ed25519 public key: {exc}") from None
        return pem
    key_file = settings().resolved_signing_key_file()
    try:
        return public_key_pem(load_private_key(key_file))
    except FileNotFoundError:
        raise ConfigError(f"no signing key at {key_file}; pass --public-key FILE") from None
    except ValueError as exc:
        raise ConfigError(f"signing key {key_file} unusable: {exc}") from None


def _verifying_key_pem_if_any() -> str | None:
    """The instance key's public half, or None when no key was created yet."""
    if not settings().resolved_signing_key_file().exists():
        return None
    return _verifying_key_pem(None)


def _echo_checkpoint(label: str, document: dict[str, Any]) -> None:
    click.echo(
        f"{label} {document['id']}: {document['tree_size']} entries, "
        f"root {document['root_hash_hex']}, at {document['timestamp']}, key {document['key_id']}"
    )
    click.echo(f"  signature (Ed25519, base64): {document['signature_b64']}")


def _echo_hashes(label: str, hashes: list[str]) -> None:
    click.echo(f"{label}:" + ("" if hashes else " (empty)"))
    for node in hashes:
        click.echo(f"  {node}")
