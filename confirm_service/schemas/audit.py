"""Response and query models of the audit API: checkpoints, entries and proofs."""

from __future__ import annotations

from typing import Annotated

from pydantic import BaseModel, Field

from confirm_service.schemas.bounds import INT64_MAX
from confirm_service.schemas.common import StrictModel

HexHash = Annotated[
    str, Field(pattern=r"^[0-9a-f]{64}$", description="32-byte SHA-256 hash, lowercase hex")
]


class CheckpointOut(BaseModel):
    """A signed statement: the log ``origin`` had ``tree_size`` entries with this root."""

    id: int
    origin: str
    tree_size: int = Field(ge=0)
    root_hash_hex: str = Field(description="RFC 6962 root of entries 1..tree_size, lowercase hex")
    timestamp: str = Field(description="ISO 8601 UTC exactly as signed")
    key_id: str = Field(description="first 16 hex digits of SHA-256 of the raw public key")
    signature_algorithm: str = "Ed25519"
    signature_b64: str = Field(description="Ed25519 signature of signed_text, standard base64")
    signed_text: str | None = Field(
        description="the four signed lines: origin, tree size, base64 root, timestamp, "
        "each ended by a line feed; null if the stored row is malformed"
    )
    reason: str


class CheckpointIn(StrictModel):
    reason: Annotated[str, Field(min_length=1, max_length=64)] = "requested over the API"


class AuditEntryOut(BaseModel):
    """One stored audit entry, with the columns that enter its leaf hash."""

    seq: int = Field(ge=1, description="position in the log; leaf index is seq - 1")
    at: str = Field(description="ISO 8601 UTC exactly as hashed")
    actor: str
    role: str
    action: str
    subject: str
    payload: str = Field(description="canonical JSON text (RFC 8785) of the change")
    leaf_hash_hex: str = Field(description="stored RFC 6962 leaf hash")


class InclusionProofOut(BaseModel):
    """Entry ``seq`` is in the tree of the signed checkpoint; verifiable offline."""

    seq: int
    leaf_index: int
    tree_size: int
    leaf_input: str = Field(description="the canonical JSON bytes hashed into the leaf, as text")
    leaf_hash_hex: HexHash
    audit_path_hex: list[HexHash] = Field(description="RFC 6962 audit path, nearest leaf first")
    entry: AuditEntryOut
    checkpoint: CheckpointOut
    method: str = Field(description="how to check the proof")


class ConsistencyProofOut(BaseModel):
    """The tree of ``new_checkpoint`` extends that of ``old_checkpoint`` unchanged."""

    old_size: int
    new_size: int
    proof_hex: list[HexHash] = Field(description="RFC 6962 consistency proof")
    old_checkpoint: CheckpointOut
    new_checkpoint: CheckpointOut
    method: str = Field(description="how to check the proof")


class PublicKeyOut(BaseModel):
    """The key that signs this log's checkpoints."""

    key_id: str
    algorithm: str = "Ed25519"
    public_key_pem: str = Field(description="SubjectPublicKeyInfo PEM (RFC 8410)")
    origin: str = Field(description="the log name on the first signed line")


class EntryProofQuery(StrictModel):
    tree_size: int | None = Field(
        None,
        ge=0,
        le=INT64_MAX,
        description="size of the checkpoint to prove against; default the latest",
    )


class ConsistencyQuery(StrictModel):
    old: int = Field(ge=0, le=INT64_MAX, description="tree size of the older checkpoint")
    new: int = Field(ge=0, le=INT64_MAX, description="tree size of the newer checkpoint")
