"""Escalations and stage changes reach the protocol's contacts by e-mail (a real local SMTP
sink, aiosmtpd) and by webhook (a real loopback server); every message is listed per candidate."""

from __future__ import annotations

import dataclasses
import json
import socket
from datetime import UTC, datetime, timedelta
from email import message_from_bytes, policy

from aiosmtpd.controller import Controller

from confirm_service.scheduler.jobs import run_due
from tests.followup.loopback import Recorder
from tests.followup.test_request_flow import at_independent_site


class Sink:
    def __init__(self) -> None:
        self.messages: list[tuple[list[str], bytes]] = []

    async def handle_DATA(self, server, session, envelope):  # noqa: N802 - aiosmtpd's naming
        self.messages.append((list(envelope.rcpt_tos), envelope.content))
        return "250 OK"


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def test_stage_change_and_escalation_reach_contacts(app, client, auth, db, tmp_path):
    candidate, _ = at_independent_site(client, auth)
    sink, port = Sink(), free_port()
    controller = Controller(sink, hostname="127.0.0.1", port=port)
    controller.start()
    try:
        with Recorder(200) as chat:
            contacts = tmp_path / "contacts.toml"
            contacts.write_text(
                "[contacts.coordinator-on-duty]\n"
                'email = "duty@pell-ridge.example"\n'
                f'webhook_url = "{chat.url}"\n'
            )
            settings = dataclasses.replace(
                app.extensions["confirm.settings"],
                smtp_host="127.0.0.1",
                smtp_port=port,
                contacts_file=contacts,
                public_url="https://confirm.pell-ridge.example",
            )
            now = datetime.now(UTC)
            run_due(db, settings, now)  # the candidate's recent stage changes
            # default.toml: independent_site has deadline_hours = 720, on_deadline = "escalate".
            run_due(db, settings, now + timedelta(hours=721))
            run_due(db, settings, now + timedelta(hours=721, minutes=1))
            hooks = [json.loads(body) for _, body in chat.received]
    finally:
        controller.stop()
    mails = [message_from_bytes(content, policy=policy.default) for _, content in sink.messages]
    subjects = [" ".join(str(mail["Subject"]).split()) for mail in mails]  # unfolded
    assert any(f"Candidate {candidate['id']} moved from stage" in s for s in subjects)
    escalations = [s for s in subjects if "deadline of stage 'independent_site' passed" in s]
    assert len(escalations) == 1
    assert all(to == ["duty@pell-ridge.example"] for to, _ in sink.messages)
    link = f"https://confirm.pell-ridge.example/dashboard/candidates/{candidate['id']}"
    assert all(link in mail.get_content() for mail in mails)
    assert {h["subject"] for h in hooks} == set(subjects) and all(h["link"] == link for h in hooks)
    listed = client.get(f"/api/v1/candidates/{candidate['id']}/messages", headers=auth("viewer"))
    notices = [m for m in listed.json if m["kind"].startswith("notice.")]
    assert len(notices) == 2 * len(subjects)
    assert {m["status"] for m in notices} == {"delivered"} and {m["channel"] for m in notices} == {
        "email",
        "webhook",
    }
