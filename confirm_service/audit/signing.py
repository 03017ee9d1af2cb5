"""Ed25519 keys and signed checkpoints of the audit tree.

A checkpoint states "the log named ``origin`` had ``tree_size`` entries with this Merkle root at
``timestamp``". The signature covers :meth:`Checkpoint.signed_bytes`, four UTF-8 lines, each
ended by a line feed (0x0A), with no other whitespace::

    <origin>                 log name: 1-200 characters, no control characters, no leading or
                             trailing space
    <tree_size>              decimal, no sign, no leading zeros
    <root hash>              the 32-byte RFC 6962 root, standard base64 with padding (RFC 4648
                             section 4), 44 characters
    <timestamp>              YYYY-MM-DDTHH:MM:SS[.ffffff]+00:00 (ISO 8601, UTC)

The key id is not in the signed text: it is derived from the verifying key (first 16 hex digits
of SHA-256 of the raw 32-byte public key) and :func:`verify_checkpoint` refuses a checkpoint
whose ``key_id`` does not match the key it is checked with. Use the key for checkpoints only;
a key that also signs other messages could be made to sign text shaped like a checkpoint.

Private keys are PKCS#8 PEM files without encryption, written with mode 0600; protect the
directory and the backups. Anyone holding the file can sign checkpoints.
"""

from __future__ import annotations

import base64
import binascii
import hashlib
import logging
import os
import re
import stat
import tempfile
import unicodedata
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

from cryptography.exceptions import InvalidSignature
from cryptography.hazmat.primitives import serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey, Ed25519PublicKey

__all__ = [
    "Checkpoint",
    "generate_key",
    "key_id",
    "load_or_create_private_key",
    "load_private_key",
    "load_public_key_pem",
    "public_key_pem",
    "sign_checkpoint",
    "utc_timestamp",
    "verify_checkpoint",
]

_log = logging.getLogger(__name__)

_KEY_ID_HEX_DIGITS = 16
_MAX_ORIGIN_CHARS = 200
_SIGNATURE_BYTES = 64
_HEX_ROOT = re.compile(r"[0-9a-f]{64}")
_HEX_KEY_ID = re.compile(r"[0-9a-f]{16}")
_DECIMAL_SIZE = re.compile(r"0|[1-9][0-9]*")
_UTC_TIMESTAMP = re.compile(
    r"[0-9]{4}-[0-9]{2}-[0-9]{2}T[0-9]{2}:[0-9]{2}:[0-9]{2}(\.[0-9]{1,6})?\+00:00"
)


def generate_key(path: str | os.PathLike[str]) -> Ed25519PrivateKey:
    """Create a new Ed25519 key, write it to ``path`` (PKCS#8 PEM, mode 0600) and return it.

    Refuses to overwrite: raises :class:`FileExistsError` if ``path`` exists. The file appears
    atomically, so a concurrent reader never sees a partial key.
    """
    target = Path(path)
    key = Ed25519PrivateKey.generate()
    pem = key.private_bytes(
        serialization.Encoding.PEM,
        serialization.PrivateFormat.PKCS8,
        serialization.NoEncryption(),
    )
    target.parent.mkdir(mode=0o700, parents=True, exist_ok=True)
    _write_new_file_atomically(target, pem)
    return key


def load_private_key(path: str | os.PathLike[str]) -> Ed25519PrivateKey:
    """Read an unencrypted PEM Ed25519 private key; warns if others may read the file."""
    target = Path(path)
    data = target.read_bytes()
    mode = stat.S_IMODE(target.stat().st_mode)
    if mode & 0o077:
        _log.warning("signing key %s has mode %o; it should be 0600", target, mode)
    key = serialization.load_pem_private_key(data, password=None)
    if not isinstance(key, Ed25519PrivateKey):
        raise ValueError(f"{target} holds a {type(key).__name__}, not an Ed25519 private key")
    return key


def load_or_create_private_key(path: str | os.PathLike[str]) -> Ed25519PrivateKey:
    """Load the key at ``path``, creating it first if the file does not exist."""
    try:
        return load_private_key(path)
    except FileNotFoundError:
        pass
    try:
        return generate_key(path)
    except FileExistsError:  # another process created it meanwhile
        return load_private_key(path)


