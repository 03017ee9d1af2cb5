"""One scheduler acts at a time: a PostgreSQL advisory lock, or a file lock beside a SQLite file.

The lock is held by the leader's database session (PostgreSQL) or open file (SQLite); the
operating system or the database server drops it the moment the leader's process dies, however
it dies, so a standby that polls every ``poll_s`` seconds takes over within that time.
"""

from __future__ import annotations

import fcntl
import os
import threading
from pathlib import Path
from typing import Any

from sqlalchemy import text

from confirm_service.db import Database

ADVISORY_KEY = 0x0C0F1A11  # fixed key for this service's scheduler lock


class LeaderLock:
    """Held while this process is the scheduler; ``acquire`` returns False if another holds it."""

    def __init__(self, database: Database, lock_dir: Path) -> None:
        self.database = database
        self.lock_path = Path(lock_dir) / "scheduler.lock"
        self._connection: Any = None
        self._file: int | None = None

    @property
    def held(self) -> bool:
        return self._file is not None or self._connection is not None

    def acquire(self) -> bool:
        if self.database.is_sqlite:
            return self._acquire_file()
        return self._acquire_advisory()

    def _acquire_file(self) -> bool:
        self.lock_path.parent.mkdir(parents=True, exist_ok=True)
        descriptor = os.open(self.lock_path, os.O_RDWR | os.O_CREAT, 0o600)
        try:
            fcntl.flock(descriptor, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(descriptor)
            return False
        os.ftruncate(descriptor, 0)
        os.write(descriptor, f"{os.getpid()}\n".encode())
        self._file = descriptor
        return True

    def _acquire_advisory(self) -> bool:
        connection = self.database.engine.connect()
        try:
            got = connection.execute(
                text("SELECT pg_try_advisory_lock(:key)"), {"key": ADVISORY_KEY}
            ).scalar_one()
            connection.commit()
        except Exception:
            connection.close()
            raise
        if not got:
            connection.close()
            return False
        self._connection = connection
        return True

    def wait(self, poll_s: float, stop: threading.Event | None = None) -> bool:
        """Block as a standby until the lock is ours (True) or ``stop`` is set (False)."""
        stop = stop or threading.Event()
        while not stop.is_set():
            if self.acquire():
                return True
            stop.wait(poll_s)
        return False

    def still_held(self) -> bool:
        """True while the lock is ours: the file is open, or the lock's session answers."""
        if self._file is not None:
            return True
        if self._connection is None:
            return False
        try:
            self._connection.execute(text("SELECT 1")).scalar_one()
            self._connection.commit()
        except Exception:
            return False
        return True

    def release(self) -> None:
        if self._file is not None:
            fcntl.flock(self._file, fcntl.LOCK_UN)
            os.close(self._file)
            self._file = None
        if self._connection is not None:
            try:
                self._connection.execute(
                    text("SELECT pg_advisory_unlock(:key)"), {"key": ADVISORY_KEY}
                )
                self._connection.commit()
            finally:
                self._connection.close()
                self._connection = None
