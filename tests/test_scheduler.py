"""Scheduled work: checkpoints only when the log grew; one leader at a time on each backend."""

from __future__ import annotations

from confirm_service.audit.checkpoints import latest_checkpoint
from confirm_service.scheduler.jobs import scheduled_checkpoint, sweep_deadlines
from confirm_service.scheduler.leader import LeaderLock
from tests.factories import setup_log


def test_checkpoint_only_when_the_log_grew(app, client, auth, db):
    settings = app.extensions["confirm.settings"]
    setup_log(client, auth)
    first = scheduled_checkpoint(db, settings)
    assert first is not None and first > 0
    assert scheduled_checkpoint(db, settings) is None
    client.post(
        "/api/v1/targets",
        json={"name": "Harrow-3", "ra_deg": 312.0, "dec_deg": -48.3},
        headers=auth("coordinator"),
    )
    second = scheduled_checkpoint(db, settings)
    assert second == first + 1
    with db.read() as session:
        assert latest_checkpoint(session).tree_size == second
    assert sweep_deadlines(db) == 0


def test_only_one_scheduler_holds_the_lock(db, tmp_path):
    first, second = LeaderLock(db, tmp_path), LeaderLock(db, tmp_path)
    assert first.acquire()
    assert not second.acquire()
    first.release()
    assert second.acquire()
    second.release()
