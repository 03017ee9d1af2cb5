"""The README's quick start, run as written on a fresh database (bash, curl, a real server).

Only the port changes (a free one) and the password is typed on stdin; the candidate that the
cadence forms is then read back through the shell, the JSON API and the web page.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import socket
import subprocess
import sys
from pathlib import Path

import pytest

README = Path(__file__).resolve().parents[2] / "README.md"
PASSWORD = "quick start pass phrase"


def quick_start_blocks() -> list[str]:
    text = README.read_text(encoding="utf-8")
    section = text[
        text.index("## Quick start") : text.index("\n## ", text.index("## Quick start") + 3)
    ]
    return re.findall(r"```bash\n(.*?)```", section, flags=re.S)


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


@pytest.mark.skipif(shutil.which("curl") is None, reason="curl is not installed")
def test_the_quick_start_works_as_written(tmp_path):
    blocks = quick_start_blocks()
    assert len(blocks) == 3  # set up and serve; the pipeline's cadence; watch the candidate
    port = str(free_port())
    script = "\n".join(blocks).replace("8080", port)
    bin_dir = Path(sys.executable).parent
    env = {**os.environ, "PATH": f"{bin_dir}{os.pathsep}{os.environ['PATH']}"}
    env.pop("CONFIRM_DATABASE_URL", None)
    wrapped = (
        "set -euo pipefail\n"
        "trap 'kill $(jobs -p) 2>/dev/null || true' EXIT\n"  # the server this script started
        + script
        + '\ncurl -sf -H "Authorization: Bearer $TOKEN" '
        + f"http://127.0.0.1:{port}/api/v1/candidates > candidates.json\n"
    )
    done = subprocess.run(
        ["bash", "-c", wrapped],
        cwd=tmp_path,
        env=env,
        input=f"{PASSWORD}\n{PASSWORD}\n",
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert done.returncode == 0, done.stdout[-3000:] + done.stderr[-3000:]
    listed = json.loads((tmp_path / "candidates.json").read_text())["items"]
    assert len(listed) == 1 and listed[0]["target"] == "Kestrel-7"  # the flagged signal
    assert "Kestrel-7" in done.stdout and "MJD" in done.stdout  # `candidates list` and `show`
    assert (tmp_path / "quickstart.db").is_file()
