"""kill -9 of gunicorn (master and workers) while several pipeline clients post hit batches,
on each backend: every acknowledged batch is stored whole, no batch is stored in part, resending
every batch with its Idempotency-Key after a restart duplicates nothing, and the audit log
verifies."""

from __future__ import annotations

import threading
import time

from tests.factories import observation, setup_log
from tests.faults.served import (
    HITS_PER_BATCH,
    Pipeline,
    audit_verify,
    ids_of_batch,
    kill_hard,
    post_batch,
    rows_per_batch,
    start_gunicorn,
    stop,
)

CLIENTS = 4
BATCH_LIMIT = 400
ACKNOWLEDGED_BEFORE_KILL = 24


def test_kill_9_during_ingest_from_several_clients(client, auth, tokens, database_url, tmp_path):
    setup_log(client, auth)
    scans = []
    for number in range(CLIENTS):
        made = client.post(
            "/api/v1/observations",
            json=observation(cadence=f"PRA-fault-{number}", pipeline_run=f"fault-{number}"),
            headers=auth("pipeline"),
        )
        assert made.status_code == 201, made.get_json()
        scans.append(made.get_json()["id"])
    secret = tokens["pipeline"]
    pipelines = [Pipeline(number, scan) for number, scan in enumerate(scans)]

    server, base = start_gunicorn(tmp_path, database_url)
    halt = threading.Event()
    threads = [
        threading.Thread(target=p.run, args=(base, secret, halt, BATCH_LIMIT)) for p in pipelines
    ]
    try:
        for thread in threads:
            thread.start()
        deadline = time.monotonic() + 120
        while sum(len(p.acknowledged) for p in pipelines) < ACKNOWLEDGED_BEFORE_KILL:
            assert time.monotonic() < deadline, "the clients made no progress"
            time.sleep(0.02)
        kill_hard(server)  # while every client has a batch in flight or about to be
        for thread in threads:
            thread.join(timeout=60)
    finally:
        halt.set()
        stop(server)
    for p in pipelines:
        assert p.refusals == [], p.refusals
        assert p.attempted > len(p.acknowledged) or p.attempted == BATCH_LIMIT

    # After the kill: acknowledged batches whole, every batch whole or absent.
    for p in pipelines:
        held = rows_per_batch(database_url, p.observation_id, p.client)
        assert set(held.values()) <= {HITS_PER_BATCH}, f"a partial batch: {held}"
        for batch, ids in p.acknowledged.items():
            assert held.get(batch) == HITS_PER_BATCH
            assert ids_of_batch(database_url, p.observation_id, p.client, batch) == ids

    # Restart and resend every attempted batch with its key: replays answer the first ids.
    server, base = start_gunicorn(tmp_path, database_url)
    try:
        for p in pipelines:
            for batch in range(p.attempted):
                status, body, headers = post_batch(base, secret, p.observation_id, p.client, batch)
                assert status == 201, body
                if batch in p.acknowledged:
                    assert headers.get("Idempotent-Replayed") == "true"
                    assert body["ids"] == p.acknowledged[batch]
    finally:
        stop(server)
    for p in pipelines:
        held = rows_per_batch(database_url, p.observation_id, p.client)
        assert held == dict.fromkeys(range(p.attempted), HITS_PER_BATCH)
    verified = audit_verify(database_url, tmp_path / "instance")
    assert verified.returncode == 0, verified.stdout + verified.stderr
