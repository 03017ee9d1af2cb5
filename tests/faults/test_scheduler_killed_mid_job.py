"""The scheduler leader is killed (SIGKILL) while its deadline sweep waits inside the job; the
standby takes over and the job's effect happens exactly once: one expiry of the candidate whose
stage deadline has passed, none lost, none twice, and the audit log verifies."""

from __future__ import annotations

import os
import signal
import threading
from datetime import timedelta

from sqlalchemy import func, select, text, update

from confirm_service.models import Candidate, SchedulerRun, StageTransition
from confirm_service.timeutil import utc_now
from tests.faults.served import audit_verify
from tests.test_scheduler import _screening_candidate, _start_scheduler, _wait_for


def _expiries(db, candidate_id: int) -> int:
    with db.read() as session:
        return session.execute(
            select(func.count())
            .select_from(StageTransition)
            .where(
                StageTransition.candidate_id == candidate_id,
                StageTransition.reason_class == "expired",
            )
        ).scalar_one()


def _runs(db, job: str) -> list[tuple[str, bool]]:
    """(process id, finished) of every run of ``job``, in order."""
    with db.read() as session:
        rows = session.execute(
            select(SchedulerRun.runner, SchedulerRun.finished_at)
            .where(SchedulerRun.job == job)
            .order_by(SchedulerRun.id)
        ).all()
    return [(runner.rsplit(":", 1)[1], finished is not None) for runner, finished in rows]


def test_a_job_interrupted_by_kill_9_runs_exactly_once_after_hand_over(
    client, auth, db, database_url, tmp_path
):
    # protocols/default.toml: the screening stage expires 72 h after entry.
    candidate = _screening_candidate(client, auth)
    before = _expiries(db, candidate["id"])
    instance = tmp_path / "instance"
    leader = _start_scheduler(database_url, instance, tmp_path / "a.log")
    standby = None
    holding = threading.Event()
    release = threading.Event()

    def hold_the_candidate() -> None:
        """Keep the candidate row (SQLite: the whole database) locked until ``release``."""
        with db.write() as session:
            if db.is_sqlite:
                session.execute(text("UPDATE audit_head SET size = size WHERE id = 1"))
            session.execute(
                select(Candidate.id).where(Candidate.id == candidate["id"]).with_for_update()
            )
            session.execute(
                update(Candidate)
                .where(Candidate.id == candidate["id"])
                .values(stage_entered_at=utc_now() - timedelta(hours=73))
            )
            holding.set()
            release.wait(120)

    try:
        _wait_for(lambda: any(pid == str(leader.pid) for pid, _ in _runs(db, "deadlines")))
        standby = _start_scheduler(database_url, instance, tmp_path / "b.log")
        _wait_for(lambda: "standby" in (tmp_path / "b.log").read_text())
        holder = threading.Thread(target=hold_the_candidate)
        holder.start()
        holding.wait(60)
        seen = len(_runs(db, "deadlines"))
        if not db.is_sqlite:  # PostgreSQL: the leader's run is logged, then waits in the job
            _wait_for(lambda: len(_runs(db, "deadlines")) > seen)
            assert _runs(db, "deadlines")[-1] == (str(leader.pid), False)
        else:  # SQLite: every write waits; give the leader's next tick (every 1 s) time to come
            threading.Event().wait(2.0)
        os.kill(leader.pid, signal.SIGKILL)
        leader.wait()
        release.set()  # the deadline is now 73 h past, committed
        holder.join()
        assert _expiries(db, candidate["id"]) == before, "the killed run wrote nothing"
        try:  # a bound on waiting for the hand-over, generous for a loaded CI machine
            _wait_for(lambda: _expiries(db, candidate["id"]) > before, limit_s=240.0)
        except AssertionError:
            tail = (tmp_path / "b.log").read_text()[-3000:]
            raise AssertionError(
                f"the standby never expired the candidate; its log:\n{tail}"
            ) from None
        runs_after = len(_runs(db, "deadlines"))
        _wait_for(lambda: len(_runs(db, "deadlines")) >= runs_after + 3)  # more sweeps
        assert _expiries(db, candidate["id"]) == before + 1
        with db.read() as session:
            assert session.get(Candidate, candidate["id"]).state == "rejected"
        assert {pid for pid, _ in _runs(db, "deadlines")[seen + 1 :]} <= {str(standby.pid)}
    finally:
        release.set()
        for process in (leader, standby):
            if process is not None and process.poll() is None:
                process.terminate()
                process.wait(timeout=30)
    verified = audit_verify(database_url, instance)
    assert verified.returncode == 0, verified.stdout + verified.stderr