def public_key_pem(private_key: Ed25519PrivateKey | Ed25519PublicKey) -> str:
    """SubjectPublicKeyInfo PEM text (RFC 8410) of the key's public half."""
    public = _public_half(private_key)
    return public.public_bytes(
        serialization.Encoding.PEM, serialization.PublicFormat.SubjectPublicKeyInfo
    ).decode("ascii")


def load_public_key_pem(pem: str) -> Ed25519PublicKey:
    """Parse a SubjectPublicKeyInfo PEM; raises :class:`ValueError` unless it is Ed25519."""
    key = serialization.load_pem_public_key(pem.encode("ascii"))
    if not isinstance(key, Ed25519PublicKey):
        raise ValueError(f"PEM holds a {type(key).__name__}, not an Ed25519 public key")
    return key


def key_id(public_key: Ed25519PublicKey | Ed25519PrivateKey) -> str:
    """First 16 hex digits of SHA-256 of the raw 32-byte public key."""
    raw = _public_half(public_key).public_bytes(
        serialization.Encoding.Raw, serialization.PublicFormat.Raw
    )
    return hashlib.sha256(raw).hexdigest()[:_KEY_ID_HEX_DIGITS]


def utc_timestamp(moment: datetime, timespec: str = "seconds") -> str:
    """Checkpoint timestamp text for an aware datetime, e.g. ``2031-04-05T06:07:08+00:00``.

    ``timespec`` is ``"seconds"``, ``"milliseconds"`` or ``"microseconds"``. Naive datetimes are
    refused.
    """
    if moment.tzinfo is None or moment.utcoffset() is None:
        raise ValueError("naive datetime refused; give a timezone-aware UTC datetime")
    if timespec not in ("seconds", "milliseconds", "microseconds"):
        raise ValueError(f"timespec {timespec!r} not one of seconds, milliseconds, microseconds")
    return moment.astimezone(UTC).isoformat(timespec=timespec)


@dataclass(frozen=True)
class Checkpoint:
    """A (tree size, root hash) statement about one log at one moment."""

    origin: str
    tree_size: int
    root_hash_hex: str
    timestamp: str
    key_id: str

    def __post_init__(self) -> None:
        _check_origin(self.origin)
        if not isinstance(self.tree_size, int) or isinstance(self.tree_size, bool):
            raise ValueError(f"tree_size must be an integer, got {self.tree_size!r}")
        if self.tree_size < 0:
            raise ValueError(f"tree_size must be >= 0, got {self.tree_size}")
        if not isinstance(self.root_hash_hex, str) or not _HEX_ROOT.fullmatch(self.root_hash_hex):
            raise ValueError("root_hash_hex must be 64 lowercase hex digits")
        _check_timestamp(self.timestamp)
        if not isinstance(self.key_id, str) or not _HEX_KEY_ID.fullmatch(self.key_id):
            raise ValueError("key_id must be 16 lowercase hex digits")

    @property
    def root_hash(self) -> bytes:
        """The 32-byte root hash."""
        return bytes.fromhex(self.root_hash_hex)

    def signed_bytes(self) -> bytes:
        """The exact bytes signed (format in the module docstring)."""
        root_b64 = base64.b64encode(self.root_hash).decode("ascii")
        return f"{self.origin}\n{self.tree_size}\n{root_b64}\n{self.timestamp}\n".encode()

    @classmethod
    def from_signed_bytes(cls, data: bytes, key_id: str) -> Checkpoint:
        """Parse ``signed_bytes`` output back; refuses anything not in the exact format."""
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise ValueError("checkpoint text is not UTF-8") from exc
        lines = text.split("\n")
        if len(lines) != 5 or lines[4] != "":
            raise ValueError("checkpoint text must be exactly four lines, each ending in \\n")
        origin, size_text, root_b64, timestamp = lines[:4]
        if not _DECIMAL_SIZE.fullmatch(size_text):
            raise ValueError(f"tree size {size_text!r} is not a canonical decimal")
        try:
            root = base64.b64decode(root_b64, validate=True)
        except binascii.Error as exc:
            raise ValueError("root hash is not base64") from exc
        if len(root) != 32 or base64.b64encode(root).decode("ascii") != root_b64:
            raise ValueError("root hash is not the canonical base64 of 32 bytes")
        return cls(origin, int(size_text), root.hex(), timestamp, key_id)


