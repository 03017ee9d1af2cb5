"""An invented scenario that exercises the whole service through its HTTP API.

Three invented sites on three continents, three invented targets, an on/off cadence at the first
site with interference and one sky-fixed signal, a re-observation a day later, and a look from a
distant partner site at the frequency predicted for it. The sky-fixed signal is generated with
the physics engine (the same hypothesis the checks test); the interference is not.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import numpy as np

from confirm_service import physics
from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION
from confirm_service.timeutil import utc_now

SITES = [
    {
        "code": "PRA",
        "name": "Pell Ridge Array",
        "latitude_deg": 38.52,
        "longitude_deg": -107.31,
        "elevation_m": 2410.0,
        "min_elevation_deg": 15.0,
        "sun_avoidance_deg": 10.0,
        "email": "ops@pell-ridge.example",
    },
    {
        "code": "TFO",
        "name": "Tamsin Flats Observatory",
        "latitude_deg": -31.21,
        "longitude_deg": 118.93,
        "elevation_m": 310.0,
        "min_elevation_deg": 12.0,
        "sun_avoidance_deg": 10.0,
        "webhook_url": "https://tamsin-flats.example/hooks/confirm",
    },
    {
        "code": "ORV",
        "name": "Orvale Dish",
        "latitude_deg": 44.08,
        "longitude_deg": 5.61,
        "elevation_m": 820.0,
        "min_elevation_deg": 10.0,
        "sun_avoidance_deg": 15.0,
        "email": "duty@orvale.example",
    },
]
TARGETS = [
    {
        "name": "Kestrel-7",
        "ra_deg": 201.365,
        "dec_deg": -4.42,
        "pm_ra_mas_yr": -12.5,
        "pm_dec_mas_yr": 4.1,
        "parallax_mas": 38.2,
        "epoch": "2016-01-01T00:00:00+00:00",  # the invented catalogue's epoch, registered too
    },
    {"name": "Lumen-12", "ra_deg": 84.71, "dec_deg": 31.05},
    {"name": "Harrow-3", "ra_deg": 312.02, "dec_deg": -48.3},
]
SCENARIO_START = datetime(2026, 11, 20, tzinfo=UTC)
SCAN_S = 300.0
BAND_HZ = (1.10e9, 1.70e9)
CHANNEL_HZ = 3.81
TIME_RESOLUTION_S = 12.5

SKY_FIXED_HZ = 1_423_051_733.25
SKY_FIXED_RESIDUAL_HZ_S = 0.0135
"""The invented transmitter: observed at 1423.05 MHz at the first scan, drifting slightly."""

INTERFERENCE = {
    "present_off_source": {"frequency_hz": 1_431_250_000.0, "drift_hz_s": 0.0, "snr": 41.0},
    "zero_drift": {"frequency_hz": 1_436_480_112.5, "drift_hz_s": 0.0, "snr": 17.5},
    "navigation_band": {"frequency_hz": 1_575_420_040.0, "drift_hz_s": 0.153, "snr": 55.0},
}
"""Three kinds of human-made interference, as a pipeline would see them."""


@dataclass
class DemoResult:
    folder: Path
    database_url: str
    candidates: list[dict[str, Any]] = field(default_factory=list)
    counts: dict[str, int] = field(default_factory=dict)
    audit: dict[str, Any] = field(default_factory=dict)
    dossier: Path | None = None


def _location(site: dict[str, Any]) -> Any:
    return physics.site_location(site["latitude_deg"], site["longitude_deg"], site["elevation_m"])


def _coord(target: dict[str, Any]) -> Any:
    return physics.target_coord(
        target["ra_deg"],
        target["dec_deg"],
        pm_ra_mas_yr=target.get("pm_ra_mas_yr"),
        pm_dec_mas_yr=target.get("pm_dec_mas_yr"),
        parallax_mas=target.get("parallax_mas"),
        epoch=datetime.fromisoformat(target["epoch"]) if "epoch" in target else None,
    )


def first_window(
    site: dict[str, Any], target: dict[str, Any], after: datetime, minimum_s: float
) -> datetime:
    """Start of the first window after ``after`` long enough for ``minimum_s`` of scans."""
    windows = physics.visibility_windows(
        _location(site),
        _coord(target),
        after,
        after + timedelta(days=3),
        min_elevation_deg=site["min_elevation_deg"],
        sun_avoidance_deg=site["sun_avoidance_deg"],
    )
    for window in windows:
        if (window.end - window.start).total_seconds() >= minimum_s + 600:
            return window.start + timedelta(minutes=5)
    raise RuntimeError(f"no visibility window for {target['name']} at {site['code']}")


class SkyFixedSignal:
    """The invented transmitter, predicted at any site and time by the physics engine."""

    def __init__(
        self,
        site: dict[str, Any],
        target: dict[str, Any],
        at: datetime,
        frequency_hz: float = SKY_FIXED_HZ,
        residual_drift_hz_s: float = SKY_FIXED_RESIDUAL_HZ_S,
    ) -> None:
        self.target = _coord(target)
        location = _location(site)
        earth = float(
            np.ravel(
                physics.earth_drift_hz_s(location, self.target, physics.utc_time(at), frequency_hz)
            )[0]
        )
        self.reference = physics.SignalMeasurement(
            location, at.timestamp(), frequency_hz, earth + residual_drift_hz_s
        )

    def seen_at(self, site: dict[str, Any], at: datetime, snr: float) -> dict[str, float]:
        prediction = physics.predict_signal(
            self.reference, self.target, _location(site), [at.timestamp()]
        )
        return {
            "frequency_hz": round(float(prediction.frequency_hz[0]), 3),
            "drift_hz_s": round(float(prediction.drift_hz_s[0]), 5),
            "snr": snr,
        }


@dataclass(frozen=True)
class Instrument:
    """A receiver's scan settings (invented): scan length (s), band (Hz), channel width (Hz),
    time resolution (s)."""

    scan_s: float
    band_hz: tuple[float, float]
    channel_hz: float
    time_resolution_s: float


DEMO_INSTRUMENT = Instrument(SCAN_S, BAND_HZ, CHANNEL_HZ, TIME_RESOLUTION_S)


def scan_body(
    site: str,
    start: datetime,
    on_source: bool,
    cadence: str,
    target: str | None,
    pointing: tuple[float, float] | None,
    run: str,
    instrument: Instrument = DEMO_INSTRUMENT,
) -> dict[str, Any]:
    """An observation body as a pipeline registers it (its hits follow in batches)."""
    body: dict[str, Any] = {
        "site": site,
        "start": start.isoformat(),
        "duration_s": instrument.scan_s,
        "frequency_min_hz": instrument.band_hz[0],
        "frequency_max_hz": instrument.band_hz[1],
        "channel_width_hz": instrument.channel_hz,
        "time_resolution_s": instrument.time_resolution_s,
        "on_source": on_source,
        "beam": "b0",
        "cadence": cadence,
        "pipeline_run": run,
    }
    if target:
        body["target"] = target
    if pointing:
        body["pointing_ra_deg"], body["pointing_dec_deg"] = pointing
    return body


def _scan(
    site: str,
    start: datetime,
    on_source: bool,
    cadence: str,
    target: str | None,
    pointing: tuple[float, float] | None,
    detections: list[dict[str, Any]],
    run: str,
) -> dict[str, Any]:
    body = scan_body(site, start, on_source, cadence, target, pointing, run)
    return {**body, "detections": detections}


def noise_hits(rng: np.random.Generator, count: int) -> list[dict[str, Any]]:
    """Faint hits below the intake threshold, as every scan has."""
    return [
        {
            "frequency_hz": float(rng.uniform(1.40e9, 1.45e9)),
            "drift_hz_s": float(rng.uniform(-2, 2)),
            "snr": float(rng.uniform(5, 9)),
            "time_offset_s": float(rng.uniform(0, SCAN_S)),
        }
        for _ in range(count)
    ]


def scenario_scans() -> list[tuple[str, dict[str, Any]]]:
    """Every scan of the scenario in time order, labelled for the summary."""
    rng = np.random.default_rng(20261120)
    north, south = SITES[0], SITES[1]
    target = TARGETS[0]
    cadence_start = first_window(north, target, SCENARIO_START, 6 * SCAN_S)
    signal = SkyFixedSignal(north, target, cadence_start + timedelta(seconds=60))
    scans: list[tuple[str, dict[str, Any]]] = []
    off_pointings = [
        (target["ra_deg"] + 0.9, target["dec_deg"]),
        (target["ra_deg"] - 0.9, target["dec_deg"] + 0.5),
        (target["ra_deg"], target["dec_deg"] - 1.1),
    ]
    for index in range(6):
        start = cadence_start + timedelta(seconds=index * (SCAN_S + 30))
        on = index % 2 == 0
        hits = noise_hits(rng, 40)
        hits.append({**INTERFERENCE["present_off_source"], "time_offset_s": 12.0})
        # A satellite-navigation carrier enters at every pointing and drifts steadily; the
        # pipeline flags it itself the first time.
        flag = {"candidate": True} if index == 0 else {}
        navigation = INTERFERENCE["navigation_band"]
        drifted_hz = navigation["frequency_hz"] + navigation["drift_hz_s"] * index * (SCAN_S + 30)
        hits.append({**navigation, "frequency_hz": drifted_hz, "time_offset_s": 45.0, **flag})
        if on:
            hits.append({**INTERFERENCE["zero_drift"], "time_offset_s": 30.0})
            hit = signal.seen_at(north, start + timedelta(seconds=60), 24.0 - index)
            hits.append({**hit, "time_offset_s": 60.0})
        label = f"cadence scan {index + 1} ({'on' if on else 'off'}-source)"
        scans.append(
            (
                label,
                _scan(
                    "PRA",
                    start,
                    on,
                    "PRA-20261120-K7",
                    target["name"] if on else None,
                    None if on else off_pointings[index // 2],
                    hits,
                    "run-0042",
                ),
            )
        )
    again = first_window(north, target, cadence_start + timedelta(hours=20), SCAN_S)
    hit = signal.seen_at(north, again + timedelta(seconds=90), 21.0)
    scans.append(
        (
            "re-observation",
            _scan(
                "PRA",
                again,
                True,
                "PRA-20261121-K7",
                target["name"],
                None,
                [*noise_hits(rng, 40), {**hit, "time_offset_s": 90.0}],
                "run-0043",
            ),
        )
    )
    look = first_window(south, target, again + timedelta(hours=1), SCAN_S)
    hit = signal.seen_at(south, look + timedelta(seconds=120), 15.5)
    scans.append(
        (
            "independent site",
            _scan(
                "TFO",
                look,
                True,
                "TFO-20261122-K7",
                target["name"],
                None,
                [*noise_hits(rng, 40), {**hit, "time_offset_s": 120.0}],
                "tf-7781",
            ),
        )
    )
    return scans


def post_like_a_pipeline(
    call: Callable[..., Any], who: str, scan: dict[str, Any]
) -> dict[str, Any]:
    """Register the scan, send its hits in two batches, the last one closing the scan."""
    hits = scan["detections"]
    created = call("POST", "/api/v1/observations", who, {**scan, "detections": []})
    half = len(hits) // 2
    path = f"/api/v1/observations/{created['id']}/detections"
    first = call("POST", path, who, {"detections": hits[:half]})
    last = call("POST", path, who, {"detections": hits[half:], "complete": True})
    return {"id": created["id"], "candidate_ids": first["candidate_ids"] + last["candidate_ids"]}


def screening_line(call: Callable[..., Any], posted: dict[str, Any]) -> str:
    """One line on what screening made of a scan's hits."""
    counts = call("GET", f"/api/v1/observations/{posted['id']}/screening", "coordinator-a")
    reasons = ", ".join(f"{name} {n}" for name, n in counts["reasons"].items())
    if counts["pending"]:
        reasons += f", pending {counts['pending']} (waiting for the cadence's other scans)"
    new = f"; new candidates {posted['candidate_ids']}" if posted["candidate_ids"] else ""
    return f"{counts['detection_count']:3d} hits: {reasons}{new}"


