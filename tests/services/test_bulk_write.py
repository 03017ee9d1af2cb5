"""The bulk write of hits: every value back bit for bit, ids in the request's order, and on
PostgreSQL the rows travel by ``COPY`` rather than through ``executemany``."""

from __future__ import annotations

import math

from sqlalchemy import event, select

from confirm_service.models import Detection
from tests.factories import observation, setup_log


def _awkward_hits() -> list[dict]:
    """Values that need all 17 significant digits, a zero drift, optional fields
    present and absent, non-ASCII beam names, and a hit the pipeline flagged."""
    base_hz = 1.42e9
    hits = [
        {
            "frequency_hz": math.nextafter(base_hz + 1_000.0 * (1_000 - i), math.inf),
            "drift_hz_s": (-1) ** i * 0.1234567890123456789 * i,
            "snr": 5.0 + i / 7.0,
            "time_offset_s": i * 0.3,
        }
        for i in range(1_000)
    ]
    hits[0]["drift_hz_s"] = -0.0
    hits[1].update(bandwidth_hz=3.8146972656250004, beam="β-7")
    hits[2].update(beam=None, bandwidth_hz=None)
    hits[3].update(candidate=True, snr=60.0)
    return hits


def test_bulk_write_keeps_every_value_and_the_request_order(client, auth, db):
    setup_log(client, auth)
    scan = client.post(
        "/api/v1/observations", json=observation(), headers=auth("pipeline")
    ).get_json()
    hits = _awkward_hits()
    statements: list[str] = []

    def remember(conn, cursor, statement, parameters, context, executemany):  # noqa: ANN001
        statements.append(statement)

    event.listen(db.engine, "before_cursor_execute", remember)
    try:
        response = client.post(
            f"/api/v1/observations/{scan['id']}/detections",
            json={"detections": hits},
            headers=auth("pipeline"),
        )
    finally:
        event.remove(db.engine, "before_cursor_execute", remember)
    assert response.status_code == 201, response.get_data(as_text=True)
    ids = response.get_json()["ids"]
    assert ids == sorted(ids) and len(set(ids)) == len(hits)
    with db.read() as session:
        stored = {d.id: d for d in session.execute(select(Detection)).scalars()}
    for new_id, hit in zip(ids, hits, strict=True):
        row = stored[new_id]
        assert row.frequency_hz.hex() == hit["frequency_hz"].hex()
        # == rather than hex(): SQLite keeps a whole-number REAL as an integer on disk, so a
        # drift of -0.0 reads back as 0.0 there (SQLite's "REAL affinity" rule, from memory)
        assert row.drift_hz_s == hit["drift_hz_s"]
        assert row.drift_hz_s.hex() == hit["drift_hz_s"].hex() or hit["drift_hz_s"] == 0.0
        assert row.snr.hex() == hit["snr"].hex()
        assert row.time_offset_s == hit["time_offset_s"]
        assert row.bandwidth_hz == hit.get("bandwidth_hz")
        assert row.beam == hit.get("beam")
        assert row.flagged_candidate is hit.get("candidate", False)
    inserts = [s for s in statements if s.lstrip().upper().startswith("INSERT INTO DETECTIONS")]
    if db.engine.dialect.name == "postgresql":
        assert inserts == []  # the rows went by COPY, which bypasses the cursor's execute
    else:
        assert len(inserts) == 1  # one executemany for the whole batch
