"""The shell covers what the pages do: sites, targets, people, candidate search; times in MJD.

What the commands store is read back through the JSON API; refusals name the field and leave
the database unchanged. Start-up speed is measured by benchmarks/bench_cli_startup.py, not here.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
from datetime import UTC, datetime

import pytest
from astropy.time import Time
from sqlalchemy import func, select

from confirm_service.demo import SITES, TARGETS
from confirm_service.models import AuditEntry, Person, Site
from confirm_service.timeutil import mjd_utc, utc_and_mjd
from tests.cli.test_basic_commands import run
from tests.services.test_candidate_flow import post_scenario

PASSWORD = "correct horse battery"


def _count(db, model) -> int:
    with db.read() as session:
        return session.execute(select(func.count()).select_from(model)).scalar_one()


def test_mjd_agrees_with_astropy():
    # astropy Time(...).mjd on the UTC scale is the outside reference; 1 ms = 1.2e-8 d
    for moment in (
        datetime(1970, 1, 1, tzinfo=UTC),  # MJD 40587 (the Unix epoch; USNO/IAU definition)
        datetime(2026, 11, 20, 12, 17, 7, 250_000, tzinfo=UTC),
        datetime(2025, 3, 1, 23, 59, 59, tzinfo=UTC),
    ):
        expected = Time(moment.replace(tzinfo=None), scale="utc").mjd
        assert mjd_utc(moment) == pytest.approx(expected, abs=1.2e-8)
    assert utc_and_mjd(datetime(2000, 1, 1, 12, tzinfo=UTC)) == (
        "2000-01-01 12:00:00 UTC (MJD 51544.50000)"  # J2000.0 is JD 2451545.0 (IAU)
    )
    with pytest.raises(ValueError):
        mjd_utc(datetime(2026, 1, 1))


def test_sites_add_list_show_edit_match_the_api(database_url, app, auth):
    pra = SITES[0]
    added = run(
        [
            "sites", "add", pra["code"], "--name", pra["name"],
            "--lat", str(pra["latitude_deg"]), "--lon", str(pra["longitude_deg"]),
            "--height", str(pra["elevation_m"]), "--min-elevation", "15",
            "--band", "1.1e9:1.7e9",
        ],
        database_url,
    )  # fmt: skip
    assert added.exit_code == 0, added.output
    api = app.test_client().get(f"/api/v1/sites/{pra['code']}", headers=auth("viewer")).get_json()
    assert api["latitude_deg"] == pra["latitude_deg"] and api["min_elevation_deg"] == 15.0
    assert api["receiver_bands_hz"] == [[1.1e9, 1.7e9]]
    listed = run(["sites", "list"], database_url)
    assert pra["code"] in listed.stdout and pra["name"] in listed.stdout
    shown = run(["sites", "show", pra["code"]], database_url)
    assert f"latitude {pra['latitude_deg']:.6f}°" in shown.stdout and "MJD" in shown.stdout
    edited = run(["sites", "edit", pra["code"], "--sun-avoidance", "12.5"], database_url)
    assert edited.exit_code == 0 and "sun_avoidance_deg" in edited.stdout
    api = app.test_client().get(f"/api/v1/sites/{pra['code']}", headers=auth("viewer")).get_json()
    assert api["sun_avoidance_deg"] == 12.5 and api["min_elevation_deg"] == 15.0


def test_sites_refusals_name_the_field_and_write_nothing(database_url, app, db):
    before = (_count(db, Site), _count(db, AuditEntry))
    refused = run(
        ["sites", "add", "XX", "--name", "x", "--lat", "91", "--lon", "0", "--height", "0"],
        database_url,
    )
    # latitude beyond ±90° does not exist (WGS84)
    assert refused.exit_code == 2 and "latitude_deg" in refused.stderr
    assert "nothing was written" in refused.stderr
    missing = run(["sites", "show", "NOPE"], database_url)
    assert missing.exit_code == 2 and "unknown site" in missing.stderr
    nothing = run(["sites", "edit", "NOPE"], database_url)
    assert nothing.exit_code == 2
    assert (_count(db, Site), _count(db, AuditEntry)) == before


def test_targets_add_show_edit_match_the_api(database_url, app, auth):
    k7 = TARGETS[0]
    added = run(
        [
            "targets", "add", k7["name"], "--ra", str(k7["ra_deg"]), "--dec", str(k7["dec_deg"]),
            "--pm-ra", str(k7["pm_ra_mas_yr"]), "--epoch", "2016-01-01T00:00:00+00:00",
        ],
        database_url,
    )  # fmt: skip
    assert added.exit_code == 0, added.output
    url = f"/api/v1/targets/{k7['name']}"
    api = app.test_client().get(url, headers=auth("viewer")).get_json()
    assert api["ra_deg"] == k7["ra_deg"] and api["pm_ra_mas_yr"] == k7["pm_ra_mas_yr"]
    shown = run(["targets", "show", k7["name"]], database_url)
    assert "MJD 57388.00000" in shown.stdout  # 2016-01-01T00:00 UTC is MJD 57388 (astropy)
    assert run(["targets", "edit", k7["name"], "--dec", "-4.5"], database_url).exit_code == 0
    assert app.test_client().get(url, headers=auth("viewer")).get_json()["dec_deg"] == -4.5
    refused = run(["targets", "add", "Bad", "--ra", "361", "--dec", "0"], database_url)
    assert refused.exit_code == 2 and "ra_deg" in refused.stderr
    naive = run(
        ["targets", "add", "Naive", "--ra", "1", "--dec", "0", "--epoch", "2016-01-01"],
        database_url,
    )
    assert naive.exit_code == 2  # a time without an offset is refused


def test_user_accounts_from_the_shell(database_url, app, db):
    created = run(
        ["user", "create", "ada.quill", "--role", "coordinator", "--password-stdin"],
        database_url,
    )
    assert created.exit_code != 0  # no password on stdin: refused
    runner_input = PASSWORD + "\n"
    from click.testing import CliRunner

    from confirm_service.cli import main
    from confirm_service.cli.context import settings

    settings.cache_clear()
    result = CliRunner().invoke(
        main,
        ["user", "create", "ada.quill", "--role", "coordinator", "--password-stdin"],
        input=runner_input,
        env={"CONFIRM_DATABASE_URL": database_url},
    )
    settings.cache_clear()
    assert result.exit_code == 0, result.output
    with db.read() as session:
        person = session.execute(select(Person)).scalar_one()
        assert person.password_hash.startswith("scrypt$") and PASSWORD not in person.password_hash
    listed = run(["user", "list"], database_url)
    assert "ada.quill" in listed.stdout and "live" in listed.stdout
    assert PASSWORD not in listed.output
    assert run(["user", "disable", "ada.quill"], database_url).exit_code == 0
    assert "disabled" in run(["user", "list"], database_url).stdout


def test_candidates_search_like_the_pages(database_url, client, auth):
    candidates = post_scenario(client, auth)
    review = next(c for c in candidates if c["stage"] == "review")
    found = run(["candidates", "list", "--search", str(review["id"])], database_url)
    ids = [int(line.split()[0]) for line in found.stdout.splitlines()[1:]]
    assert ids == [review["id"]]
    hit = review["detections"][-1]["frequency_hz"]
    near = run(
        ["candidates", "list", "--frequency-hz", str(hit + 3.0), "--tolerance-hz", "5"],
        database_url,
    )
    assert [int(line.split()[0]) for line in near.stdout.splitlines()[1:]] == [review["id"]]
    far = run(
        ["candidates", "list", "--frequency-hz", str(hit + 30.0), "--tolerance-hz", "5"],
        database_url,
    )
    assert far.stdout.splitlines()[1:] == []
    by_site = run(["candidates", "list", "--search", "tfo"], database_url)
    assert [int(line.split()[0]) for line in by_site.stdout.splitlines()[1:]] == [review["id"]]
    reference = datetime.fromisoformat(review["reference_time"])
    assert f"{mjd_utc(reference):.5f}" in found.stdout
    refused = run(["candidates", "list", "--frequency-hz", "-1"], database_url)
    assert refused.exit_code == 2 and "frequency_hz" in refused.stderr


def test_listing_loads_no_physics_plotting_or_web_code(database_url):
    # what `sites list` imports, in a fresh interpreter: none of the heavy libraries
    probe = (
        "import os, sys\n"
        "from confirm_service.cli import main\n"
        "try:\n    main(['sites', 'list'])\nexcept SystemExit as end:\n    code = end.code\n"
        "heavy = ('astropy', 'numpy', 'scipy', 'matplotlib', 'flask', 'alembic')\n"
        "loaded = [name for name in heavy if name in sys.modules]\n"
        "print('exit', code, 'loaded', ','.join(loaded) or 'none')"
    )
    env = {**os.environ, "CONFIRM_DATABASE_URL": database_url}
    out = subprocess.run(
        [sys.executable, "-c", probe], capture_output=True, text=True, check=True, env=env
    )
    assert out.stdout.strip().splitlines()[-1] == "exit 0 loaded none", out.stdout + out.stderr


def test_the_demo_says_where_the_pages_are_and_how_to_sign_in(tmp_path):
    from confirm_service.db import Database, upgrade_database
    from confirm_service.demo import DemoResult, dashboard_sign_in
    from confirm_service.services.people import sign_in

    url = f"sqlite:///{tmp_path / 'confirm-service.db'}"
    upgrade_database(url)
    lines = dashboard_sign_in(DemoResult(folder=tmp_path, database_url=url), port=8123)
    text = "\n".join(lines)
    assert "http://127.0.0.1:8123/dashboard" in text
    assert f"CONFIRM_DATABASE_URL={url}" in text and "confirm-service serve --port 8123" in text
    found = re.findall(r"^\s+(demo-\S+)\s+password (\S+)", text, flags=re.M)
    assert [name for name, _ in found] == ["demo-coordinator", "demo-viewer"]
    database = Database(url)
    with database.write() as session:  # the printed passwords really sign in
        for name, password in found:
            assert sign_in(session, name, password).actor is not None
    database.dispose()
