"""``confirm-service import`` / ``export``: round trips, the VOTable contract, refusals, exits.

Outside references used here:

* IEEE 754 binary64 and Python's shortest round-trip ``repr`` of floats (``float.hex`` compares
  the bits): a value written and read back must keep every bit.
* The standard library's ``csv`` and ``json`` modules and ``astropy.io.votable.parse`` read the
  exported files independently of the project's own readers.
* VOTable 1.4 (IVOA Recommendation) for datatypes ``double`` / ``boolean`` and FIELD ``unit``.

Test data are invented (sites and target from ``tests.factories``). They are chosen so that no
detection enters candidate intake (SNR below the default intake threshold and no pipeline flag on
target scans; flagged hits only on a scan without a target): this file tests the exchange, not
the confirmation protocol.
"""

from __future__ import annotations

import csv
import json
from datetime import UTC, datetime, timedelta, timezone
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from click.testing import CliRunner
from sqlalchemy import func, select

from confirm_service.actor import SYSTEM
from confirm_service.cli import context as cli_context
from confirm_service.cli import main
from confirm_service.cli.context import cli_actor
from confirm_service.db import Database
from confirm_service.models import AuditEntry, Detection, Observation
from confirm_service.schemas.log import SiteIn, TargetIn
from confirm_service.services import runtime
from confirm_service.services.exchange import columns, export, importer
from confirm_service.services.sites import create_site, create_target
from tests.factories import SITE_NORTH, SITE_SOUTH, TARGET

OBSERVATION_COLUMNS = columns.OBSERVATION_COLUMNS
DETECTION_COLUMNS = columns.DETECTION_COLUMNS
FLOAT_COLUMNS = sorted(columns.FLOAT_COLUMNS)
IST = timezone(timedelta(hours=5, minutes=30))
EMPTY_DETECTION = dict.fromkeys(DETECTION_COLUMNS)

SCAN_A = {  # on-source scan of the target at 30 GHz; pointing left to the target's position
    "site": "PRA",
    "target": "Kestrel-7",
    "pointing_ra_deg": None,
    "pointing_dec_deg": None,
    "start": datetime(2025, 3, 14, 9, 30, tzinfo=IST),
    "duration_s": 300.0,
    "frequency_min_hz": 29_990_000_000.0,
    "frequency_max_hz": 30_010_000_000.0,
    "channel_width_hz": 3.8146972656250004,
    "time_resolution_s": 12.503611008,
    "on_source": True,
    "beam": "b0",
    "cadence": "PRA-k7-0314",
    "pipeline_run": "run-0007",
}
SCAN_B = {  # a scan at another site given by pointing only, no target
    "site": "TFO",
    "target": None,
    "pointing_ra_deg": 83.63308333333333,
    "pointing_dec_deg": -22.014500000000002,
    "start": datetime(2025, 3, 15, 18, 0, 0, 250_000, tzinfo=UTC),
    "duration_s": 600.0,
    "frequency_min_hz": 1_400_000_000.0,
    "frequency_max_hz": 1_450_000_000.0,
    "channel_width_hz": 1.0,
    "time_resolution_s": 10.0,
    "on_source": True,
    "beam": None,
    "cadence": None,
    "pipeline_run": "run-0008",
}
SCAN_C = {  # off-source scan of the target's cadence, no detections
    **SCAN_A,
    "pointing_ra_deg": 201.865,
    "pointing_dec_deg": 12.42,
    "start": datetime(2025, 3, 14, 9, 36, tzinfo=IST),
    "on_source": False,
}
HITS_A = [
    {
        "frequency_hz": 30_000_000_000.001,
        "drift_hz_s": -0.1234567890123456,
        "snr": 7.3,
        "time_offset_s": 0.0,
        "bandwidth_hz": 3.81,
        "detection_beam": "b0",
        "candidate": False,
    },
    {
        "frequency_hz": 30_000_000_123.456789,
        "drift_hz_s": 0.0,
        "snr": 9.999999999999998,
        "time_offset_s": 299.99999999999994,
        "bandwidth_hz": None,
        "detection_beam": None,
        "candidate": False,
    },
]
HITS_B = [
    {
        "frequency_hz": 1_420_405_751.768,
        "drift_hz_s": 0.1 + 0.2,
        "snr": 25.0,
        "time_offset_s": 12.5,
        "bandwidth_hz": 0.5,
        "detection_beam": "b3",
        "candidate": True,
    }
]
SOURCE_ROWS = (
    [{**SCAN_A, **hit} for hit in HITS_A]
    + [{**SCAN_B, **hit} for hit in HITS_B]
    + [{**SCAN_C, **EMPTY_DETECTION}]
)


