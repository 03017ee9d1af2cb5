"""Write a dossier folder: dossier.json, index.html (self-contained, printable), the protocol
files, the public key, and a manifest of SHA-256 digests of every file."""

from __future__ import annotations

import hashlib
import html
import json
from pathlib import Path
from typing import Any

from confirm_service.dossier.plots import site_residual_panels


def site_plots(dossier: dict[str, Any]) -> dict[str, str]:
    """Per site: each linked detection's frequency and drift against its prediction (SVG)."""
    return site_residual_panels(dossier["predictions"])


def _table(rows: list[dict[str, Any]], columns: list[str]) -> str:
    head = "".join(f"<th>{html.escape(c)}</th>" for c in columns)
    body = "".join(
        "<tr>" + "".join(f"<td>{html.escape(_cell(r.get(c)))}</td>" for c in columns) + "</tr>"
        for r in rows
    )
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _cell(value: Any) -> str:
    if value is None:
        return "—"
    if isinstance(value, float):
        return f"{value:,.6f}" if abs(value) >= 1e5 else f"{value:.6g}"
    if isinstance(value, dict | list):
        return json.dumps(value, sort_keys=True)
    return str(value)


CHECK_COLUMNS = [
    "kind",
    "outcome",
    "measured",
    "expected",
    "tolerance",
    "unit",
    "reason",
    "details",
]
HISTORY_COLUMNS = ["at", "from_stage", "to_stage", "from_state", "to_state", "reason", "actor"]
PREDICTION_COLUMNS = [
    "site",
    "time",
    "observed_frequency_hz",
    "predicted_frequency_hz",
    "frequency_sigma_hz",
    "observed_drift_hz_s",
    "predicted_drift_hz_s",
    "drift_sigma_hz_s",
    "role",
]
SCAN_COLUMNS = [
    "observation",
    "site",
    "on_source",
    "target",
    "start",
    "duration_s",
    "frequency_min_hz",
    "frequency_max_hz",
    "channel_width_hz",
]
SIGNOFF_COLUMNS = ["at", "stage", "person", "role", "approve", "rationale"]
COMMENT_COLUMNS = ["at", "author", "role", "text"]
REQUEST_COLUMNS = ["created_at", "kind", "stage", "status", "payload"]
REPORT_COLUMNS = [
    "observed_at",
    "time_offset_s",
    "site",
    "detected",
    "frequency_hz",
    "drift_hz_s",
    "threshold_snr",
    "sefd_jy",
    "warnings",
    "notes",
]
ENTRY_COLUMNS = ["seq", "at", "actor", "role", "action", "subject"]
STYLE = """
body { font-family: system-ui, sans-serif; margin: 2em; max-width: 1100px; color: #222; }
table { border-collapse: collapse; margin: 0.5em 0 1.5em; font-size: 0.85em; }
th, td { border: 1px solid #bbb; padding: 3px 6px; vertical-align: top; text-align: left; }
th { background: #eee; }
.caution { border: 2px solid #8a5a00; background: #fff6e0; padding: 0.8em 1em; }
code, pre { font-size: 0.8em; white-space: pre-wrap; word-break: break-all; }
@media print { body { margin: 0.5cm; } h2 { page-break-after: avoid; } }
"""


def html_page(dossier: dict[str, Any]) -> str:
    """The dossier as one self-contained, printable HTML page (tables and SVG plots)."""
    c = dossier["candidate"]
    plots = site_plots(dossier)
    plot_html = "".join(f"<h3>{html.escape(site)}</h3>{svg}" for site, svg in plots.items())
    followups = dossier["followups"]
    entries = [e["entry"] for e in dossier["audit"]["entries"]]
    return f"""<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<title>Dossier of candidate {c["id"]}</title>
<style>{STYLE}</style></head><body>
<h1>Candidate {c["id"]}: {html.escape(c["state"])} at stage {html.escape(c["stage"])}</h1>
<p class="caution"><strong>Caution.</strong> {html.escape(dossier["caution"])}</p>
{_summary(dossier)}
<h2>Checks (latest result of each kind)</h2>{_table(c["checks"], CHECK_COLUMNS)}
<h2>Observed against predicted</h2>{_table(dossier["predictions"], PREDICTION_COLUMNS)}{plot_html}
<h2>History</h2>{_table(c["history"], HISTORY_COLUMNS)}
<h2>Sign-offs</h2>{_table(c["signoffs"], SIGNOFF_COLUMNS)}
<h2>Comments</h2>{_table(c["comments"], COMMENT_COLUMNS)}
<h2>Follow-up requests and reports</h2>{_table(followups["requests"], REQUEST_COLUMNS)}\
{_table(followups["reports"], REPORT_COLUMNS)}
<h2>Scans that bear on the candidate</h2>{_table(dossier["scans"], SCAN_COLUMNS)}
<h2>Audit entries and proof</h2>
{_proof_paragraph(dossier["audit"])}{_table(entries, ENTRY_COLUMNS)}
</body></html>
"""


def _summary(dossier: dict[str, Any]) -> str:
    """Target, discovery site, barycentric frequency, residual drift and protocol, in one line."""
    c, protocol = dossier["candidate"], dossier["protocol"]
    return f"""<p>Target {html.escape(str(c["target"]))}; discovered at {html.escape(c["site"])};
barycentric frequency {c["barycentric_frequency_hz"]:,.3f} Hz; residual drift
{c["residual_drift_hz_s"]:+.6f} Hz/s; reference time {html.escape(c["reference_time"])}.
Protocol {html.escape(protocol["name"])} {html.escape(protocol["version"])},
SHA-256 <code>{protocol["sha256"]}</code>.</p>"""


def _proof_paragraph(audit: dict[str, Any]) -> str:
    """How the audit entries are proven: the checkpoint, its key, and the command to check."""
    checkpoint = audit["checkpoint"]
    return f"""<p>{len(audit["entries"])} entries, each with an RFC 6962 inclusion proof against \
checkpoint
{checkpoint["id"]} (tree size {checkpoint["tree_size"]}, root
<code>{checkpoint["root_hash_hex"]}</code>, signed {html.escape(checkpoint["timestamp"])} with
Ed25519 key <code>{html.escape(audit["key_id"])}</code>). Check offline with
<code>confirm-service dossier verify DIR --public-key KEY.pem</code>.</p>"""


def write_dossier(dossier: dict[str, Any], folder: Path) -> list[Path]:
    """Write the dossier files into ``folder`` (created); returns the paths written."""
    folder.mkdir(parents=True, exist_ok=True)
    files = {
        "dossier.json": json.dumps(dossier, indent=1, sort_keys=True, allow_nan=False),
        "index.html": html_page(dossier),
        "protocol.toml": dossier["protocol"]["text"],
        "public-key.pem": dossier["audit"]["public_key_pem"],
    }
    if dossier["protocol"]["bands_text"] is not None:
        files["interference_bands.toml"] = dossier["protocol"]["bands_text"]
    written = []
    for name, text in files.items():
        path = folder / name
        path.write_bytes(text.encode("utf-8"))
        written.append(path)
    manifest = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in written}
    manifest_path = folder / "manifest.json"
    manifest_path.write_text(json.dumps(manifest, indent=1, sort_keys=True), encoding="utf-8")
    return [*written, manifest_path]
