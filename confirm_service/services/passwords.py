"""Password hashing with scrypt (RFC 7914) from the standard library.

Parameters follow the OWASP Password Storage Cheat Sheet minimum for scrypt (N=2^17, r=8, p=1);
they are stored in each hash, so raising them later keeps old hashes verifiable.
"""

from __future__ import annotations

import base64
import hashlib
import hmac
import secrets
from functools import cache

SCRYPT_N, SCRYPT_R, SCRYPT_P = 2**17, 8, 1
KEY_BYTES = 32
SALT_BYTES = 16
MIN_PASSWORD_CHARS = 12


def _b64(raw: bytes) -> str:
    return base64.b64encode(raw).decode("ascii")


def _derive(password: str, salt: bytes, n: int, r: int, p: int, length: int = KEY_BYTES) -> bytes:
    memory = 128 * n * r * p + 2**20  # scrypt needs 128·N·r bytes (RFC 7914 section 6)
    return hashlib.scrypt(
        password.encode("utf-8"), salt=salt, n=n, r=r, p=p, maxmem=memory, dklen=length
    )


def hash_password(password: str) -> str:
    """``scrypt$N$r$p$salt$key`` (salt and key in base64)."""
    salt = secrets.token_bytes(SALT_BYTES)
    key = _derive(password, salt, SCRYPT_N, SCRYPT_R, SCRYPT_P)
    return f"scrypt${SCRYPT_N}${SCRYPT_R}${SCRYPT_P}${_b64(salt)}${_b64(key)}"


def verify_password(password: str, stored: str) -> bool:
    """Whether ``password`` matches ``stored``, compared in constant time."""
    try:
        scheme, n, r, p, salt, key = stored.split("$")
        if scheme != "scrypt":
            return False
        expected = base64.b64decode(key)
        derived = _derive(password, base64.b64decode(salt), int(n), int(r), int(p), len(expected))
    except (ValueError, TypeError):
        return False
    return hmac.compare_digest(derived, expected)


@cache
def _decoy() -> str:
    return hash_password(secrets.token_urlsafe(16))


def spend_like_a_check(password: str) -> None:
    """Take as long as a real check, so an unknown name is not told apart by timing."""
    verify_password(password, _decoy())


def password_problem(password: str, username: str) -> str | None:
    """Why ``password`` is refused for ``username``, or None."""
    if len(password) < MIN_PASSWORD_CHARS:
        return f"must be at least {MIN_PASSWORD_CHARS} characters"
    if username.lower() in password.lower():
        return "must not contain the user name"
    return None
