"""Prometheus metrics: one definition of each, counted only when the work they count commits.

Services call :func:`count_on_commit` inside their transaction; ``Database.write`` applies the
counts after a successful commit and drops them on a rollback, so a refused or failed batch is
never counted. With ``PROMETHEUS_MULTIPROC_DIR`` set (several gunicorn workers), each process
writes its values to files in that folder and :func:`exposition` sums them
(prometheus-client's multiprocess mode); without it, the process's own registry is shown.
"""

from __future__ import annotations

import os
from typing import Any, Protocol

from prometheus_client import (
    CONTENT_TYPE_LATEST,
    REGISTRY,
    CollectorRegistry,
    Counter,
    Histogram,
    generate_latest,
    multiprocess,
)

MULTIPROCESS_DIR_VARIABLE = "PROMETHEUS_MULTIPROC_DIR"
_PENDING = "confirm.metrics.pending"

LATENCY_BUCKETS_S = (0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 30.0)
"""Upper bounds of the request latency buckets, seconds: a page read takes milliseconds, the
largest hit batch about a second, and gunicorn ends a request at 120 s."""

REQUESTS = Counter(
    "confirm_http_requests",
    "HTTP requests answered, by method, route template and status",
    ["method", "route", "status"],
)
REQUEST_SECONDS = Histogram(
    "confirm_http_request_duration_seconds",
    "Time from the request reaching the app to its answer, by method and route template (s)",
    ["method", "route"],
    buckets=LATENCY_BUCKETS_S,
)
HIT_BATCHES = Counter("confirm_ingest_batches", "Hit batches written (replays not counted)")
HITS_WRITTEN = Counter("confirm_ingest_hits_written", "Hits written by ingest")
SCREENING_RUNS = Counter("confirm_screening_runs", "Screening runs (one per completed cadence)")
SCREENED_HITS = Counter(
    "confirm_screening_hits", "Hits set aside by screening, by reason", ["reason"]
)
EVALUATIONS = Counter(
    "confirm_evaluations",
    "Candidate evaluations under the protocol, by whether the candidate changed state or stage",
    ["outcome"],
)
DELIVERIES = Counter(
    "confirm_deliveries",
    "Delivery attempts of outbound messages, by outcome (delivered, retrying, dead)",
    ["outcome"],
)


class HasInfo(Protocol):
    """A SQLAlchemy session, as far as counting needs it."""

    @property
    def info(self) -> dict[Any, Any]: ...


def count_on_commit(session: HasInfo, counter: Counter, amount: float = 1, **labels: str) -> None:
    """Add ``amount`` to ``counter`` (with ``labels``) once ``session``'s transaction commits."""
    session.info.setdefault(_PENDING, []).append((counter, amount, labels))


def apply_counts(session: HasInfo) -> None:
    """Apply the counts of a committed transaction (called by ``Database.write``)."""
    for counter, amount, labels in session.info.pop(_PENDING, []):
        (counter.labels(**labels) if labels else counter).inc(amount)


def drop_counts(session: HasInfo) -> None:
    """Forget the counts of a transaction that was rolled back."""
    session.info.pop(_PENDING, None)


def exposition() -> tuple[bytes, str]:
    """The metrics in Prometheus text format, and its content type."""
    if os.environ.get(MULTIPROCESS_DIR_VARIABLE):
        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry)
        return generate_latest(registry), CONTENT_TYPE_LATEST
    return generate_latest(REGISTRY), CONTENT_TYPE_LATEST


def worker_exited(pid: int) -> None:
    """Tell multiprocess mode a worker is gone (gunicorn's ``child_exit`` hook)."""
    if os.environ.get(MULTIPROCESS_DIR_VARIABLE):
        multiprocess.mark_process_dead(pid)
