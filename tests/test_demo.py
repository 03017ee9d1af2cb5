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
    # scans posted the way a pipeline posts them: registered, hits in batches, then complete
    assert out.count("off_source_scan 4") == 3 and out.count("linked 1") == 2
    assert "reported on request" in out  # the partner site answers the follow-up request
    assert out.count("REJECTED at stage 'screening'") == 1  # the hit the pipeline flagged itself
    assert "PASSED PROTOCOL at stage 'review'" in out
    # the navigation-band carrier the pipeline flagged shows off-source too (default.toml flags
    # listed bands for a person rather than dropping them)
    assert "on_off_cadence failed" in out
    assert "signed checkpoints, intact" in out
    assert "verified offline" in out
    assert len(list(folder.glob("dossier-*/index.html"))) == 1
    assert "not a detection" in out and "post-detection principles" in out
    # the instance holding the signing key is named, to export before any other command
    assert (folder / "audit-signing-key.pem").is_file()
    assert f"export CONFIRM_INSTANCE_PATH={folder.resolve()}" in out
    again = CliRunner().invoke(main, ["demo", "--dir", str(folder)])
    assert again.exit_code == 2 and "exists" in again.output