def run_demo(folder: Path, say: Callable[[str], None]) -> DemoResult:
    """Create a fresh SQLite database in ``folder`` and run the scenario through the API."""
    from confirm_service.actor import SYSTEM
    from confirm_service.app import create_app
    from confirm_service.audit.checkpoints import set_up_signing_key
    from confirm_service.db import upgrade_database
    from confirm_service.services.tokens import create_token

    folder.mkdir(parents=True, exist_ok=False)
    url = f"sqlite:///{folder / 'confirm-service.db'}"
    result = DemoResult(folder=folder, database_url=url)
    say(f"database: {url}")
    upgrade_database(url)
    app = create_app({"database_url": url, "instance_path": folder})
    db = app.extensions["confirm.db"]
    with db.read() as session:
        key_file, _ = set_up_signing_key(session, app.extensions["confirm.settings"])
    say(f"audit signing key: {key_file}")
    secrets = {}
    with db.write() as session:
        for name, role in [
            ("pipeline-pra", "pipeline"),
            ("pipeline-tfo", "pipeline"),
            ("coordinator-a", "coordinator"),
            ("coordinator-b", "coordinator"),
        ]:
            _, secrets[name] = create_token(session, SYSTEM, name, role)
    client = app.test_client()

    def call(method: str, path: str, who: str, body: Any = None) -> Any:
        response = client.open(
            path, method=method, json=body, headers={"Authorization": f"Bearer {secrets[who]}"}
        )
        if response.status_code >= 400:
            raise RuntimeError(f"{method} {path}: {response.status_code} {response.get_json()}")
        return response.get_json()

    for site in SITES:
        call("POST", "/api/v1/sites", "coordinator-a", site)
    for target in TARGETS:
        call("POST", "/api/v1/targets", "coordinator-a", target)
    say(f"registered {len(SITES)} sites and {len(TARGETS)} targets")
    with db.write() as session:  # a site token names a registered site
        _, secrets["site-tfo"] = create_token(session, SYSTEM, "site-tfo", "site", "TFO")
    detections = 0
    *scans, (partner_label, partner_scan) = scenario_scans()
    for label, scan in scans:
        who = "pipeline-tfo" if scan["site"] == "TFO" else "pipeline-pra"
        detections += len(scan["detections"])
        new = post_like_a_pipeline(call, who, scan)
        say(f"  {label:<32} {scan['site']} {scan['start'][:16]}Z  {screening_line(call, new)}")
    detections += partner_follow_up(app, call, say, partner_label, partner_scan)
    listing = call("GET", "/api/v1/candidates?limit=100", "coordinator-a")
    for summary in listing["items"]:
        if summary["stage"] == "review" and summary["state"] == "open":
            for who in ("coordinator-a", "coordinator-b"):
                call(
                    "POST",
                    f"/api/v1/candidates/{summary['id']}/signoffs",
                    who,
                    {
                        "approve": True,
                        "rationale": "Dossier reviewed: cadence, drift, "
                        "re-observation and the independent site agree with a sky-fixed source.",
                    },
                )
    listing = call("GET", "/api/v1/candidates?limit=100", "coordinator-a")
    result.candidates = [
        call("GET", f"/api/v1/candidates/{c['id']}", "coordinator-a") for c in listing["items"]
    ]
    result.counts = {
        "sites": len(SITES),
        "targets": len(TARGETS),
        "detections": detections,
        "candidates": len(result.candidates),
    }
    _write_and_check_dossier(app, result)
    app.extensions["confirm.db"].dispose()
    return result


