"""The scheduler: due work for a given time, checkpoints only when the log grew, and one leader
at a time with a standby that takes over when the leader is killed (real processes)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path

from click.testing import CliRunner
from sqlalchemy import select

from confirm_service.audit.checkpoints import latest_checkpoint
from confirm_service.cli import main
from confirm_service.cli.context import settings as cli_settings
from confirm_service.demo import SITES, SKY_FIXED_HZ, TARGETS, scenario_scans
from confirm_service.models import SchedulerRun
from confirm_service.scheduler.jobs import run_due, scheduled_checkpoint
from confirm_service.scheduler.leader import LeaderLock
from confirm_service.timeutil import utc_now
from tests.factories import setup_log


def test_scheduled_checkpoint_only_when_the_log_grew_over_the_interval(app, client, auth, db):
    settings = app.extensions["confirm.settings"]
    interval = timedelta(seconds=settings.checkpoint_interval_s)
    setup_log(client, auth)

    def signed_size(now: datetime) -> int | None:
        scheduled_checkpoint(db, settings, now)
        with db.read() as session:
            latest = latest_checkpoint(session)
        return None if latest is None else latest.tree_size

    first = signed_size(utc_now())
    assert first is not None and first > 0
    client.post(
        "/api/v1/targets",
        json={"name": "Harrow-3", "ra_deg": 312.0, "dec_deg": -48.3},
        headers=auth("coordinator"),
    )
    assert signed_size(utc_now()) == first  # grown, but the interval has not passed
    assert signed_size(utc_now() + interval) == first + 1


def test_only_one_scheduler_holds_the_lock(db, tmp_path):
    first, second = LeaderLock(db, tmp_path), LeaderLock(db, tmp_path)
    assert first.acquire()
    assert not second.acquire()
    first.release()
    assert second.acquire()
    second.release()


def _screening_candidate(client, auth):
    """One candidate in the first stage (its cadence incomplete), from the demo scenario."""
    for site in SITES:
        client.post("/api/v1/sites", json=site, headers=auth("coordinator"))
    for target in TARGETS:
        client.post("/api/v1/targets", json=target, headers=auth("coordinator"))
    _, first_scan = scenario_scans()[0]
    for hit in first_scan["detections"]:  # the pipeline flags the sky-fixed hit itself
        if abs(hit["frequency_hz"] - SKY_FIXED_HZ) < 1e3:
            hit["candidate"] = True
    created = client.post("/api/v1/observations", json=first_scan, headers=auth("pipeline"))
    assert created.status_code == 201, created.get_json()
    listing = client.get("/api/v1/candidates?state=open", headers=auth("viewer")).get_json()
    sky_fixed = [c for c in listing["items"] if c["stage"] == "screening"]
    assert sky_fixed
    return sky_fixed[0]


def test_run_due_expires_a_stage_past_its_deadline(app, client, auth, database_url):
    # protocols/default.toml: screening has deadline_hours = 72 and on_deadline = "expire".
    # The stage is entered when the candidate is created, now.
    candidate = _screening_candidate(client, auth)
    start = datetime.now(UTC)
    before = start + timedelta(hours=71)
    after = start + timedelta(hours=73)
    args = ["scheduler", "run-due", "--now"]
    env = {"CONFIRM_DATABASE_URL": database_url, "CONFIRM_INSTANCE_PATH": str(app.instance_path)}
    cli_settings.cache_clear()
    early = CliRunner().invoke(main, [*args, before.isoformat()], env=env)
    assert early.exit_code == 0, early.output
    url = f"/api/v1/candidates/{candidate['id']}"
    assert client.get(url, headers=auth("viewer")).get_json()["state"] == "open"
    late = CliRunner().invoke(main, [*args, after.isoformat()], env=env)
    cli_settings.cache_clear()
    assert late.exit_code == 0, late.output
    assert "deadlines: ok:" in late.output and "changed" in late.output
    shown = client.get(url, headers=auth("viewer")).get_json()
    assert shown["state"] == "rejected" and shown["reason_class"] == "expired"
    naive = CliRunner().invoke(main, [*args, "2026-11-20T00:00:00"], env=env)
    cli_settings.cache_clear()
    assert naive.exit_code == 2 and "offset" in naive.output


def test_every_run_is_logged_with_its_runner(app, db):
    runs = run_due(db, app.extensions["confirm.settings"], datetime.now().astimezone())
    assert {r.job for r in runs} >= {"deadlines", "stale-scans", "checkpoint"}
    assert all(r.outcome == "ok" for r in runs)
    with db.read() as session:
        logged = session.execute(select(SchedulerRun)).scalars().all()
    assert len(logged) == len(runs)
    assert {row.runner.rsplit(":", 1)[1] for row in logged} == {str(os.getpid())}
    assert all(row.finished_at is not None and row.outcome == "ok" for row in logged)


def _start_scheduler(database_url: str, instance: Path, log: Path) -> subprocess.Popen:
    env = dict(os.environ)
    env.update(
        CONFIRM_DATABASE_URL=database_url,
        CONFIRM_INSTANCE_PATH=str(instance),
        CONFIRM_SCHEDULER_TICK_S="0.2",
        CONFIRM_SCHEDULER_STANDBY_POLL_S="0.5",
        CONFIRM_CHECKPOINT_INTERVAL_S="3600",
    )
    script = Path(sys.executable).parent / "confirm-service"
    return subprocess.Popen(
        [str(script), "scheduler", "run"],
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=log.open("w"),
        start_new_session=True,
    )


def _runs(db) -> list[tuple[str, datetime]]:
    with db.read() as session:
        rows = session.execute(
            select(SchedulerRun.runner, SchedulerRun.started_at).order_by(SchedulerRun.id)
        ).all()
    return [(runner.rsplit(":", 1)[1], started) for runner, started in rows]


def _wait_for(condition, limit_s: float = 90.0) -> None:
    """Poll until ``condition()`` holds; a bound on waiting, not a speed requirement."""
    deadline = time.monotonic() + limit_s
    while not condition():
        assert time.monotonic() < deadline, "condition not reached"
        time.sleep(0.2)


def test_standby_waits_and_takes_over_when_the_leader_is_killed(database_url, db, tmp_path):
    leader = _start_scheduler(database_url, tmp_path / "instance", tmp_path / "a.log")
    standby = None
    try:
        _wait_for(lambda: any(pid == str(leader.pid) for pid, _ in _runs(db)))
        standby = _start_scheduler(database_url, tmp_path / "instance", tmp_path / "b.log")
        _wait_for(lambda: "standby" in (tmp_path / "b.log").read_text())
        seen = len(_runs(db))
        _wait_for(lambda: len(_runs(db)) >= seen + 5)
        assert standby.poll() is None, "the standby waits; it does not exit"
        assert {pid for pid, _ in _runs(db)} == {str(leader.pid)}
        os.kill(leader.pid, signal.SIGKILL)
        leader.wait()
        _wait_for(lambda: any(pid == str(standby.pid) for pid, _ in _runs(db)))
        runs = _runs(db)
        pids = [pid for pid, _ in runs]
        handover = pids.index(str(standby.pid))
        # Never both: every run before the hand-over is the leader's, every one after the
        # standby's, and the standby's first run starts after the leader's last.
        assert set(pids[:handover]) == {str(leader.pid)}
        assert set(pids[handover:]) == {str(standby.pid)}
        assert runs[handover][1] > runs[handover - 1][1]
    finally:
        for process in (leader, standby):
            if process is not None and process.poll() is None:
                process.terminate()
                process.wait(timeout=30)
