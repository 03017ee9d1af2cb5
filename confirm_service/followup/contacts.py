"""Who a protocol contact is: an e-mail address, a webhook URL, or a name in the contacts file.

The contacts file (TOML, ``CONFIRM_CONTACTS_FILE``) maps names to addresses::

    [contacts.coordinator-on-duty]
    email = "duty@example.org"
    webhook_url = "https://chat.example.org/hooks/duty"
"""

from __future__ import annotations

import tomllib
from pathlib import Path


def load_directory(path: Path | None) -> dict[str, dict[str, str]]:
    """Name -> {"email": ..., "webhook_url": ...}; empty without a file."""
    if path is None:
        return {}
    raw = tomllib.loads(Path(path).read_text(encoding="utf-8"))
    contacts = raw.get("contacts", {})
    return {str(name): {k: str(v) for k, v in entry.items()} for name, entry in contacts.items()}


def addresses(contact: str, directory: dict[str, dict[str, str]]) -> list[tuple[str, str]]:
    """(channel, destination) pairs for one contact: ``email`` and/or ``webhook``."""
    if contact.startswith(("http://", "https://")):
        return [("webhook", contact)]
    if "@" in contact:
        return [("email", contact)]
    entry = directory.get(contact, {})
    found = []
    if entry.get("email"):
        found.append(("email", entry["email"]))
    if entry.get("webhook_url"):
        found.append(("webhook", entry["webhook_url"]))
    return found
