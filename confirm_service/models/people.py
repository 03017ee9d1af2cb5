"""People who sign in to the web pages with a name and a password.

Each person is bound to one API token row of their own (``token_id``) whose secret is never
shown: sign-offs, comments and audit entries therefore name one person and one token, as for a
machine. Only an scrypt hash of the password is stored.
"""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import ForeignKey, Integer, String
from sqlalchemy.orm import Mapped, mapped_column

from confirm_service.models.base import Base
from confirm_service.timeutil import utc_now

PERSON_ROLES = ("coordinator", "viewer", "admin")


class Person(Base):
    """A person's account for the web pages."""

    __tablename__ = "people"

    id: Mapped[int] = mapped_column(primary_key=True)
    username: Mapped[str] = mapped_column(String(64), unique=True)
    display_name: Mapped[str] = mapped_column(String(200))
    role: Mapped[str] = mapped_column(String(32))
    password_hash: Mapped[str] = mapped_column(String(300))
    token_id: Mapped[int] = mapped_column(ForeignKey("api_tokens.id"), unique=True)
    failed_sign_ins: Mapped[int] = mapped_column(Integer, default=0)
    locked_until: Mapped[datetime | None]
    last_sign_in_at: Mapped[datetime | None]
    disabled_at: Mapped[datetime | None]
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
