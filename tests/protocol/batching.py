"""Batch helpers used only by tests and benchmarks: streamed evaluation, paused collector."""

from __future__ import annotations

import gc
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from typing import Any

from confirm_service.protocol import Evaluation, evaluate_many
from confirm_service.protocol.facts import CandidateFacts


def iter_evaluations(
    protocol: Any, facts: Iterable[CandidateFacts], chunk_size: int = 64, **kwargs: Any
) -> Iterator[Evaluation]:
    """Evaluations in input order, ``chunk_size`` candidates at a time (nothing accumulates)."""
    chunk: list[CandidateFacts] = []
    for item in facts:
        chunk.append(item)
        if len(chunk) >= chunk_size:
            yield from evaluate_many(protocol, chunk, chunk_size=chunk_size, **kwargs)
            chunk = []
    if chunk:
        yield from evaluate_many(protocol, chunk, chunk_size=chunk_size, **kwargs)


@contextmanager
def gc_paused() -> Iterator[None]:
    """Python's cyclic collector off for the block (process-wide: tests and benchmarks only)."""
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()
