"""gunicorn's own error answers in the API's shape (RFC 9457 problem details).

gunicorn answers a request it cannot parse (header fields too large, a bad request line, a bad
chunk) itself, before the application sees it, with a small HTML page written by
``gunicorn.util.write_error``. :func:`answer_gunicorn_errors_as_problems` replaces that function
in the worker, so such answers keep their status and reason but carry an
``application/problem+json`` body. ``deploy/gunicorn.conf.py`` calls it after each worker forks.

What no setting changes: a worker that exceeds gunicorn's ``timeout`` is killed by the master
and the client sees the connection close with no answer at all, and a TLS failure before any
HTTP is read has nobody to answer. The service keeps its own work well inside the timeout.
"""

from __future__ import annotations

import json
from typing import Any

PROBLEM_MEDIA_TYPE = "application/problem+json"


def problem_bytes(status: int, reason: str, message: str) -> bytes:
    """A complete HTTP/1.1 answer with a problem-details body; the connection closes after it."""
    body: dict[str, Any] = {"type": "about:blank", "title": reason, "status": status}
    if message:
        body["detail"] = message
    body["errors"] = []
    payload = json.dumps(body).encode("utf-8")
    head = (
        f"HTTP/1.1 {status} {reason}\r\n"
        "Connection: close\r\n"
        f"Content-Type: {PROBLEM_MEDIA_TYPE}\r\n"
        f"Content-Length: {len(payload)}\r\n"
        "\r\n"
    )
    return head.encode("latin-1") + payload


def answer_gunicorn_errors_as_problems() -> None:
    """Make gunicorn write its error answers as problem details (call in the worker)."""
    from gunicorn import util

    def write_problem(sock: Any, status_int: int, reason: str, mesg: str) -> None:
        util.write_nonblock(sock, problem_bytes(int(status_int), reason, mesg))

    util.write_error = write_problem
