"""Sending one message: an HTTP POST of JSON (urllib) or an e-mail (smtplib), and when to retry.

No database here: the caller records each attempt and its result.
"""

from __future__ import annotations

import json
import random
import smtplib
import socket
import urllib.error
import urllib.request
from dataclasses import dataclass
from email.message import EmailMessage
from typing import Any

PERMANENT_STATUSES = frozenset({400, 401, 403, 404, 405, 410, 413, 415, 422})
"""Answers that will not change on retry: the message goes straight to the dead letters."""
ALREADY_RECEIVED = 409
"""The receiver has this message id already: it counts as delivered."""


@dataclass(frozen=True)
class Attempt:
    """The result of one try: delivered, or an error and whether retrying can help."""

    delivered: bool
    status_code: int | None
    error: str | None
    retry: bool
    response: dict[str, Any] | None = None


def _json_or_none(raw: bytes) -> dict[str, Any] | None:
    try:
        value = json.loads(raw.decode("utf-8")) if raw else None
    except (UnicodeDecodeError, json.JSONDecodeError):
        return None
    return value if isinstance(value, dict) else None


def post_json(url: str, body: bytes, headers: dict[str, str], timeout_s: float) -> Attempt:
    """POST ``body`` to ``url``; 2xx and 409 (already received) count as delivered."""
    request = urllib.request.Request(url, data=body, headers=headers, method="POST")
    try:
        with urllib.request.urlopen(request, timeout=timeout_s) as response:  # noqa: S310
            return Attempt(True, response.status, None, False, _json_or_none(response.read()))
    except urllib.error.HTTPError as exc:
        answer = _json_or_none(exc.read())
        if exc.code == ALREADY_RECEIVED:
            return Attempt(True, exc.code, None, False, answer)
        return Attempt(
            False, exc.code, f"HTTP {exc.code}", exc.code not in PERMANENT_STATUSES, answer
        )
    except TimeoutError:
        return Attempt(False, None, f"no answer within {timeout_s:g} s", True)
    except (urllib.error.URLError, OSError) as exc:
        reason = getattr(exc, "reason", exc)
        if isinstance(reason, TimeoutError | socket.timeout):
            return Attempt(False, None, f"no answer within {timeout_s:g} s", True)
        return Attempt(False, None, f"connection failed: {reason}", True)


def send_mail(
    host: str,
    port: int,
    sender: str,
    to: str,
    subject: str,
    text: str,
    timeout_s: float,
) -> Attempt:
    """Hand one plain-text e-mail to the SMTP server at ``host:port``."""
    message = EmailMessage()
    message["From"], message["To"], message["Subject"] = sender, to, subject
    message.set_content(text)
    try:
        with smtplib.SMTP(host, port, timeout=timeout_s) as smtp:
            smtp.send_message(message)
    except smtplib.SMTPResponseException as exc:
        permanent = 500 <= exc.smtp_code < 600
        return Attempt(False, exc.smtp_code, f"SMTP {exc.smtp_code}", not permanent)
    except (smtplib.SMTPException, OSError) as exc:
        return Attempt(False, None, f"SMTP failed: {exc}", True)
    return Attempt(True, 250, None, False)


def retry_delay_s(
    attempt: int, base_s: float, cap_s: float, rng: random.Random | None = None
) -> float:
    """Delay before try ``attempt + 1`` after ``attempt`` failures: exponential with jitter.

    ``min(cap, base * 2**(attempt-1))`` scaled by a random factor in [0.5, 1.0) ("equal
    jitter"), so that many senders that failed together do not retry together.
    """
    ceiling = min(cap_s, base_s * 2.0 ** max(attempt - 1, 0))
    return ceiling * (0.5 + 0.5 * (rng or random).random())
