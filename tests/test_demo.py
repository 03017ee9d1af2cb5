"""The main job on the embedded default: `confirm-service demo` end to end on a fresh SQLite."""

from __future__ import annotations

from click.testing import CliRunner

from confirm_service.cli import main


def test_demo_runs_the_whole_service(tmp_path):
    folder = tmp_path / "demo"
    result = CliRunner().invoke(main, ["demo", "--dir", str(folder)])
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert (folder / "confirm-service.db").is_file()
    assert out.count("REJECTED at stage 'screening'") == 3
    assert "CONFIRMED at stage 'review'" in out
    for reason in ("nonzero_drift failed", "on_off_cadence failed"):
        assert reason in out
    assert "signed checkpoints, intact" in out
    assert "verified offline" in out
    assert (folder / "dossier-4" / "index.html").is_file()
    assert "not a detection" in out and "post-detection principles" in out
    again = CliRunner().invoke(main, ["demo", "--dir", str(folder)])
    assert again.exit_code == 2 and "exists" in again.output
