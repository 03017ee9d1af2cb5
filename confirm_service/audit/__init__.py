"""Tamper-evident audit trail.

The pure cryptographic core lives in :mod:`.canonical` (RFC 8785 canonical JSON), :mod:`.merkle`
(RFC 6962 Merkle tree and proofs) and :mod:`.signing` (Ed25519 signed checkpoints); none of them
touches the web framework or the database. Import the database-facing modules (such as
``confirm_service.audit.log``) directly.
"""

from confirm_service.audit.canonical import canonical_json, sha256_hex
from confirm_service.audit.merkle import (
    EMPTY_ROOT,
    MerkleAccumulator,
    consistency_proof,
    inclusion_proof,
    leaf_hash,
    node_hash,
    root_from_leaf_hashes,
    verify_consistency,
    verify_inclusion,
)
from confirm_service.audit.signing import (
    Checkpoint,
    generate_key,
    key_id,
    load_or_create_private_key,
    load_private_key,
    load_public_key_pem,
    public_key_pem,
    sign_checkpoint,
    utc_timestamp,
    verify_checkpoint,
)

__all__ = [
    "EMPTY_ROOT",
    "Checkpoint",
    "MerkleAccumulator",
    "canonical_json",
    "consistency_proof",
    "generate_key",
    "inclusion_proof",
    "key_id",
    "leaf_hash",
    "load_or_create_private_key",
    "load_private_key",
    "load_public_key_pem",
    "node_hash",
    "public_key_pem",
    "root_from_leaf_hashes",
    "sha256_hex",
    "sign_checkpoint",
    "utc_timestamp",
    "verify_checkpoint",
    "verify_consistency",
    "verify_inclusion",
]
