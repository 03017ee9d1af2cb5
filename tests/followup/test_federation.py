"""Two instances of the service, each the other's partner, on two loopback ports with their own
SQLite databases: A's request reaches B signed, B's pipeline observes, B reports back signed,
and A's candidate passes independent_site from B's report alone."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

from confirm_service.actor import SYSTEM
from confirm_service.audit.checkpoints import set_up_signing_key
from confirm_service.config import load_settings
from confirm_service.db import Database, upgrade_database
from confirm_service.demo import SITES, TARGETS, SkyFixedSignal, first_window, scenario_scans
from confirm_service.followup import signing
from confirm_service.services.federation import set_partner_secret
from confirm_service.services.tokens import create_token

NORTH, SOUTH = SITES[0], SITES[1]  # PRA runs instance A, TFO runs instance B (both invented)
SHARED = "a-secret-only-the-two-instances-know-000"
SCRIPT = Path(sys.executable).parent / "confirm-service"


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


class Instance:
    """One service instance: its database, settings in the environment, a server process."""

    def __init__(self, folder: Path, code: str) -> None:
        folder.mkdir()
        self.port = free_port()
        self.url = f"http://127.0.0.1:{self.port}"
        self.database_url = f"sqlite:///{folder / 'service.db'}"
        self.env = {
            **os.environ,
            "CONFIRM_DATABASE_URL": self.database_url,
            "CONFIRM_INSTANCE_PATH": str(folder),
            "CONFIRM_SITE_CODE": code,
            "CONFIRM_PUBLIC_URL": self.url,
            "CONFIRM_FOLLOWUP_LEAD_TIME_S": str(30 * 86400),  # send at once
        }
        upgrade_database(self.database_url)
        self.db = Database(self.database_url)
        settings = load_settings({"database_url": self.database_url, "instance_path": folder})
        with self.db.read() as session:  # set-up, as `db upgrade` does: the signing key
            set_up_signing_key(session, settings)
        self.tokens: dict[str, str] = {}
        with self.db.write() as session:
            for role in ("coordinator", "pipeline"):
                _, self.tokens[role] = create_token(session, SYSTEM, f"{code}-{role}", role)
        self.log = (folder / "server.log").open("w")
        self.process: subprocess.Popen[bytes] | None = None

    def start(self) -> None:
        self.process = subprocess.Popen(
            [str(SCRIPT), "serve", "--host", "127.0.0.1", "--port", str(self.port)],
            env=self.env,
            stdout=self.log,
            stderr=subprocess.STDOUT,
        )

    def wait_ready(self) -> None:
        deadline = time.monotonic() + 120
        while True:
            try:
                with urllib.request.urlopen(self.url + "/healthz", timeout=2):
                    return
            except urllib.error.HTTPError:
                return  # the server answers
            except OSError:
                assert time.monotonic() < deadline, "server did not start"
                time.sleep(0.3)

    def call(self, method: str, path: str, role: str, body: Any = None) -> tuple[int, Any]:
        data = None if body is None else json.dumps(body).encode()
        request = urllib.request.Request(self.url + path, data=data, method=method)
        request.add_header("Authorization", f"Bearer {self.tokens[role]}")
        if data is not None:
            request.add_header("Content-Type", "application/json")
        try:
            with urllib.request.urlopen(request, timeout=60) as response:
                return response.status, json.loads(response.read() or b"null")
        except urllib.error.HTTPError as exc:
            return exc.code, json.loads(exc.read() or b"null")

    def run_due(self, now: datetime) -> str:
        done = subprocess.run(
            [str(SCRIPT), "scheduler", "run-due", "--now", now.isoformat()],
            env=self.env,
            capture_output=True,
            text=True,
            timeout=300,
        )
        assert done.returncode == 0, done.stdout + done.stderr
        return done.stdout

    def stop(self) -> None:
        if self.process is not None and self.process.poll() is None:
            self.process.terminate()
            self.process.wait(timeout=30)
        self.log.close()
        self.db.dispose()


def post_signed(url: str, body: dict[str, Any], message_id: str, secret: str, **skew: float):
    raw = json.dumps(body).encode()
    headers = signing.signed_headers(secret, "TFO", message_id, raw, time.time() + skew.get("s", 0))
    request = urllib.request.Request(url, data=raw, headers=headers, method="POST")
    try:
        with urllib.request.urlopen(request, timeout=30) as response:
            return response.status
    except urllib.error.HTTPError as exc:
        return exc.code


def test_two_instances_request_and_report_to_each_other(tmp_path):
    a, b = Instance(tmp_path / "a", "PRA"), Instance(tmp_path / "b", "TFO")
    try:
        a.start()
        b.start()
        a.wait_ready()
        b.wait_ready()
        inbox_a, inbox_b = a.url + "/federation/v1/messages", b.url + "/federation/v1/messages"
        for site in SITES[:2]:
            partner_hook = inbox_b if site["code"] == "TFO" else None
            assert (
                a.call(
                    "POST", "/api/v1/sites", "coordinator", {**site, "webhook_url": partner_hook}
                )[0]
                == 201
            )
            assert (
                b.call("POST", "/api/v1/sites", "coordinator", {**site, "webhook_url": None})[0]
                == 201
            )
        assert a.call("POST", "/api/v1/targets", "coordinator", TARGETS[0])[0] == 201
        with b.db.write() as session:  # a site token names a registered site
            _, b.tokens["site"] = create_token(session, SYSTEM, "TFO-site", "site", "TFO")
        with a.db.write() as session:
            set_partner_secret(session, SYSTEM, "TFO", SHARED)
        with b.db.write() as session:
            set_partner_secret(session, SYSTEM, "PRA", SHARED)

        # A: the discovery cadence and the re-observation; only PRA has seen the signal.
        scans = [s for _, s in scenario_scans()[:-1]]
        for scan in scans:
            assert a.call("POST", "/api/v1/observations", "pipeline", scan)[0] == 201
        status, listing = a.call("GET", "/api/v1/candidates?state=open", "coordinator")
        (candidate,) = listing["items"]
        assert candidate["stage"] == "independent_site"

        # A's scheduler drafts the request to TFO and delivers it, signed, to B's inbox.
        a.run_due(datetime(2026, 11, 23, tzinfo=UTC))  # fixed: windows do not depend on the date
        _, requests = a.call("GET", f"/api/v1/followups?candidate={candidate['id']}", "coordinator")
        (to_b,) = [r for r in requests["items"] if r["site"] == "TFO"]
        assert to_b["status"] == "acknowledged" and to_b["remote_id"]
        _, incoming = b.call("GET", "/api/v1/followups?direction=inbound", "coordinator")
        (at_b,) = incoming["items"]
        assert at_b["remote_site"] == "PRA" and at_b["payload"]["windows"]
        assert at_b["payload"]["target"]["name"] == TARGETS[0]["name"]

        # B's pipeline observes the target (an earlier night, so the scan is not in the
        # future) and sees the invented transmitter at the frequency predicted for TFO.
        first = datetime.fromisoformat(scans[0]["start"])
        signal = SkyFixedSignal(NORTH, TARGETS[0], first + timedelta(seconds=60))
        look = first_window(SOUTH, TARGETS[0], first + timedelta(hours=24), 300.0)
        hit = signal.seen_at(SOUTH, look + timedelta(seconds=120), 15.5)
        scan = {
            "site": "TFO",
            "target": TARGETS[0]["name"],
            "start": look.isoformat(),
            "duration_s": 300.0,
            "frequency_min_hz": 1.40e9,
            "frequency_max_hz": 1.45e9,
            "channel_width_hz": 3.81,
            "time_resolution_s": 12.5,
            "on_source": True,
            "detections": [
                {**hit, "time_offset_s": 120.0},
                {"frequency_hz": 1.4123e9, "drift_hz_s": 0.3, "snr": 7.0},  # unrelated
            ],
        }
        status, observed = b.call("POST", "/api/v1/observations", "pipeline", scan)
        assert status == 201, observed
        report = {"observation_id": observed["id"], "detected": True, "threshold_snr": 10.0}
        status, queued = b.call("POST", f"/api/v1/followups/{at_b['id']}/reports", "site", report)
        assert status == 202, queued
        b.run_due(datetime.now(UTC))

        _, after = a.call("GET", f"/api/v1/candidates/{candidate['id']}", "coordinator")
        check = next(c for c in after["checks"] if c["kind"] == "independent_site")
        assert check["outcome"] == "pass" and "TFO" in check["reason"], check
        assert after["stage"] == "review"
        assert [r["site"] for r in after["reports"]] == ["TFO"]
        _, shown = a.call("GET", f"/api/v1/followups/{to_b['id']}", "coordinator")
        assert shown["status"] == "reported"
        _, relayed = b.call("GET", f"/api/v1/followups/{at_b['id']}", "coordinator")
        assert relayed["status"] == "reported"
        assert [m["status"] for m in relayed["messages"]] == ["delivered"]

        # A's inbox refuses a replayed id, a bad signature and a stale timestamp.
        probe = {"kind": "followup.unknown"}
        assert post_signed(inbox_a, probe, relayed["messages"][0]["message_id"], SHARED) == 409
        assert post_signed(inbox_a, probe, "fresh-1", "not-the-secret") == 401
        assert post_signed(inbox_a, probe, "fresh-2", SHARED, s=-400) == 401
    finally:
        a.stop()
        b.stop()
