"""When the service signs audit checkpoints: at the configured interval once the log grew, and at
once when a candidate moved, pinning the decided ones. Nothing signs on commit by itself.

The signatures themselves are checked against RFC 8032 in tests/audit/test_log_db.py.
"""

from __future__ import annotations

from dataclasses import replace
from datetime import UTC, datetime, timedelta

import pytest
from sqlalchemy import func, select

from confirm_service.actor import Actor
from confirm_service.audit import checkpoints, log
from confirm_service.models import AuditCheckpoint, Candidate
from confirm_service.services.checkpointing import checkpoint_if_due
from confirm_service.states import CandidateState

T0 = datetime(2031, 4, 5, 6, 0, tzinfo=UTC)  # invented moment
INTERVAL_S = 600.0
ANALYST = Actor(name="analyst-q", role="coordinator")  # invented person


@pytest.fixture
def settings(app):
    return replace(app.extensions["confirm.settings"], checkpoint_interval_s=INTERVAL_S)


@pytest.fixture
def signing_clock(monkeypatch):
    """The moment a checkpoint is signed at; tests move it by hand."""
    now = {"at": T0}
    monkeypatch.setattr(checkpoints, "utc_now", lambda: now["at"])
    return now


def append(db, count: int) -> None:
    with db.write() as session:
        for i in range(count):
            log.record(session, ANALYST, "site.created", f"site:{i}", {"n": i})


def due(db, settings, now: datetime, moved=()) -> int | None:
    """Run the explicit step in its own transaction; the tree size it signed, or None."""
    with db.write() as session:
        checkpoint = checkpoint_if_due(session, settings, now, "test", moved)
        return None if checkpoint is None else checkpoint.tree_size


def signed(db) -> int:
    with db.read() as session:
        return session.execute(select(func.count()).select_from(AuditCheckpoint)).scalar_one()


def test_a_grown_log_is_signed_once_the_interval_has_passed(db, settings, signing_clock):
    assert due(db, settings, T0) is None  # an empty log needs no checkpoint
    append(db, 3)
    assert due(db, settings, T0) == 3  # the first entries: nothing signed them yet
    append(db, 2)
    assert due(db, settings, T0 + timedelta(seconds=INTERVAL_S - 1)) is None
    signing_clock["at"] = T0 + timedelta(seconds=INTERVAL_S)
    assert due(db, settings, signing_clock["at"]) == 5
    later = signing_clock["at"] + timedelta(seconds=10 * INTERVAL_S)
    assert due(db, settings, later) is None  # unchanged log: nothing new to sign
    assert signed(db) == 2


def test_committing_entries_signs_nothing_by_itself(db, settings, signing_clock):
    append(db, 4)
    assert signed(db) == 0


def test_a_moved_candidate_is_signed_at_once_and_a_decided_one_pinned(db, settings, signing_clock):
    append(db, 2)
    assert due(db, settings, T0) == 2
    append(db, 1)
    decided = Candidate(state=CandidateState.WITHDRAWN)
    still_open = Candidate(state=CandidateState.OPEN)
    # well inside the interval, but the move's entries must be under a signed root
    assert due(db, settings, T0 + timedelta(seconds=1), [decided, still_open]) == 3
    assert decided.decision_checkpoint_size == 3
    assert still_open.decision_checkpoint_size is None