class PartnerReceiver:
    """Stands in for a partner's webhook on 127.0.0.1: checks each signed request it gets."""

    def __init__(self, secret: str) -> None:
        import threading
        from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer

        from confirm_service.followup import signing

        self.received: list[dict[str, Any]] = []
        receiver = self

        class Handler(BaseHTTPRequestHandler):
            def do_POST(self) -> None:  # noqa: N802 - http.server's naming
                body = self.rfile.read(int(self.headers.get("Content-Length", "0")))
                headers = {k: v for k, v in self.headers.items()}
                signing.verify(secret, signing.envelope_of(headers), body)
                receiver.received.append(json.loads(body))
                answer = json.dumps({"acknowledged": True}).encode()
                self.send_response(200)
                self.send_header("Content-Type", "application/json")
                self.send_header("Content-Length", str(len(answer)))
                self.end_headers()
                self.wfile.write(answer)

            def log_message(self, *args: Any) -> None:
                return

        self.server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.thread = threading.Thread(target=self.server.serve_forever, daemon=True)
        self.thread.start()
        self.url = f"http://127.0.0.1:{self.server.server_address[1]}/hooks/confirm"

    def close(self) -> None:
        self.server.shutdown()
        self.server.server_close()


def partner_follow_up(
    app: Any, call: Callable[..., Any], say: Callable[[str], None], label: str, scan: Any
) -> int:
    """The distant partner (TFO) receives the protocol's follow-up request, signed, at its
    webhook (a local stand-in), observes, and reports its scan and hits against the request.
    Returns the number of detections reported."""
    from confirm_service.actor import SYSTEM
    from confirm_service.scheduler.jobs import run_due
    from confirm_service.services.federation import set_partner_secret

    db = app.extensions["confirm.db"]
    settings = app.extensions["confirm.settings"]
    with db.write() as session:
        secret = set_partner_secret(session, SYSTEM, "TFO")
    receiver = PartnerReceiver(secret)
    try:
        call("PATCH", "/api/v1/sites/TFO", "coordinator-a", {"webhook_url": receiver.url})
        run_due(db, replace(settings, followup_lead_time_s=30 * 86400.0), utc_now())
    finally:
        receiver.close()
    (message,) = [m for m in receiver.received if m["content"]["site"] == "TFO"]
    content = message["content"]
    preferred = content["preferred_windows"]
    say(
        f"  follow-up request {message['request_id']} delivered, signed, to TFO: "
        f"{len(content['windows'])} windows in {content['horizon']['start'][:10]}.."
        f"{content['horizon']['end'][:10]}, {len(preferred)} discriminating"
    )
    if content["windows"]:
        say(f"    {content['windows'][0]['why']}")
    report = {"observation": scan, "detected": True, "threshold_snr": 10.0, "sefd_jy": 40.0}
    call("POST", f"/api/v1/followups/{message['request_id']}/reports", "site-tfo", report)
    say(
        f"  {label:<32} {scan['site']} {scan['start'][:16]}Z  "
        f"{len(scan['detections']):3d} detections, reported on request {message['request_id']}"
    )
    return len(scan["detections"])


