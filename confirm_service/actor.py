"""Who is acting: a token's name and role, or the service itself."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Actor:
    name: str
    role: str
    token_id: int | None = None
    site_code: str | None = None


SYSTEM = Actor(name="confirm-service", role="system")
