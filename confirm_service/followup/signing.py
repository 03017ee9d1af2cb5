"""Signed messages between partners: HMAC-SHA256 (RFC 2104) over timestamp, message id and body.

The signed text is ``<timestamp>\\n<message id>\\n<body bytes>``; the signature header holds
``v1=<hex digest>``. A receiver refuses a bad signature, a timestamp more than
``MAX_SKEW_S`` from its own clock, and a message id it has already seen (the last is the
receiver's store's job; see services.federation).
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
import time
import uuid
from collections.abc import Mapping
from dataclasses import dataclass

TIMESTAMP_HEADER = "X-Confirm-Timestamp"
SIGNATURE_HEADER = "X-Confirm-Signature"
MESSAGE_ID_HEADER = "X-Confirm-Message-Id"
SENDER_HEADER = "X-Confirm-Sender"
MAX_SKEW_S = 300
"""A signed message older or newer than 5 minutes is refused."""
SCHEME = "v1"


def new_secret() -> str:
    """A fresh shared secret: 32 random bytes, URL-safe text."""
    return secrets.token_urlsafe(32)


def new_message_id() -> str:
    return str(uuid.uuid4())


def signature(secret: str, timestamp: int, message_id: str, body: bytes) -> str:
    """``v1=`` and the hex HMAC-SHA256 of timestamp, message id and body."""
    text = f"{timestamp}\n{message_id}\n".encode() + body
    digest = hmac.new(secret.encode("utf-8"), text, hashlib.sha256).hexdigest()
    return f"{SCHEME}={digest}"


def signed_headers(
    secret: str, sender: str, message_id: str, body: bytes, now_s: float | None = None
) -> dict[str, str]:
    """The headers of a signed message sent now (or at ``now_s``, unix seconds)."""
    timestamp = int(time.time() if now_s is None else now_s)
    return {
        "Content-Type": "application/json",
        TIMESTAMP_HEADER: str(timestamp),
        MESSAGE_ID_HEADER: message_id,
        SENDER_HEADER: sender,
        SIGNATURE_HEADER: signature(secret, timestamp, message_id, body),
    }


@dataclass(frozen=True)
class SignedEnvelope:
    """The parts of a received message that the signature covers."""

    sender: str
    message_id: str
    timestamp: int
    signature: str


class SignatureRefused(Exception):
    """A message whose headers are missing, stale or badly signed; ``field`` names the header."""

    def __init__(self, field: str, message: str) -> None:
        super().__init__(message)
        self.field = field
        self.message = message


def envelope_of(headers: Mapping[str, str]) -> SignedEnvelope:
    """Read the signing headers; refuse when one is missing or malformed."""
    values = {}
    for name in (SENDER_HEADER, MESSAGE_ID_HEADER, TIMESTAMP_HEADER, SIGNATURE_HEADER):
        value = headers.get(name, "").strip()
        if not value or len(value) > 200:
            raise SignatureRefused(name, "missing or too long")
        values[name] = value
    try:
        timestamp = int(values[TIMESTAMP_HEADER])
    except ValueError:
        raise SignatureRefused(TIMESTAMP_HEADER, "not an integer number of seconds") from None
    return SignedEnvelope(
        values[SENDER_HEADER], values[MESSAGE_ID_HEADER], timestamp, values[SIGNATURE_HEADER]
    )


def verify(secret: str, envelope: SignedEnvelope, body: bytes, now_s: float | None = None) -> None:
    """Refuse a stale timestamp or a signature that does not match (constant-time compare)."""
    now = time.time() if now_s is None else now_s
    if abs(now - envelope.timestamp) > MAX_SKEW_S:
        raise SignatureRefused(TIMESTAMP_HEADER, f"more than {MAX_SKEW_S} s from our clock")
    expected = signature(secret, envelope.timestamp, envelope.message_id, body)
    if not hmac.compare_digest(expected, envelope.signature):
        raise SignatureRefused(SIGNATURE_HEADER, "does not match the body and the shared secret")