def _write_and_check_dossier(app: Any, result: DemoResult) -> None:
    """Dossier of the candidate that went furthest, verified offline; then the whole log."""
    from confirm_service.audit.checkpoints import service_public_key
    from confirm_service.audit.verify import verify_log
    from confirm_service.dossier.build import build_dossier
    from confirm_service.dossier.render import write_dossier
    from confirm_service.dossier.verify import verify_dossier

    db = app.extensions["confirm.db"]
    settings = app.extensions["confirm.settings"]
    best = max(
        result.candidates, key=lambda c: (c["state"] == "passed_protocol", len(c["history"]))
    )
    with db.write() as session:
        document = build_dossier(session, settings, best["id"])
    result.dossier = result.folder / f"dossier-{best['id']}"
    write_dossier(document, result.dossier)
    public_pem, _ = service_public_key(settings)
    report = verify_dossier(result.dossier, public_pem)
    with db.read() as session:
        log_report = verify_log(session, public_pem)
    result.audit = {
        "dossier_ok": report.ok,
        "dossier_checked": report.checked,
        "log_ok": log_report.ok,
        "entries": log_report.entries_checked,
        "checkpoints": log_report.checkpoints_checked,
    }


def format_value(value: float | None, unit: str | None) -> str:
    if value is None:
        return "—"
    text = f"{value:.6g}" if abs(value) < 1e6 else f"{value:,.3f}"
    return f"{text} {unit}" if unit else text


