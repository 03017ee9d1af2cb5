"""A protocol rebuilt from its stored record: the same hashes, and no files left behind."""

from __future__ import annotations

import tempfile

from confirm_service.actor import SYSTEM
from confirm_service.config import DEFAULT_PROTOCOL_FILE
from confirm_service.services import protocols


def test_stored_protocol_is_rebuilt_without_leaving_a_folder(db, tmp_path, monkeypatch):
    loaded = protocols.load_configured(DEFAULT_PROTOCOL_FILE)
    assert loaded.bands_sha256  # the shipped protocol names a band file
    with db.write() as session:
        protocols.ensure_recorded(session, SYSTEM, loaded)
    scratch = tmp_path / "scratch"
    scratch.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(scratch))
    monkeypatch.setattr(protocols, "_by_hash", {})  # force the rebuild from the record
    with db.read() as session:
        rebuilt = protocols.protocol_for(session, loaded.content_sha256, loaded.bands_sha256)
    assert (rebuilt.content_sha256, rebuilt.bands_sha256) == (
        loaded.content_sha256,
        loaded.bands_sha256,
    )
    assert rebuilt.bands == loaded.bands and rebuilt.model == loaded.model
    assert rebuilt.path is None and rebuilt.bands_path is None
    assert list(scratch.iterdir()) == []