def expected_rows() -> list[dict[str, Any]]:
    """SOURCE_ROWS as the log keeps them: scan A's pointing filled in from its target."""
    rows = []
    for row in SOURCE_ROWS:
        row = dict(row)
        if row["target"] == TARGET["name"] and row["pointing_ra_deg"] is None:
            row["pointing_ra_deg"], row["pointing_dec_deg"] = TARGET["ra_deg"], TARGET["dec_deg"]
        rows.append(row)
    return rows


# --- fixtures -----------------------------------------------------------------------------------


@pytest.fixture
def database(database_url: str) -> Any:
    """The test database with the invented sites and target."""
    db = Database(database_url)
    with db.write() as session:
        for site in (SITE_NORTH, SITE_SOUTH):
            create_site(session, SYSTEM, SiteIn(**site))
        create_target(session, SYSTEM, TargetIn(**TARGET))
    yield db
    db.dispose()


@pytest.fixture
def cli(database: Database, database_url: str, tmp_path: Path, monkeypatch: Any) -> Any:
    """Run ``confirm-service`` against the test database; settings are re-read per call."""
    monkeypatch.setattr(runtime, "_settings", None)
    env = {"CONFIRM_DATABASE_URL": database_url, "CONFIRM_INSTANCE_PATH": str(tmp_path / "i")}
    runner = CliRunner()

    def run(*args: str) -> Any:
        cli_context.settings.cache_clear()
        try:
            return runner.invoke(main, list(args), env=env, catch_exceptions=False)
        finally:
            cli_context.settings.cache_clear()

    return run


# --- independent writers and readers (stdlib csv/json, astropy) -------------------------------


def _text(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, datetime):
        return value.isoformat()
    return str(value)


def write_source(path: Path, fmt: str, rows: list[dict[str, Any]]) -> None:
    """Write ``rows`` the way an outside producer would, without the project's writers."""
    names = list(OBSERVATION_COLUMNS + DETECTION_COLUMNS)
    if fmt == "csv":
        with open(path, "w", newline="", encoding="utf-8") as stream:
            writer = csv.writer(stream)
            writer.writerow(names)
            writer.writerows([[_text(row[c]) for c in names] for row in rows])
    elif fmt == "jsonl":
        with open(path, "w", encoding="utf-8") as stream:
            for row in rows:  # null keys left out: a missing key means "not given"
                flat = {c: _text(v) if isinstance(v, datetime) else v for c, v in row.items()}
                stream.write(json.dumps({c: v for c, v in flat.items() if v is not None}) + "\n")
    else:
        from astropy.table import MaskedColumn, Table

        table = Table()
        for c in names:
            values = [row[c] for row in rows]
            mask = [v is None for v in values]
            if c in columns.FLOAT_COLUMNS:
                data = np.array([0.0 if v is None else v for v in values], dtype=np.float64)
                table[c] = MaskedColumn(data, mask=mask, unit=columns.UNITS.get(c))
            elif c in columns.BOOL_COLUMNS:
                table[c] = MaskedColumn(np.array([bool(v) for v in values]), mask=mask)
            else:
                table[c] = [_text(v) for v in values]
        table.write(path, format="votable")


def _typed(column: str, value: Any) -> Any:
    if value is None or value == "":
        return None
    if column == "start":
        return datetime.fromisoformat(value)
    if column in columns.FLOAT_COLUMNS:
        return float(value)
    if column in columns.BOOL_COLUMNS and isinstance(value, str):
        return {"true": True, "false": False}[value]
    if column in ("observation_id", "detection_id"):
        return int(value)
    return value


def read_back(path: Path, fmt: str) -> list[dict[str, Any]]:
    """An exported file read with csv / json / astropy.io.votable.parse only."""
    if fmt == "csv":
        with open(path, newline="", encoding="utf-8") as stream:
            raw = list(csv.DictReader(stream))
    elif fmt == "jsonl":
        with open(path, encoding="utf-8") as stream:
            raw = [json.loads(line) for line in stream]
    else:
        from astropy.io.votable import parse

        array = parse(str(path)).get_first_table().array
        names = array.dtype.names
        raw = [
            dict(zip(names, values, strict=True))
            for values in zip(*(array[n].tolist() for n in names), strict=True)
        ]
    return [{c: _typed(c, v) for c, v in row.items()} for row in raw]


