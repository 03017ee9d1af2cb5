"""One scheduler at a time: a PostgreSQL advisory lock, or a file lock beside a SQLite file."""

from __future__ import annotations

import fcntl
import os
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

    def acquire(self) -> bool:
        if self.database.is_sqlite:
            self.lock_path.parent.mkdir(parents=True, exist_ok=True)
            descriptor = os.open(self.lock_path, os.O_RDWR | os.O_CREAT, 0o600)
            try:
                fcntl.flock(descriptor, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                os.close(descriptor)
                return False
            self._file = descriptor
            return True
        connection = self.database.engine.connect()
        got = connection.execute(
            text("SELECT pg_try_advisory_lock(:key)"), {"key": ADVISORY_KEY}
        ).scalar_one()
        connection.commit()
        if not got:
            connection.close()
            return False
        self._connection = connection
        return True

    def release(self) -> None:
        if self._file is not None:
            fcntl.flock(self._file, fcntl.LOCK_UN)
            os.close(self._file)
            self._file = None
        if self._connection is not None:
            self._connection.execute(text("SELECT pg_advisory_unlock(:key)"), {"key": ADVISORY_KEY})
            self._connection.commit()
            self._connection.close()
            self._connection = None
