"""Write a dossier folder: dossier.json, index.html (self-contained, printable), the protocol
files, the public key, and a manifest of SHA-256 digests of every file."""

from __future__ import annotations

import hashlib
import html
import json
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

PLOT_W, PLOT_H, PAD = 640, 220, 48


def _svg_panel(
    title: str,
    unit: str,
    tracks: list[list[tuple[float, float, float]]],
    points: list[tuple[float, float]],
) -> str:
    """A small inline SVG: predicted tracks (line and ±1σ band) and observed points."""
    xs = [x for track in tracks for x, _, _ in track] + [x for x, _ in points]
    ys = [y + s for track in tracks for _, y, s in track] + [
        y - s for track in tracks for _, y, s in track
    ]
    ys += [y for _, y in points]
    if not xs or not ys:
        return ""
    x0, x1 = min(xs), max(xs)
    y0, y1 = min(ys), max(ys)
    x1 = x1 if x1 > x0 else x0 + 1
    margin = (y1 - y0) * 0.1 or max(abs(y0) * 1e-3, 1e-6)
    y0, y1 = y0 - margin, y1 + margin

    def sx(x: float) -> float:
        return PAD + (x - x0) / (x1 - x0) * (PLOT_W - 2 * PAD)

    def sy(y: float) -> float:
        return PLOT_H - PAD + (y - y0) / (y1 - y0) * (2 * PAD - PLOT_H)

    parts = [
        f'<svg viewBox="0 0 {PLOT_W} {PLOT_H}" width="{PLOT_W}" height="{PLOT_H}" '
        f'role="img" aria-label="{html.escape(title)}">',
        f'<rect x="{PAD}" y="{PAD / 2}" width="{PLOT_W - 2 * PAD}" '
        f'height="{PLOT_H - 1.5 * PAD}" fill="none" stroke="#999"/>',
        f'<text x="{PAD}" y="14" font-size="12">{html.escape(title)}</text>',
        f'<text x="4" y="{PLOT_H / 2}" font-size="10">{html.escape(unit)}</text>',
        f'<text x="{PAD}" y="{PLOT_H - 8}" font-size="10">{y0:.6g} … {y1:.6g} {unit}; '
        f"time {datetime.fromtimestamp(x0, UTC).isoformat(timespec='minutes')} → "
        f"{datetime.fromtimestamp(x1, UTC).isoformat(timespec='minutes')}</text>",
    ]
    for track in tracks:
        upper = " ".join(f"{sx(x):.1f},{sy(y + s):.1f}" for x, y, s in track)
        lower = " ".join(f"{sx(x):.1f},{sy(y - s):.1f}" for x, y, s in reversed(track))
        parts.append(f'<polygon points="{upper} {lower}" fill="#9cc3e6" opacity="0.5"/>')
        line = " ".join(f"{sx(x):.1f},{sy(y):.1f}" for x, y, _ in track)
        parts.append(f'<polyline points="{line}" fill="none" stroke="#1f5f99" stroke-width="1.5"/>')
    for x, y in points:
        parts.append(f'<circle cx="{sx(x):.1f}" cy="{sy(y):.1f}" r="3.5" fill="#c0392b"/>')
    parts.append("</svg>")
    return "".join(parts)


def _ts(text: str) -> float:
    return datetime.fromisoformat(text).timestamp()


def site_plots(dossier: dict[str, Any]) -> dict[str, str]:
    """Per site: frequency (offset from the reference, Hz) and drift against predicted tracks."""
    reference_hz = dossier["candidate"]["barycentric_frequency_hz"]
    plots: dict[str, str] = {}
    for site in sorted({scan["site"] for scan in dossier["scans"]}):
        scans = [s for s in dossier["scans"] if s["site"] == site and s["on_source"]]
        found = [p for p in dossier["predictions"] if p["site"] == site]
        if not scans and not found:
            continue
        f_tracks = [
            [
                (_ts(t["time"]), t["frequency_hz"] - reference_hz, t["frequency_sigma_hz"])
                for t in s["track"]
            ]
            for s in scans
        ]
        f_points = [(_ts(p["time"]), p["observed_frequency_hz"] - reference_hz) for p in found]
        d_tracks = [[(_ts(t["time"]), t["drift_hz_s"], 0.0) for t in s["track"]] for s in scans]
        d_points = [(_ts(p["time"]), p["observed_drift_hz_s"]) for p in found]
        plots[site] = _svg_panel(
            f"{site}: observed frequency (dots) and predicted track, minus {reference_hz:,.3f} Hz",
            "Hz",
            f_tracks,
            f_points,
        ) + _svg_panel(
            f"{site}: observed drift (dots) and predicted drift", "Hz/s", d_tracks, d_points
        )
    return plots


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


