"""Commands that compute no physics do not load the physics, web or plotting libraries.

This is what keeps their start-up well under a second (figures: benchmarks/bench_cli_startup.py
and the README); the test checks the cause, which does not depend on machine load. Each command
runs in a fresh interpreter, which then reports the heavy modules it holds.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

HEAVY = ("astropy", "numpy", "scipy", "matplotlib", "flask", "jinja2", "rich", "alembic")
LISTINGS = [
    ["sites", "list"],
    ["targets", "list"],
    ["candidates", "list"],
    ["token", "list"],
    ["user", "list"],
    ["audit", "verify"],
]
PROBE = """
import json, sys
from confirm_service.cli import main
try:
    main.main(args=sys.argv[1:], prog_name="confirm-service", standalone_mode=False)
finally:
    heavy = sorted({m.split(".")[0] for m in sys.modules} & set(json.loads(os.environ["HEAVY"])))
    print("HEAVY=" + json.dumps(heavy), file=sys.stderr)
"""


def loaded_heavy_modules(argv: list[str], database_url: str, tmp_path) -> list[str]:
    env = {
        **os.environ,
        "CONFIRM_DATABASE_URL": database_url,
        "CONFIRM_INSTANCE_PATH": str(tmp_path),
        "HEAVY": json.dumps(HEAVY),
    }
    done = subprocess.run(
        [sys.executable, "-c", "import os\n" + PROBE, *argv],
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr
    line = next(x for x in done.stderr.splitlines() if x.startswith("HEAVY="))
    return json.loads(line.removeprefix("HEAVY="))


@pytest.mark.parametrize("argv", LISTINGS, ids=" ".join)
def test_a_listing_loads_no_heavy_library(argv, database_url, tmp_path):
    assert loaded_heavy_modules(argv, database_url, tmp_path) == []


def test_the_probe_sees_a_heavy_library_when_one_is_loaded(database_url, tmp_path):
    # a prediction computes physics, so astropy must show: otherwise the probe proves nothing
    argv = [
        "predict", "--site-lat", "38.5", "--site-lon", "-107.3", "--site-height", "2410",
        "--ra", "201.4", "--dec", "-4.4", "--time", "2026-11-20T06:00:00+00:00",
        "--observed-frequency-hz", "1.42e9",
    ]  # fmt: skip
    assert {"astropy", "numpy"} <= set(loaded_heavy_modules(argv, database_url, tmp_path))
