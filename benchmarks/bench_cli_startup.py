"""Start-up time of the ``confirm-service`` command beside a bare ``python -c pass``.

Creates a throw-away SQLite database with one site and one target, then runs each command
``--repeat`` times in a fresh process and prints the median and best wall-clock time and the
ratio to the bare interpreter. Commands that compute no physics should stay under 1 s.
Not a test: it asserts nothing.

    python benchmarks/bench_cli_startup.py [--repeat 7]
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CLI = [sys.executable, "-m", "confirm_service.cli"]
COMMANDS = [
    ("python -c pass", [sys.executable, "-c", "pass"]),
    (
        "floor: import sqlalchemy.orm, pydantic",
        [sys.executable, "-c", "import sqlalchemy.orm, pydantic"],
    ),
    ("confirm-service --help", [*CLI, "--help"]),
    ("confirm-service sites list", [*CLI, "sites", "list"]),
    ("confirm-service targets show Bench-1", [*CLI, "targets", "show", "Bench-1"]),
    ("confirm-service candidates list", [*CLI, "candidates", "list"]),
    ("confirm-service user list", [*CLI, "user", "list"]),
    ("confirm-service token list", [*CLI, "token", "list"]),
]


def timed(argv: list[str], env: dict[str, str]) -> tuple[float, float]:
    """Wall-clock and CPU seconds (user + system) of one run in a fresh process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    started = time.perf_counter()
    subprocess.run(argv, env=env, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    wall = time.perf_counter() - started
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def prepare(env: dict[str, str]) -> None:
    steps = [
        ["db", "upgrade"],
        [
            "sites",
            "add",
            "BSH",
            "--name",
            "Bench Hill",
            "--lat",
            "10",
            "--lon",
            "20",
            "--height",
            "5",
        ],
        ["targets", "add", "Bench-1", "--ra", "10", "--dec", "-20"],
    ]
    for step in steps:
        subprocess.run([*CLI, *step], env=env, check=True, capture_output=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=7)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        env = {
            **os.environ,
            "CONFIRM_DATABASE_URL": f"sqlite:///{Path(folder) / 'bench.db'}",
            "CONFIRM_INSTANCE_PATH": folder,
        }
        prepare(env)
        print(f"{'command':<42} {'wall s':>7} {'best s':>7} {'CPU s':>6} {'× bare python':>14}")
        bare = None
        for label, argv in COMMANDS:
            runs = [timed(argv, env) for _ in range(args.repeat)]
            wall = statistics.median(w for w, _ in runs)
            cpu = statistics.median(c for _, c in runs)
            bare = bare or wall
            best = min(w for w, _ in runs)
            print(f"{label:<42} {wall:>7.3f} {best:>7.3f} {cpu:>6.3f} {wall / bare:>14.1f}")
    print(
        f"(median of {args.repeat} runs each; wall clock depends on machine load, CPU s less so; "
        f"python {sys.version.split()[0]}, load average {os.getloadavg()[0]:.1f})"
    )


if __name__ == "__main__":
    main()
