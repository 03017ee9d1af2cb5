"""A loopback TCP proxy in front of PostgreSQL that the test can take down and bring back.

The machine's PostgreSQL is never stopped (other tests use it): "down" closes every connection
through the proxy and refuses new ones, which is what clients see when the server stops.
"""

from __future__ import annotations

import socket
import threading
from contextlib import suppress


class Proxy:
    def __init__(self, target_port: int, target_host: str = "127.0.0.1") -> None:
        self.target = (target_host, target_port)
        self.listener = socket.create_server(("127.0.0.1", 0))
        self.port = self.listener.getsockname()[1]
        self.up = True
        self._open: set[socket.socket] = set()
        self._lock = threading.Lock()
        self._closed = False
        threading.Thread(target=self._accept, daemon=True).start()

    def _accept(self) -> None:
        while not self._closed:
            try:
                incoming, _ = self.listener.accept()
            except OSError:
                return
            if not self.up:
                incoming.close()  # refused while down
                continue
            try:
                outgoing = socket.create_connection(self.target, timeout=5)
            except OSError:
                incoming.close()
                continue
            with self._lock:
                self._open |= {incoming, outgoing}
            for source, sink in ((incoming, outgoing), (outgoing, incoming)):
                threading.Thread(target=self._pipe, args=(source, sink), daemon=True).start()

    def _pipe(self, source: socket.socket, sink: socket.socket) -> None:
        with suppress(OSError):
            while chunk := source.recv(65536):
                sink.sendall(chunk)
        for end in (source, sink):
            self._drop(end)

    def _drop(self, end: socket.socket) -> None:
        with self._lock:
            self._open.discard(end)
        with suppress(OSError):
            end.shutdown(socket.SHUT_RDWR)
        with suppress(OSError):
            end.close()

    def take_down(self) -> None:
        """Refuse new connections and cut every open one."""
        self.up = False
        with self._lock:
            ends = list(self._open)
        for end in ends:
            self._drop(end)

    def bring_back(self) -> None:
        self.up = True

    def close(self) -> None:
        self._closed = True
        self.take_down()
        with suppress(OSError):
            self.listener.close()