def sign_checkpoint(private_key: Ed25519PrivateKey, checkpoint: Checkpoint) -> str:
    """Ed25519 signature of ``checkpoint.signed_bytes()``, standard base64 (88 characters)."""
    if checkpoint.key_id != key_id(private_key):
        raise ValueError(
            f"checkpoint names key {checkpoint.key_id}, signing key is {key_id(private_key)}"
        )
    signature = private_key.sign(checkpoint.signed_bytes())
    return base64.b64encode(signature).decode("ascii")


def verify_checkpoint(public_key_pem: str, checkpoint: Checkpoint, signature_b64: str) -> bool:
    """True only if ``signature_b64`` is a valid signature of ``checkpoint`` by this key.

    Returns False for a wrong, malformed or non-canonical base64 signature and for a checkpoint
    whose ``key_id`` is not this key's. Raises :class:`ValueError` if ``public_key_pem`` is not
    an Ed25519 public key, since that is a configuration fault rather than a forged checkpoint.
    """
    public = load_public_key_pem(public_key_pem)
    if checkpoint.key_id != key_id(public) or not isinstance(signature_b64, str):
        return False
    try:
        signature = base64.b64decode(signature_b64, validate=True)
    except (binascii.Error, ValueError):
        return False
    if len(signature) != _SIGNATURE_BYTES:
        return False
    if base64.b64encode(signature).decode("ascii") != signature_b64:
        return False
    try:
        public.verify(signature, checkpoint.signed_bytes())
    except InvalidSignature:
        return False
    return True


def _public_half(key: Ed25519PrivateKey | Ed25519PublicKey) -> Ed25519PublicKey:
    if isinstance(key, Ed25519PrivateKey):
        return key.public_key()
    if isinstance(key, Ed25519PublicKey):
        return key
    raise TypeError(f"expected an Ed25519 key, got {type(key).__name__}")


def _check_origin(origin: object) -> None:
    if not isinstance(origin, str) or not 1 <= len(origin) <= _MAX_ORIGIN_CHARS:
        raise ValueError(f"origin must be 1-{_MAX_ORIGIN_CHARS} characters")
    if origin != origin.strip():
        raise ValueError("origin must not start or end with whitespace")
    if any(unicodedata.category(ch) in ("Cc", "Cs") for ch in origin):
        raise ValueError("origin must not contain control characters or lone surrogates")


def _check_timestamp(timestamp: object) -> None:
    if not isinstance(timestamp, str) or not _UTC_TIMESTAMP.fullmatch(timestamp):
        raise ValueError(
            f"timestamp {timestamp!r} must look like 2031-04-05T06:07:08[.ffffff]+00:00"
        )
    try:
        datetime.fromisoformat(timestamp)
    except ValueError as exc:
        raise ValueError(f"timestamp {timestamp!r} is not a valid date and time") from exc


def _write_new_file_atomically(target: Path, content: bytes) -> None:
    """Write ``content`` to a 0600 temporary file beside ``target``, then hard-link it into place.

    ``os.link`` fails if ``target`` exists, so an existing key is never replaced. On a file
    system without hard links the file is created with ``O_EXCL`` and written in place.
    """
    descriptor, temporary_name = tempfile.mkstemp(dir=target.parent, prefix=".key-", suffix=".tmp")
    try:
        with os.fdopen(descriptor, "wb") as handle:
            _write_private(handle.fileno(), content)
        try:
            os.link(temporary_name, target)
        except FileExistsError:
            raise
        except OSError:
            _write_exclusive(target, content)
    finally:
        os.unlink(temporary_name)


def _write_exclusive(target: Path, content: bytes) -> None:
    descriptor = os.open(target, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(descriptor, "wb") as handle:
        _write_private(handle.fileno(), content)


def _write_private(descriptor: int, content: bytes) -> None:
    os.fchmod(descriptor, 0o600)
    view = memoryview(content)
    while view:
        view = view[os.write(descriptor, view) :]
    os.fsync(descriptor)
