"""Which protocol governs a candidate, and the record of every protocol file used.

New candidates are evaluated under the configured protocol file. A candidate keeps the protocol
(and band file) it was created under, by content hash, until an admin adopts another one for it:
editing a file on disk never silently changes a past decision.
"""

from __future__ import annotations

import tempfile
import threading
from dataclasses import replace
from pathlib import Path

from sqlalchemy import select, update
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.config import ConfigError
from confirm_service.errors import NotFound
from confirm_service.models import Candidate, ProtocolRecord
from confirm_service.protocol import LoadedProtocol, ProtocolError, load_protocol

_lock = threading.Lock()
_by_hash: dict[tuple[str, str], LoadedProtocol] = {}
_by_path: dict[Path, tuple[float, int, LoadedProtocol]] = {}


def load_configured(path: Path) -> LoadedProtocol:
    """The protocol file at ``path``, validated; reloaded when the file changes on disk."""
    path = Path(path).resolve()
    try:
        stat = path.stat()
    except OSError as exc:
        raise ConfigError(f"protocol file {path}: {exc.strerror}") from None
    with _lock:
        cached = _by_path.get(path)
        if cached and cached[0] == stat.st_mtime and cached[1] == stat.st_size:
            return cached[2]
    try:
        loaded = load_protocol(path)
    except ProtocolError as exc:
        first = exc.problems[0] if getattr(exc, "problems", None) else None
        where = f"{first.key_path}: {first.message}" if first else str(exc)
        count = len(getattr(exc, "problems", []) or [])
        raise ConfigError(
            f"protocol file {path} is invalid ({count} problem(s)); first: {where}"
        ) from None
    with _lock:
        _by_path[path] = (stat.st_mtime, stat.st_size, loaded)
        _by_hash[(loaded.content_sha256, loaded.bands_sha256)] = loaded
    return loaded


def ensure_recorded(session: Session, actor: Actor, loaded: LoadedProtocol) -> ProtocolRecord:
    """The stored record of ``loaded``; created (with an audit entry) the first time."""
    found = session.execute(
        select(ProtocolRecord).where(
            ProtocolRecord.sha256 == loaded.content_sha256,
            ProtocolRecord.bands_sha256 == loaded.bands_sha256,
        )
    ).scalar_one_or_none()
    if found is not None:
        return found
    relative = loaded.model.interference_bands
    bands_text = loaded.bands_path.read_text(encoding="utf-8") if loaded.bands_path else None
    row = ProtocolRecord(
        name=loaded.name,
        version=loaded.version,
        sha256=loaded.content_sha256,
        source_text=loaded.source_text,
        bands_sha256=loaded.bands_sha256,
        bands_relative_path=relative,
        bands_text=bands_text,
    )
    session.add(row)
    session.flush()
    record(
        session,
        actor,
        "protocol.loaded",
        f"protocol:{loaded.name}",
        {
            "name": loaded.name,
            "version": loaded.version,
            "sha256": loaded.content_sha256,
            "bands_sha256": loaded.bands_sha256,
            "path": str(loaded.path) if loaded.path else None,
        },
    )
    return row


def mark_active(session: Session, record_row: ProtocolRecord) -> None:
    session.execute(update(ProtocolRecord).values(active=False))
    record_row.active = True


def _materialise(row: ProtocolRecord) -> LoadedProtocol:
    """Rebuild a LoadedProtocol from its stored texts (identical hashes by construction).

    The texts are written to a temporary folder only while they are read; the result points at
    no file (``path`` and ``bands_path`` are None), as the folder is gone when it is returned.
    """
    with tempfile.TemporaryDirectory(prefix="confirm-protocol-") as temporary:
        folder = Path(temporary)
        protocol_path = folder / "protocol.toml"
        protocol_path.write_bytes(row.source_text.encode("utf-8"))
        if row.bands_relative_path and row.bands_text is not None:
            bands_path = folder / row.bands_relative_path
            bands_path.parent.mkdir(parents=True, exist_ok=True)
            bands_path.write_bytes(row.bands_text.encode("utf-8"))
        loaded = load_protocol(protocol_path)
    return replace(loaded, path=None, bands_path=None)


def protocol_for(session: Session, sha256: str, bands_sha256: str) -> LoadedProtocol:
    """The exact protocol a candidate was evaluated under, from memory or from its record."""
    key = (sha256, bands_sha256)
    with _lock:
        if key in _by_hash:
            return _by_hash[key]
    row = session.execute(
        select(ProtocolRecord).where(
            ProtocolRecord.sha256 == sha256, ProtocolRecord.bands_sha256 == bands_sha256
        )
    ).scalar_one_or_none()
    if row is None:
        raise NotFound(f"no stored protocol with hash {sha256}", [("protocol", "unknown hash")])
    loaded = _materialise(row)
    with _lock:
        _by_hash[key] = loaded
    return loaded


def active_record(session: Session) -> ProtocolRecord | None:
    return session.execute(
        select(ProtocolRecord).where(ProtocolRecord.active.is_(True))
    ).scalar_one_or_none()


def configured_protocol(session: Session | None = None) -> LoadedProtocol:
    """The protocol for new candidates: one an admin adopted, else the configured file."""
    from confirm_service.services import runtime

    if session is not None:
        adopted = active_record(session)
        if adopted is not None:
            return protocol_for(session, adopted.sha256, adopted.bands_sha256)
    return load_configured(runtime.settings().protocol_file)


def protocol_of(session: Session, candidate: Candidate) -> LoadedProtocol:
    """The protocol a candidate was created under (or adopted for it), by content hash."""
    return protocol_for(session, candidate.protocol_sha256, candidate.bands_sha256)
