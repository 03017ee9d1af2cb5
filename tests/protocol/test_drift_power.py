"""Follow-up requests and the doppler_consistency check judge power by one rule.

A request marks a window "discriminating" when a scan there would give the Doppler check power;
the check must then agree, for every protocol. Reference: the rule itself (Earth's drift must
move by a number of drift tolerances; common practice, no source) is what both must share; the
Earth drifts come from the physics engine, checked against skyfield in tests/physics.
"""

from __future__ import annotations

from dataclasses import replace
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest

from confirm_service.followup.content import Discovery, PartnerSite, build_request_content
from confirm_service.protocol import build_candidate_view, load_protocol_text
from confirm_service.protocol.checks import get_check
from confirm_service.protocol.facts import DetectionFact, ObservationFact

from .scenarios import SITES

DEFAULT_LINE = "min_earth_drift_span_tolerances = 2.0"
TOLERANCE_LINE = "tolerance_hz_s = 0.02"


def protocol_with(protocol_dir, needed: float, tolerance_hz_s: float):
    text = (protocol_dir / "default.toml").read_text()
    assert DEFAULT_LINE in text and TOLERANCE_LINE in text
    text = text.replace(DEFAULT_LINE, f"min_earth_drift_span_tolerances = {needed!r}")
    text = text.replace(TOLERANCE_LINE, f"tolerance_hz_s = {tolerance_hz_s!r}", 1)
    return load_protocol_text(text, protocol_dir)


def doppler_params(protocol):
    for stage in protocol.model.stages:
        for check in stage.checks:
            if check.kind == "doppler_consistency":
                fields = check.model_dump(exclude={"kind", "on_fail", "reason_class"})
                return get_check("doppler_consistency").params_model(**fields)
    raise AssertionError("no doppler_consistency check")


def partner_scan(content, window, facts) -> ObservationFact:
    """A scan at the window's slot where Earth's drift moved most, its hit on the track."""
    earth0 = content["discovery"]["earth_drift_hz_s"]
    point = max(window["track"], key=lambda p: abs(p["earth_drift_hz_s"] - earth0))
    start = datetime.fromisoformat(point["scan_start"]).timestamp()
    middle = datetime.fromisoformat(point["time"]).timestamp()
    reference = facts.reference_observation
    hit = DetectionFact(
        9_001, 8_001, point["frequency_hz"], point["drift_hz_s"], 30.0, middle - start
    )
    return ObservationFact(
        id=8_001,
        site=SITES["CSK"],
        target_name=facts.target.name,
        pointing_ra_deg=facts.target.ra_deg,
        pointing_dec_deg=facts.target.dec_deg,
        start_unix_s=start,
        duration_s=content["scan_duration_s"],
        frequency_min_hz=reference.frequency_min_hz,
        frequency_max_hz=reference.frequency_max_hz,
        channel_width_hz=content["channel_width_hz"],
        time_resolution_s=content["time_resolution_s"],
        on_source=True,
        detections=(hit,),
    )


@pytest.mark.parametrize("tolerance_hz_s", [0.02, 0.005])
def test_request_windows_and_the_doppler_check_agree_on_power(
    sky_fixed, protocol_dir, physics_context, tolerance_hz_s
):
    facts = sky_fixed.facts
    discovery = Discovery(1, facts.reference, facts.reference_observation, facts.target)
    partner = PartnerSite(SITES["CSK"], 10.0, 0.0)
    start = datetime.fromtimestamp(facts.reference_observation.start_unix_s, UTC) + timedelta(
        hours=6
    )
    horizon = (start, start + timedelta(days=1))
    probe = build_request_content(
        protocol_with(protocol_dir, 2.0, tolerance_hz_s),
        physics_context,
        discovery,
        partner,
        horizon,
        "ALD",
    )
    window = probe["windows"][0]
    ratio = window["drift_tolerances"]
    assert ratio > 0.1
    for needed in (0.8 * ratio, 1.25 * ratio):
        protocol = protocol_with(protocol_dir, needed, tolerance_hz_s)
        content = build_request_content(
            protocol, physics_context, discovery, partner, horizon, "ALD"
        )
        (window,) = [w for w in content["windows"] if w["start"] == probe["windows"][0]["start"]]
        scan = partner_scan(content, window, facts)
        edited = replace(facts, observations=(scan,), reports=())
        view = build_candidate_view(protocol, edited, None, physics_context)
        result = get_check("doppler_consistency").evaluate(edited, doppler_params(protocol), view)
        powered = result.details["power_from"] == ["detection 9001 at CSK"]
        assert window["discriminating"] == powered == (needed < ratio)
        if powered:
            # the tolerance the request states is the one the check judged the scan with
            assert result.tolerance == pytest.approx(content["drift_tolerance_hz_s"], rel=1e-12)
        assert np.isfinite(content["drift_tolerance_hz_s"])
