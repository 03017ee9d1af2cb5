"""The detections of each scan inside its own frequency window, in one indexed statement:
the same rows as a plain filter over every stored detection, on both backends."""

from __future__ import annotations

import numpy as np
from sqlalchemy import create_engine, select

from confirm_service.db import upgrade_database
from confirm_service.models import Detection
from confirm_service.services.facts import detections_in_windows, window_statement
from tests.factories import observation, setup_log


def _store_scans(client, auth, scans: int, hits: int) -> list[int]:
    rng = np.random.default_rng(11)
    ids = []
    for k in range(scans):
        body = observation(start=f"2026-11-20T0{k}:00:00+00:00", cadence=f"w{k}")
        body["detections"] = [
            {"frequency_hz": float(f), "drift_hz_s": float(d), "snr": 6.0}
            for f, d in zip(
                rng.uniform(1.40e9, 1.45e9, hits), rng.uniform(-2, 2, hits), strict=True
            )
        ]
        response = client.post("/api/v1/observations", json=body, headers=auth("pipeline"))
        assert response.status_code == 201, response.get_data(as_text=True)
        ids.append(response.get_json()["id"])
    return ids


def test_window_query_returns_exactly_the_rows_inside_each_scans_window(client, auth, db):
    setup_log(client, auth)
    ids = _store_scans(client, auth, scans=4, hits=400)
    windows = {
        ids[0]: (1.41e9, 1.42e9),
        ids[1]: (1.41e9, 1.42e9),  # the same band in another scan: its own rows only
        ids[2]: (1.449e9, 1.46e9),  # reaching past the scan's band
        ids[3]: (1.43e9, 1.43e9),  # empty
    }
    with db.read() as session:
        found = detections_in_windows(session, windows)
        every = session.execute(select(Detection)).scalars().all()
    expected = {
        oid: sorted(
            d.id for d in every if d.observation_id == oid and low <= d.frequency_hz <= high
        )
        for oid, (low, high) in windows.items()
    }
    assert {oid: [d.id for d in rows] for oid, rows in found.items()} == expected
    assert sum(len(v) for v in expected.values()) > 100  # the check looked at real rows
    assert all(
        d.observation_id == oid and windows[oid][0] <= d.frequency_hz <= windows[oid][1]
        for oid, rows in found.items()
        for d in rows
    )


def test_sqlite_reads_each_window_through_the_frequency_index(tmp_path):
    """SQLite's plan: the loop over the windows outside, one range search of the
    (observation_id, frequency_hz) index per window, never a pass over every detection.
    (PostgreSQL chooses its plan from table statistics; its rows are checked above.)"""
    url = f"sqlite:///{tmp_path / 'plan.db'}"
    upgrade_database(url)
    engine = create_engine(url)
    statement = "EXPLAIN QUERY PLAN " + window_statement(2, engine.dialect)
    with engine.connect() as connection:
        plan = connection.exec_driver_sql(statement, (1, 1.41e9, 1.42e9, 2, 1.41e9, 1.42e9)).all()
    engine.dispose()
    text = " | ".join(str(row[-1]) for row in plan)
    assert "ix_detections_observation_frequency" in text, text
    assert "SCAN d" not in text, text