def without_ids(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    return [{k: v for k, v in r.items() if k not in columns.IGNORED_COLUMNS} for r in rows]


def assert_same_bits(actual: list[dict[str, Any]], expected: list[dict[str, Any]]) -> None:
    """Equal rows, every float to the last bit (tolerance: 0 ulp; IEEE 754 binary64)."""
    assert len(actual) == len(expected)
    for got, want in zip(actual, expected, strict=True):
        assert got == want
        for column in FLOAT_COLUMNS:
            if want[column] is not None:
                assert got[column].hex() == want[column].hex(), column


def summary_of(stdout: str) -> dict[str, int]:
    figures = {}
    for line in stdout.splitlines():
        name, _, value = line.partition(":")
        if value.strip().isdigit():
            figures[name.strip()] = int(value)
    return figures


def count(database: Database, model: Any, *where: Any) -> int:
    with database.read() as session:
        query = select(func.count()).select_from(model)
        return session.execute(query.where(*where) if where else query).scalar_one()


# --- round trips ------------------------------------------------------------------------------

EXTENSION = {"csv": "csv", "jsonl": "jsonl", "votable": "vot"}


def test_float64_is_needed_for_the_test_values():
    # IEEE 754: binary32 has a 24-bit significand, so near 3e10 Hz its spacing is 2048 Hz; a
    # float32 column anywhere on the way would change this value and fail the round trips below.
    assert float(np.float32(30_000_000_000.001)) != 30_000_000_000.001
    assert float(np.float64(30_000_000_000.001)) == 30_000_000_000.001


@pytest.mark.parametrize("fmt", ["csv", "jsonl", "votable"])
def test_import_export_import_round_trip_keeps_every_bit(cli, database, tmp_path, fmt):
    source = tmp_path / f"source.{EXTENSION[fmt]}"
    write_source(source, fmt, SOURCE_ROWS)
    first = cli("import", str(source))
    assert first.exit_code == 0, first.output
    assert summary_of(first.stdout) == {
        "rows read": 4,
        "rows accepted": 4,
        "rows refused": 0,
        "observations created": 3,
        "observations refused": 0,
        "detections created": 3,
    }

    exported = tmp_path / f"first.{EXTENSION[fmt]}"
    result = cli("export", "--out", str(exported))
    assert result.exit_code == 0, result.output
    assert result.stdout.strip() == f"exported 3 observations (4 rows) to {exported}"
    once = read_back(exported, fmt)
    assert_same_bits(without_ids(once), expected_rows())
    assert all(row["start"].utcoffset() == timedelta(0) for row in once)  # written as UTC
    assert [r["detection_id"] for r in once] == [1, 2, 3, None]

    second = cli("import", str(exported))  # the export itself is valid input
    assert second.exit_code == 0, second.output
    again = tmp_path / f"second.{EXTENSION[fmt]}"
    assert cli("export", "--out", str(again)).exit_code == 0
    twice = read_back(again, fmt)
    assert_same_bits(without_ids(twice), expected_rows() * 2)
    assert [r["observation_id"] for r in twice] == [1, 1, 2, 3, 4, 4, 5, 6]
    assert count(database, Detection) == 6


def test_exported_votable_read_by_astropy_has_float64_units_and_values(cli, database, tmp_path):
    # Outside reference: astropy.io.votable.parse, reading the file as any VOTable consumer.
    from astropy import units as u
    from astropy.io.votable import parse

    source = tmp_path / "source.csv"
    write_source(source, "csv", SOURCE_ROWS)
    assert cli("import", str(source)).exit_code == 0
    out = tmp_path / "log.xml"
    assert cli("export", "--out", str(out), "--format", "votable").exit_code == 0

    table = parse(str(out)).get_first_table()
    fields = {f.name: f for f in table.fields}
    assert list(fields) == list(columns.EXPORT_COLUMNS)
    for name in FLOAT_COLUMNS:
        assert fields[name].datatype == "double", name  # VOTable 1.4: double = IEEE 754 binary64
        assert table.array[name].dtype == np.float64, name
    expected_units = {"Hz": "frequency_hz", "Hz/s": "drift_hz_s", "s": "duration_s"}
    expected_units["deg"] = "pointing_ra_deg"
    for unit, name in expected_units.items():
        assert fields[name].unit == u.Unit(unit), name
    assert fields["snr"].unit is None
    for name in ("on_source", "candidate"):
        assert fields[name].datatype == "boolean"  # VOTable 1.4: boolean has a null value
    frequencies = table.array["frequency_hz"]
    assert frequencies.tolist() == [
        30_000_000_000.001,
        30_000_000_123.456789,
        1_420_405_751.768,
        None,
    ]
    assert float(frequencies[0]).hex() == (30_000_000_000.001).hex()  # 0 ulp
    assert table.array["drift_hz_s"][2] == 0.30000000000000004
    assert table.array["candidate"].tolist() == [False, False, True, None]
    assert table.array["start"][0] == "2025-03-14T04:00:00+00:00"  # 09:30 at +05:30 is 04:00 UTC


def test_export_pages_by_id_and_filters(database, tmp_path):
    source = tmp_path / "source.csv"
    write_source(source, "csv", SOURCE_ROWS * 3)  # repeats make 9 observations (3 per copy)
    summary = importer.import_file(database, cli_actor(), source, "csv", 300.0, 50_000)
    assert (summary.observations_created, summary.rows_accepted) == (9, 12)
    whole, paged = tmp_path / "whole.jsonl", tmp_path / "paged.jsonl"
    export.export_file(database, whole, "jsonl", page_size=1000)
    pages = export.export_file(database, paged, "jsonl", page_size=1, detection_page_size=1)
    assert (pages.observations, pages.rows) == (9, 12)
    assert read_back(paged, "jsonl") == read_back(whole, "jsonl")
    assert without_ids(read_back(paged, "jsonl")) == expected_rows() * 3

    only_tfo = tmp_path / "tfo.csv"
    export.export_file(database, only_tfo, "csv", export.ExportFilter(site="TFO"))
    assert {r["site"] for r in read_back(only_tfo, "csv")} == {"TFO"}
    assert len(read_back(only_tfo, "csv")) == 3
    window = export.ExportFilter(
        target="Kestrel-7",
        start_from=datetime(2025, 3, 14, 4, 0, tzinfo=UTC),  # inclusive: scan A
        start_to=datetime(2025, 3, 14, 4, 6, tzinfo=UTC),  # exclusive: not scan C
    )
    windowed = tmp_path / "window.csv"
    export.export_file(database, windowed, "csv", window)
    assert {r["pipeline_run"] for r in read_back(windowed, "csv")} == {"run-0007"}
    assert {r["on_source"] for r in read_back(windowed, "csv")} == {True}
    assert len(read_back(windowed, "csv")) == 6


def test_export_command_filters_and_refusals(cli, database, tmp_path):
    source = tmp_path / "source.csv"
    write_source(source, "csv", SOURCE_ROWS)
    assert cli("import", str(source)).exit_code == 0
    out = tmp_path / "off.csv"
    result = cli(
        "export",
        "--out",
        str(out),
        "--target",
        "Kestrel-7",
        "--from",
        "2025-03-14T09:35:00+05:30",
        "--to",
        "2025-03-14T05:00:00+00:00",
    )
    assert result.exit_code == 0, result.output
    assert [r["on_source"] for r in read_back(out, "csv")] == [False]

    naive = cli("export", "--out", str(out), "--from", "2025-03-14T09:35:00")
    assert naive.exit_code == 2 and "UTC offset" in naive.stderr
    unknown = cli("export", "--out", str(tmp_path / "x.csv"), "--site", "NOPE")
    assert unknown.exit_code == 2 and "NOPE" in unknown.stderr
    assert not (tmp_path / "x.csv").exists()
    assert cli("export", "--out", str(tmp_path / "log.txt")).exit_code == 2


# --- refusals -----------------------------------------------------------------------------------

MIXED_CSV_ROWS = [  # line numbers: the header is line 1
    {**SCAN_A, "pipeline_run": "g1", **HITS_A[0]},  # 2  group g1: accepted
    {**SCAN_A, "pipeline_run": "g1", **HITS_A[1]},  # 3
    {**SCAN_A, "pipeline_run": "g2", **HITS_A[0]},  # 4  group g2: refused whole
    {**SCAN_A, "pipeline_run": "g2", **HITS_A[0], "frequency_hz": 30_020_000_000.0},  # 5 band
    {**SCAN_A, "pipeline_run": "g2", **HITS_A[0], "snr": "strong"},  # 6 not a number
    {**SCAN_A, "pipeline_run": "g3", "site": "ZZZ", **HITS_A[0]},  # 7 unknown site
    {**SCAN_A, "pipeline_run": "g4", "start": "2025-03-14T04:00:00", **HITS_A[0]},  # 8 naive
    {**SCAN_C, "pipeline_run": "g5", **EMPTY_DETECTION},  # 9 group g5: accepted, no hits
    {**SCAN_A, "pipeline_run": "g6", **HITS_A[0], "time_offset_s": 300.5},  # 10 after the end
    {**SCAN_A, "pipeline_run": "g7", "frequency_max_hz": 29e9, **EMPTY_DETECTION},  # 11
    {**SCAN_A, "pipeline_run": "g8", **HITS_A[0], "drift_hz_s": float("nan")},  # 12 not finite
]


def test_refused_groups_are_named_by_line_and_field_and_write_nothing(cli, database, tmp_path):
    source = tmp_path / "mixed.csv"
    write_source(source, "csv", MIXED_CSV_ROWS)
    entries_before = count(database, AuditEntry)
    result = cli("import", str(source))
    assert result.exit_code == 1, result.output
    assert summary_of(result.stdout) == {
        "rows read": 11,
        "rows accepted": 3,
        "rows refused": 8,
        "observations created": 2,
        "observations refused": 6,
        "detections created": 2,
    }
    reasons = [line.strip() for line in result.stdout.splitlines() if line.startswith("  line")]
    named = [tuple(r.split(": ")[0:2]) for r in reasons]
    assert named == [
        ("line 5", "frequency_hz"),
        ("line 6", "snr"),
        ("line 7", "site"),
        ("line 8", "start"),
        ("line 10", "time_offset_s"),
        ("line 11", "frequency_max_hz"),
        ("line 12", "drift_hz_s"),
    ]
    assert "outside the scan's band" in reasons[0]
    assert "unknown site 'ZZZ'" in reasons[2]
    assert "importing" not in result.stdout  # progress goes to stderr only

    with database.read() as session:
        runs = session.execute(
            select(Observation.pipeline_run, Observation.detection_count).order_by(Observation.id)
        ).all()
    assert runs == [("g1", 2), ("g5", 0)]
    assert count(database, Detection) == 2
    with database.read() as session:
        created = (
            session.execute(
                select(AuditEntry.actor).where(AuditEntry.action == "observation.created")
            )
            .scalars()
            .all()
        )
    assert created == [cli_actor().name] * 2
    # two scans created; the one with hits is complete, so it was screened (its completion,
    # the protocol it was screened under and the screening run are audited too)
    assert count(database, AuditEntry) == entries_before + 5


def test_unreadable_jsonl_line_refuses_the_observations_around_it(database, tmp_path):
    good = {**{k: v for k, v in SCAN_A.items() if v is not None}, "start": "2025-03-14T04:00:00Z"}
    lines = [
        json.dumps({**good, "pipeline_run": "p1", "frequency_hz": 3e10, "drift_hz_s": 0, "snr": 1}),
        json.dumps({**good, "pipeline_run": "p1", "frequency_hz": 3e10, "drift_hz_s": 0, "snr": 2}),
        '{"site": "PRA", "start": ',  # 3: broken between p1 and p2
        json.dumps({**good, "pipeline_run": "p2", "frequency_hz": 3e10, "drift_hz_s": 0, "snr": 3}),
        "",  # 5: blank, skipped
        json.dumps({**good, "pipeline_run": "p3", "frequency_hz": 3e10, "drift_hz_s": 0, "snr": 4}),
        json.dumps(
            {
                **good,
                "pipeline_run": "p3",
                "frequency_hz": 3e10,
                "drift_hz_s": 0,
                "snr": 5,
                "colour": "red",
            }
        ),  # 7: unknown key
        json.dumps({**good, "pipeline_run": "p4", "frequency_hz": 3e10, "drift_hz_s": 0, "snr": 6}),
        "[1, 2]",  # 9: unreadable inside p4 (p4 resumes on line 10): refuses p4 only
        json.dumps({**good, "pipeline_run": "p4", "frequency_hz": 3e10, "drift_hz_s": 0, "snr": 7}),
        json.dumps({**good, "pipeline_run": "p5", "frequency_hz": 3e10, "drift_hz_s": 0, "snr": 8}),
    ]
    source = tmp_path / "hits.jsonl"
    source.write_text("\n".join(lines) + "\n", encoding="utf-8")
    summary = importer.import_file(database, cli_actor(), source, "jsonl", 300.0, 50_000)
    assert [(r.line, r.field) for r in summary.reasons] == [
        (3, "row"),
        (4, "row"),
        (7, "colour"),
        (9, "row"),
    ]
    assert (summary.rows_read, summary.rows_accepted, summary.rows_refused) == (10, 1, 9)
    assert summary.exit_status == 1
    with database.read() as session:
        runs = session.execute(select(Observation.pipeline_run)).scalars().all()
    assert runs == ["p5"]  # p4's unreadable line 9 sat inside p4, so p5 stands


def test_too_many_detections_in_one_observation_refuses_it(database, tmp_path):
    source = tmp_path / "big.csv"
    write_source(source, "csv", [{**SCAN_A, **HITS_A[0]}] * 3 + [{**SCAN_C, **EMPTY_DETECTION}])
    summary = importer.import_file(database, cli_actor(), source, "csv", 300.0, max_batch=2)
    assert [(r.line, r.field) for r in summary.reasons] == [(4, "detections")]
    assert (summary.observations_created, summary.rows_refused) == (1, 3)
    assert count(database, Detection) == 0


def test_all_accepted_exits_0_and_summary_is_the_only_stdout(cli, tmp_path):
    source = tmp_path / "ok.jsonl"
    write_source(source, "jsonl", SOURCE_ROWS)
    result = cli("import", str(source))
    assert result.exit_code == 0
    assert result.stdout.splitlines()[0] == "rows read:            4"
    assert all(":" in line for line in result.stdout.splitlines())
    assert "importing ok.jsonl" in result.stderr


@pytest.mark.parametrize(
    ("name", "content", "message"),
    [
        ("log.txt", b"site\n", "extension"),
        ("missing.csv", None, "cannot read"),
        ("empty.csv", b"", "no header"),
        ("unknown.csv", b"site,start,freq\n", "unknown column"),
        ("short.csv", b"site,start,duration_s\n", "required column"),
        ("latin1.csv", ",".join(columns.REQUIRED_COLUMNS).encode() + b"\nPR\xc4\n", "UTF-8"),
        ("broken.vot", b"<VOTABLE><RESOURCE>", "VOTable"),
    ],
)
def test_unusable_input_exits_2(cli, database, tmp_path, name, content, message):
    path = tmp_path / name
    if content is not None:
        path.write_bytes(content)
    result = cli("import", str(path))
    assert result.exit_code == 2, result.output
    assert message in result.stderr
    assert count(database, Observation) == 0


def test_votable_with_float32_or_foreign_unit_is_unusable(cli, database, tmp_path):
    from astropy.table import Table

    base = {c: [SOURCE_ROWS[0][c]] for c in columns.REQUIRED_COLUMNS}
    base["start"] = [SOURCE_ROWS[0]["start"].isoformat()]
    narrow = Table(base)
    narrow["frequency_hz"] = np.array([30_000_000_000.001], dtype=np.float32)
    narrow.write(tmp_path / "narrow.vot", format="votable")
    result = cli("import", str(tmp_path / "narrow.vot"))
    assert result.exit_code == 2 and "32-bit float" in result.stderr

    scaled = Table(base)
    scaled["frequency_hz"] = np.array([30_000.000000001], dtype=np.float64)
    scaled["frequency_hz"].unit = "MHz"
    scaled.write(tmp_path / "scaled.vot", format="votable")
    result = cli("import", str(tmp_path / "scaled.vot"))
    assert result.exit_code == 2 and "Hz is required" in result.stderr
    assert count(database, Observation) == 0


def test_input_that_breaks_mid_file_keeps_finished_observations_and_exits_2(
    cli, database, tmp_path
):
    long_run = "r" * 128  # the longest pipeline_run; 40 rows push the bad byte past 8 KiB of text
    rows = [{**SCAN_C, **EMPTY_DETECTION}] + [
        {**SCAN_A, "pipeline_run": long_run, **HITS_A[0]}
    ] * 40
    source = tmp_path / "broken.csv"
    write_source(source, "csv", rows)
    source.write_bytes(source.read_bytes() + b"PRA,\xff\xfe\n")  # not UTF-8 (RFC 3629)
    result = cli("import", str(source))
    assert result.exit_code == 2, result.output
    assert "not UTF-8" in result.stderr
    figures = summary_of(result.stdout)
    assert (figures["observations created"], figures["rows accepted"]) == (1, 1)
    assert figures["rows refused"] == figures["rows read"] - 1 > 0
    assert figures["observations refused"] == 1
    assert count(database, Observation) == 1
    assert count(database, Detection) == 0
