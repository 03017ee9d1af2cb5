"""Scans' hits as numpy arrays, read straight off the DB-API cursor, kept while a scan is complete.

A complete scan takes no more hits, so its hit columns never change; only which of its hits are
still pending does, and only a screening run changes that. Each scan row carries the id of the
last run that judged its hits (``observations.screened_run_id``); a cached table is used only
while that id and the hit count match the database, so several processes (gunicorn workers)
stay correct, and a rolled-back run simply makes the next call read again.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
from sqlalchemy.orm import Session

from confirm_service.protocol.screening import BoolArray, FloatArray, IntArray

HIT_DTYPE = np.dtype(
    [
        ("observation_id", np.int64),
        ("id", np.int64),
        ("frequency_hz", np.float64),
        ("drift_hz_s", np.float64),
        ("snr", np.float64),
        ("time_offset_s", np.float64),
        ("pending", np.bool_),
    ]
)
CACHED_SCANS = 512
"""Complete scans kept in memory per process (about 0.2 MB per 5,000 hits)."""


@dataclass(frozen=True)
class ScanKey:
    """What identifies the state of a scan's hits: its id, hit count and last judging run."""

    observation_id: int
    detection_count: int
    screened_run_id: int | None
    complete: bool


@dataclass(frozen=True)
class HitTable:
    """One scan's hits sorted by frequency at the scan's start (Hz), with drift (Hz/s) and SNR."""

    hit_id: IntArray
    frequency_hz: FloatArray
    drift_hz_s: FloatArray
    snr: FloatArray
    pending: BoolArray

    @classmethod
    def of(cls, rows: np.ndarray) -> HitTable:
        start_frequency = rows["frequency_hz"] - rows["drift_hz_s"] * rows["time_offset_s"]
        order = np.argsort(start_frequency, kind="stable")
        return cls(
            rows["id"][order],
            start_frequency[order],
            rows["drift_hz_s"][order],
            rows["snr"][order],
            rows["pending"][order],
        )


_lock = threading.Lock()
_cache: OrderedDict[tuple[str, int], tuple[ScanKey, HitTable]] = OrderedDict()


def _database(session: Session) -> str:
    return session.get_bind().engine.url.render_as_string(hide_password=True)


def read_hits(session: Session, observation_ids: Sequence[int]) -> np.ndarray:
    """The scans' hits as one structured array (``HIT_DTYPE``), through the raw cursor."""
    if not observation_ids:
        return np.empty(0, dtype=HIT_DTYPE)
    connection = session.connection()
    marker = "%s" if connection.dialect.paramstyle in ("format", "pyformat") else "?"
    statement = (
        "SELECT observation_id, id, frequency_hz, drift_hz_s, snr, time_offset_s, "
        "screen_reason IS NULL FROM detections WHERE observation_id IN "
        f"({', '.join([marker] * len(observation_ids))})"
    )
    parameters: list[Any] = list(observation_ids)
    cursor = connection.connection.driver_connection.cursor()  # type: ignore[union-attr]
    try:
        cursor.execute(statement, parameters)
        return np.fromiter(cursor, dtype=HIT_DTYPE)
    finally:
        cursor.close()


def hit_tables(
    session: Session, keys: Sequence[ScanKey], cached: bool = True
) -> dict[int, HitTable]:
    """Each scan's hit table: complete scans from the cache when current, the rest in one query."""
    database = _database(session)
    tables: dict[int, HitTable] = {}
    if cached:
        with _lock:
            for key in keys:
                found = _cache.get((database, key.observation_id))
                if key.complete and found is not None and found[0] == key:
                    tables[key.observation_id] = found[1]
                    _cache.move_to_end((database, key.observation_id))
    missing = [k.observation_id for k in keys if k.observation_id not in tables]
    rows = read_hits(session, missing)
    order = np.argsort(rows["observation_id"], kind="stable")
    rows = rows[order]
    wanted = np.array(missing, dtype=np.int64)
    low = np.searchsorted(rows["observation_id"], wanted, side="left")
    high = np.searchsorted(rows["observation_id"], wanted, side="right")
    for n, observation_id in enumerate(missing):
        tables[observation_id] = HitTable.of(rows[low[n] : high[n]])
    if cached:
        _keep(database, [k for k in keys if k.complete and k.observation_id in missing], tables)
    return tables


def _keep(database: str, keys: Sequence[ScanKey], tables: dict[int, HitTable]) -> None:
    with _lock:
        for key in keys:
            _cache[(database, key.observation_id)] = (key, tables[key.observation_id])
            _cache.move_to_end((database, key.observation_id))
        while len(_cache) > CACHED_SCANS:
            _cache.popitem(last=False)


def after_run(
    session: Session, keys: Sequence[ScanKey], decided_ids: IntArray, run_id: int
) -> None:
    """Record in the cache what a run decided: those hits are no longer pending."""
    database = _database(session)
    with _lock:
        for key in keys:
            found = _cache.get((database, key.observation_id))
            if found is None or found[0] != key:
                continue
            table = found[1]
            pending = table.pending & ~np.isin(table.hit_id, decided_ids)
            _cache[(database, key.observation_id)] = (
                replace(key, screened_run_id=run_id),
                replace(table, pending=pending),
            )
