"""The intake thresholds have one home (``protocol.screening.intake_codes``): promoting one hit
by hand (``intake_decision``) and screening a whole scan must refuse the same hits for the same
reasons, at limits given in Hz/s and in nHz."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from confirm_service.protocol import intake_decision, load_protocol, load_protocol_text
from confirm_service.protocol.screening import ScreeningRules, intake_codes, reason_of


def _shipped_protocols(protocol_dir):
    return [load_protocol(protocol_dir / name) for name in ("default.toml", "strict.toml")]


@pytest.mark.parametrize("limit", ["hz_s", "nhz"])
def test_one_hit_and_a_whole_scan_are_refused_for_the_same_reason(sky_fixed, protocol_dir, limit):
    protocols = _shipped_protocols(protocol_dir)
    if limit == "nhz":  # the same protocol with its drift limit per GHz (1 nHz = 1 Hz/s per GHz)
        text = (protocol_dir / "default.toml").read_text(encoding="utf-8")
        edited = text.replace("max_abs_drift_hz_s = 10.0", "max_abs_drift_nhz = 0.9", 1)
        assert edited != text
        protocols = [load_protocol_text(edited, protocol_dir)]
        assert protocols[0].model.intake.max_abs_drift_nhz == 0.9
    facts = sky_fixed.facts
    rng = np.random.default_rng(5)
    for protocol in protocols:
        rules = ScreeningRules.from_protocol(protocol.model)
        snr = rng.uniform(0.5, 2.0, 300) * rules.min_snr
        drift = rng.uniform(-2.0, 2.0, 300) * float(
            rules.drift_limit_hz_s(np.array([facts.reference.frequency_hz]))[0]
        )
        frequency = np.full(300, facts.reference.frequency_hz)
        bulk = [reason_of(int(c)) for c in intake_codes(rules, snr, frequency, drift)]
        assert {str(r) for r in bulk} >= {"None", "low_snr", "drift_out_of_range"}
        for k in range(300):
            hit = replace(facts.reference, snr=float(snr[k]), drift_hz_s=float(drift[k]))
            decision = intake_decision(
                protocol, hit, facts.reference_observation, facts.target, bands=[]
            )
            expected = bulk[k]
            if expected is None:
                assert decision.promote, decision
            else:
                assert not decision.promote and decision.reason_class == expected.value, decision
