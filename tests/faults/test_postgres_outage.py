"""PostgreSQL goes away under load (through a loopback proxy; the real server keeps running):
while it is away every request answers 503 problem+json with Retry-After, nothing is written in
part, and the service serves again once it is back, without a restart."""

from __future__ import annotations

import threading
import time

import pytest
from sqlalchemy.engine import make_url

from tests.factories import observation, setup_log
from tests.faults.proxy import Proxy
from tests.faults.served import (
    HITS_PER_BATCH,
    audit_verify,
    ids_of_batch,
    post_batch,
    rows_per_batch,
    start_gunicorn,
    stop,
)

CLIENTS = 3


@pytest.fixture
def postgres_url(database_url):
    if not database_url.startswith("postgresql"):
        pytest.skip("an outage of a database server: PostgreSQL only")
    return database_url


def test_outage_under_load_answers_503_and_recovers_without_restart(
    client, auth, tokens, postgres_url, tmp_path
):
    setup_log(client, auth)
    scans = [
        client.post(
            "/api/v1/observations",
            json=observation(cadence=f"PRA-outage-{n}"),
            headers=auth("pipeline"),
        ).get_json()["id"]
        for n in range(CLIENTS)
    ]
    real = make_url(postgres_url)
    proxy = Proxy(real.port or 5432)
    through_proxy = real.set(port=proxy.port).render_as_string(hide_password=False)
    secret = tokens["pipeline"]
    server, base = start_gunicorn(tmp_path, through_proxy)
    phase = {"name": "before"}
    answers: list[tuple[str, int, int, int, dict, dict]] = []
    halt = threading.Event()

    def pipeline(number: int) -> None:
        batch = 0
        while not halt.is_set():
            status, body, headers = post_batch(base, secret, scans[number], number, batch)
            answers.append((phase["name"], number, batch, status, body, headers))
            if status == 201:
                batch += 1
            else:
                time.sleep(0.05)

    threads = [threading.Thread(target=pipeline, args=(n,)) for n in range(CLIENTS)]
    try:
        for thread in threads:
            thread.start()
        _wait_for(lambda: sum(a[3] == 201 for a in answers) >= 6)
        proxy.take_down()
        time.sleep(0.5)  # requests in flight when the link was cut finish one way or another
        phase["name"] = "down"
        _wait_for(lambda: sum(a[0] == "down" for a in answers) >= 6)
        health = _get(base + "/healthz")
        proxy.bring_back()
        phase["name"] = "back"
        back_at = time.monotonic()
        _wait_for(lambda: sum(a[0] == "back" and a[3] == 201 for a in answers) >= 6)
        recovered_s = time.monotonic() - back_at
    finally:
        halt.set()
        for thread in threads:
            thread.join(timeout=60)
        stop(server)
        proxy.close()

    assert health[0] == 503 and int(health[1]["Retry-After"]) > 0
    while_down = [a for a in answers if a[0] == "down"]
    assert {a[3] for a in while_down} == {503}, {a[3] for a in while_down}
    for _, _, _, _, body, headers in while_down:
        assert headers["Content-Type"] == "application/problem+json"
        assert int(headers["Retry-After"]) > 0 and body["status"] == 503
    assert recovered_s < 30, "serves again soon after the database is back, without restart"
    acknowledged = {(a[1], a[2]): a[4]["ids"] for a in answers if a[3] == 201}
    for number, scan in enumerate(scans):
        held = rows_per_batch(postgres_url, scan, number)
        assert set(held.values()) <= {HITS_PER_BATCH}, f"a batch written in part: {held}"
        for (who, batch), ids in acknowledged.items():
            if who == number:
                assert ids_of_batch(postgres_url, scan, number, batch) == ids
        # a batch refused while down and then accepted is there once
        assert all(held.get(batch) == HITS_PER_BATCH for (w, batch) in acknowledged if w == number)
    verified = audit_verify(postgres_url, tmp_path / "instance")
    assert verified.returncode == 0, verified.stdout + verified.stderr


def _get(url: str) -> tuple[int, dict]:
    import urllib.error
    import urllib.request

    try:
        with urllib.request.urlopen(url, timeout=30) as answer:
            return answer.status, dict(answer.headers)
    except urllib.error.HTTPError as refused:
        return refused.code, dict(refused.headers)


def _wait_for(condition, limit_s: float = 90.0) -> None:
    """Poll until ``condition()`` holds; a bound on waiting, not a speed requirement."""
    deadline = time.monotonic() + limit_s
    while not condition():
        assert time.monotonic() < deadline, "condition not reached"
        time.sleep(0.05)