def html_page(dossier: dict[str, Any]) -> str:
    c = dossier["candidate"]
    audit = dossier["audit"]
    plots = site_plots(dossier)
    plot_html = "".join(f"<h3>{html.escape(site)}</h3>{svg}" for site, svg in plots.items())
    checks = _table(
        c["checks"], ["kind", "outcome", "measured", "expected", "tolerance", "unit", "reason"]
    )
    history = _table(
        c["history"], ["at", "from_stage", "to_stage", "from_state", "to_state", "reason", "actor"]
    )
    predictions = _table(
        dossier["predictions"],
        [
            "site",
            "time",
            "observed_frequency_hz",
            "predicted_frequency_hz",
            "frequency_sigma_hz",
            "observed_drift_hz_s",
            "predicted_drift_hz_s",
            "drift_sigma_hz_s",
            "role",
        ],
    )
    scans = _table(
        dossier["scans"],
        [
            "observation",
            "site",
            "on_source",
            "target",
            "start",
            "duration_s",
            "frequency_min_hz",
            "frequency_max_hz",
            "channel_width_hz",
        ],
    )
    signoffs = _table(c["signoffs"], ["at", "stage", "person", "role", "approve", "rationale"])
    comments = _table(c["comments"], ["at", "author", "role", "text"])
    requests = _table(
        dossier["followups"]["requests"], ["created_at", "kind", "stage", "status", "payload"]
    )
    reports = _table(
        dossier["followups"]["reports"],
        ["observed_at", "site", "detected", "frequency_hz", "drift_hz_s", "notes"],
    )
    entries = _table(
        [e["entry"] for e in audit["entries"]], ["seq", "at", "actor", "role", "action", "subject"]
    )
    checkpoint = audit["checkpoint"]
    return f"""<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<title>Dossier of candidate {c["id"]}</title>
<style>
body {{ font-family: system-ui, sans-serif; margin: 2em; max-width: 1100px; color: #222; }}
table {{ border-collapse: collapse; margin: 0.5em 0 1.5em; font-size: 0.85em; }}
th, td {{ border: 1px solid #bbb; padding: 3px 6px; vertical-align: top; text-align: left; }}
th {{ background: #eee; }}
.caution {{ border: 2px solid #8a5a00; background: #fff6e0; padding: 0.8em 1em; }}
code, pre {{ font-size: 0.8em; white-space: pre-wrap; word-break: break-all; }}
@media print {{ body {{ margin: 0.5cm; }} h2 {{ page-break-after: avoid; }} }}
</style></head><body>
<h1>Candidate {c["id"]}: {html.escape(c["state"])} at stage {html.escape(c["stage"])}</h1>
<p class="caution"><strong>Caution.</strong> {html.escape(dossier["caution"])}</p>
<p>Target {html.escape(str(c["target"]))}; discovered at {html.escape(c["site"])};
barycentric frequency {c["barycentric_frequency_hz"]:,.3f} Hz; residual drift
{c["residual_drift_hz_s"]:+.6f} Hz/s; reference time {html.escape(c["reference_time"])}.
Protocol {html.escape(dossier["protocol"]["name"])} {html.escape(dossier["protocol"]["version"])},
SHA-256 <code>{dossier["protocol"]["sha256"]}</code>.</p>
<h2>Checks (latest result of each kind)</h2>{checks}
<h2>Observed against predicted</h2>{predictions}{plot_html}
<h2>History</h2>{history}
<h2>Sign-offs</h2>{signoffs}
<h2>Comments</h2>{comments}
<h2>Follow-up requests and reports</h2>{requests}{reports}
<h2>Scans that bear on the candidate</h2>{scans}
<h2>Audit entries and proof</h2>
<p>{len(audit["entries"])} entries, each with an RFC 6962 inclusion proof against checkpoint
{checkpoint["id"]} (tree size {checkpoint["tree_size"]}, root
<code>{checkpoint["root_hash_hex"]}</code>, signed {html.escape(checkpoint["timestamp"])} with
Ed25519 key <code>{html.escape(audit["key_id"])}</code>). Check offline with
<code>confirm-service dossier verify DIR --public-key KEY.pem</code>.</p>{entries}
<p class="caution">{html.escape(dossier["caution"])}</p>
</body></html>
"""


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
