"""Real HTTP servers on 127.0.0.1 for delivery tests: they record what they receive."""

from __future__ import annotations

import json
import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from typing import Any


class Recorder:
    """A loopback server answering every POST with ``status`` (or never, with ``hang``)."""

    def __init__(self, status: int = 200, answer: dict[str, Any] | None = None, hang: bool = False):
        self.status, self.answer, self.hang = status, answer or {}, hang
        self.received: list[tuple[dict[str, str], bytes]] = []
        self.release = threading.Event()
        recorder = self

        class Handler(BaseHTTPRequestHandler):
            def do_POST(self) -> None:  # noqa: N802 - http.server's naming
                length = int(self.headers.get("Content-Length", "0"))
                body = self.rfile.read(length)
                recorder.received.append((dict(self.headers.items()), body))
                if recorder.hang:
                    recorder.release.wait(30)
                    return
                payload = json.dumps(recorder.answer).encode()
                self.send_response(recorder.status)
                self.send_header("Content-Type", "application/json")
                self.send_header("Content-Length", str(len(payload)))
                self.end_headers()
                self.wfile.write(payload)

            def log_message(self, *args: Any) -> None:
                return

        self.server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.server.daemon_threads = True
        self.thread = threading.Thread(target=self.server.serve_forever, daemon=True)

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.server.server_address[1]}/hook"

    def __enter__(self) -> Recorder:
        self.thread.start()
        return self

    def __exit__(self, *exc: Any) -> None:
        self.release.set()
        self.server.shutdown()
        self.server.server_close()