def summary_lines(result: DemoResult) -> list[str]:
    lines = [
        "",
        f"{result.counts['detections']} detections from {result.counts['sites']} sites; "
        f"{result.counts['candidates']} candidates:",
    ]
    for candidate in result.candidates:
        lines.append("")
        lines.append(
            f"candidate {candidate['id']}: {candidate['state'].replace('_', ' ').upper()} at stage "
            f"{candidate['stage']!r}  (f_bary {candidate['barycentric_frequency_hz']:,.3f} Hz, "
            f"residual drift {candidate['residual_drift_hz_s']:+.5f} Hz/s)"
        )
        if candidate["reason"]:
            lines.append(f"  why: {candidate['reason']}")
        lines.append(
            f"  {'check':<20} {'outcome':<15} {'measured':>22} {'expected':>22} {'tolerance':>14}"
        )
        for check in candidate["checks"]:
            lines.append(
                f"  {check['kind']:<20} {check['outcome']:<15} "
                f"{format_value(check['measured'], check['unit']):>22} "
                f"{format_value(check['expected'], check['unit']):>22} "
                f"{format_value(check['tolerance'], check['unit']):>14}"
            )
        sites = sorted({d["site"] for d in candidate["detections"]})
        lines.append(f"  linked detections: {len(candidate['detections'])} at {', '.join(sites)}")
    if result.dossier is not None:
        audit = result.audit
        lines += [
            "",
            f"audit log: {audit['entries']} entries, {audit['checkpoints']} signed checkpoints, "
            f"{'intact' if audit['log_ok'] else 'DAMAGED'}",
            f"dossier: {result.dossier}/index.html "
            f"({'verified offline' if audit['dossier_ok'] else 'NOT verified'}: "
            + "; ".join(audit["dossier_checked"])
            + ")",
        ]
    lines += ["", "CAUTION: " + CANDIDATE_IS_NOT_A_DETECTION]
    return lines


DEMO_PEOPLE = (("demo-coordinator", "coordinator"), ("demo-viewer", "viewer"))


def dashboard_sign_in(result: DemoResult, port: int = 8080) -> list[str]:
    """Create the demo's web accounts (fresh random passwords) and say how to open the pages."""
    import secrets

    from confirm_service.actor import SYSTEM
    from confirm_service.db import Database
    from confirm_service.services.people import create_person

    database = Database(result.database_url)
    passwords = {}
    with database.write() as session:
        for username, role in DEMO_PEOPLE:
            passwords[username] = secrets.token_urlsafe(12)
            create_person(session, SYSTEM, username, username, role, passwords[username])
    database.dispose()
    folder = result.folder.resolve()
    return [
        "",
        "every other command on this demo's log needs its instance (it holds the signing key):",
        f"  export CONFIRM_DATABASE_URL={result.database_url}",
        f"  export CONFIRM_INSTANCE_PATH={folder}",
        "web pages: start the server with",
        f"  confirm-service serve --port {port}",
        f"then open http://127.0.0.1:{port}/dashboard and sign in as",
        *(f"  {name:<17} password {passwords[name]}  ({role})" for name, role in DEMO_PEOPLE),
    ]
