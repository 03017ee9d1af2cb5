"""Bulk screening against a plain per-hit reference written here, on random cadences.

The reference reads the rules as an observer states them (loops, one hit and one scan at a time,
no sorting, no searchsorted); the bulk code must give every hit the same reason. The Doppler
relation f_site = f_bary (1 + v/c) is the one the physics engine is tested on against skyfield.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import event, given, settings
from hypothesis import strategies as st

from confirm_service.protocol.bands import InterferenceBand
from confirm_service.protocol.screening import (
    PENDING,
    BandEdges,
    OccupancyHits,
    Reason,
    ScanHits,
    ScreeningRules,
    code_of,
    decided_digest,
    reason_of,
    screen_cadence,
)

RULES = ScreeningRules(
    min_snr=10.0,
    max_abs_drift_hz_s=4.0,
    exclude_bands=True,
    zero_drift_resolutions=1.0,
    min_on_scans=2,
    min_off_scans=1,
    min_on_fraction=1.0,
    frequency_floor_hz=10.0,
    sigma_multiplier=3.0,
    frequency_uncertainty_channels=1.0,
    drift_uncertainty_resolutions=1.0,
    margin_channels=1.0,
    off_source_max_drift_hz_s=0.5,
    off_source_margin_hz=50.0,
    occupancy_span_s=86_400.0,
    occupancy_drift_resolutions=2.0,
)
BANDS = [InterferenceBand("test band", 1.0000e9 + 30_000.0, 1.0000e9 + 32_000.0, "invented")]
BASE_HZ = 1.0e9


# --- the reference: one hit at a time -----------------------------------------------------------


def _track_hz(scan, i, other):
    f, d = scan["f"][i], scan["d"][i]
    own = d - f * scan["g"]
    return f * other["D"] / scan["D"] + own * (other["t"] - scan["t"])


def _narrow_width_hz(scan, other):
    gap = abs(other["t"] - scan["t"])
    sigma = math.hypot(
        RULES.frequency_uncertainty_channels * scan["w"],
        RULES.drift_uncertainty_resolutions * scan["w"] / scan["T"] * gap,
    )
    return max(RULES.frequency_floor_hz, RULES.sigma_multiplier * sigma) + other["w"]


def _on_track(scan, i, other, j):
    drift_expected = scan["d"][i] + scan["f"][i] * (other["g"] - scan["g"])
    drift_width = RULES.sigma_multiplier * math.hypot(
        scan["w"] / scan["T"], other["w"] / other["T"]
    )
    return (
        abs(other["f"][j] - _track_hz(scan, i, other)) <= _narrow_width_hz(scan, other)
        and abs(other["d"][j] - drift_expected) <= drift_width
    )


def reference_reason(scans, r, i, occupancy):
    """The reason of hit i of scan r, or None while it must wait, stated rule by rule."""
    scan = scans[r]
    if not scan["on"]:
        return Reason.OFF_SOURCE_SCAN
    f, d = scan["f"][i], scan["d"][i]
    if scan["snr"][i] < RULES.min_snr:
        return Reason.LOW_SNR
    if abs(d) > RULES.max_abs_drift_hz_s:
        return Reason.DRIFT_OUT_OF_RANGE
    end = f + d * scan["T"]
    for band in BANDS:
        if min(f, end) <= band.frequency_max_hz and max(f, end) >= band.frequency_min_hz:
            return Reason.INTERFERENCE_BAND
    resolution = scan["w"] / scan["T"]
    if abs(d) <= resolution and abs(f * scan["g"]) > resolution:
        return Reason.ZERO_DRIFT
    off_counted = 0
    for other in scans:
        if other["on"] or not other["complete"]:
            continue
        centre = _track_hz(scan, i, other)
        wide = (
            RULES.off_source_max_drift_hz_s * (abs(other["t"] - scan["t"]) + other["T"])
            + RULES.off_source_margin_hz
            + other["w"]
        )
        if any(abs(x - centre) <= wide for x in other["f"]):
            return Reason.PRESENT_OFF_SOURCE
        if other["lo"] <= centre - wide and centre + wide <= other["hi"]:
            off_counted += 1
    if off_counted < RULES.min_off_scans:
        return None
    counted = present = 1
    for k, other in enumerate(scans):
        if k == r or not other["on"] or not other["complete"]:
            continue
        centre = _track_hz(scan, i, other)
        width = _narrow_width_hz(scan, other)
        seen = any(_on_track(scan, i, other, j) for j in range(len(other["f"])))
        if other["lo"] <= centre - width and centre + width <= other["hi"]:
            counted += 1
            present += seen
    if counted < RULES.min_on_scans:
        return None
    if present < RULES.min_on_fraction * counted - 1e-9:
        return Reason.ABSENT_ON_SOURCE
    for x, y, res, _ in occupancy:
        width = RULES.frequency_floor_hz + scan["w"] + max(o[3] for o in occupancy)
        tolerance = RULES.occupancy_drift_resolutions * math.hypot(resolution, res)
        if abs(x - f) <= width and abs(y - d) <= tolerance:
            return Reason.OCCUPIED_ELSEWHERE
    return Reason.SURVIVED


# --- random cadences ----------------------------------------------------------------------------


@st.composite
def cadences(draw):
    n_scans = draw(st.integers(2, 5))
    signal_f = BASE_HZ + draw(st.floats(1_000.0, 60_000.0))
    signal_d = draw(st.sampled_from([0.0, 0.02, -0.15, 0.3]))
    scans = []
    for k in range(n_scans):
        on = draw(st.sampled_from([k % 2 == 0] * 3 + [k % 2 == 1])) if k else True
        doppler = 1.0 + draw(st.floats(-1e-4, 1e-4))
        g = draw(st.sampled_from([0.0, 1e-10, -2e-10]))
        t = 300.0 * k
        n = draw(st.integers(0, 6))
        f = [BASE_HZ + draw(st.floats(0.0, 80_000.0)) for _ in range(n)]
        d = [draw(st.sampled_from([0.0, 0.02, -0.15, 0.3, 2.0, 5.0])) for _ in range(n)]
        snr = [draw(st.sampled_from([5.0, 12.0, 30.0])) for _ in range(n)]
        if on or draw(st.integers(0, 3)) == 0:
            f.append(signal_f + signal_d * t)
            d.append(signal_d)
            snr.append(25.0)
        scans.append(
            {
                "on": on,
                "complete": draw(st.sampled_from([True, True, True, False])) if k else True,
                "t": t,
                "T": 300.0,
                "w": draw(st.sampled_from([2.0, 4.0])),
                "lo": BASE_HZ - draw(st.sampled_from([1e3, 1e6])),
                "hi": BASE_HZ + 1e6,
                "D": doppler,
                "g": g,
                "f": f,
                "d": d,
                "snr": snr,
            }
        )
    occupancy = [
        (BASE_HZ + draw(st.floats(0.0, 80_000.0)), draw(st.sampled_from([0.0, 0.3])), 0.01, 3.0)
        for _ in range(draw(st.integers(0, 3)))
    ]
    if draw(st.integers(0, 3)) == 0:  # the same topocentric frequency at another target
        occupancy.append((signal_f + draw(st.floats(-20.0, 20.0)), signal_d, 0.01, 3.0))
    return scans, occupancy


def _arrays(scans):
    arrays, next_id = [], 1
    for k, s in enumerate(scans):
        order = np.argsort(np.array(s["f"], dtype=np.float64), kind="stable")
        ids = np.arange(next_id, next_id + len(s["f"]), dtype=np.int64)
        next_id += len(s["f"])
        arrays.append(
            ScanHits(
                observation_id=k + 1,
                start_unix_s=s["t"],
                duration_s=s["T"],
                channel_width_hz=s["w"],
                frequency_min_hz=s["lo"],
                frequency_max_hz=s["hi"],
                on_source=s["on"],
                complete=s["complete"],
                doppler_factor=s["D"],
                earth_drift_per_hz=s["g"],
                hit_id=ids[order],
                frequency_hz=np.array(s["f"], dtype=np.float64)[order],
                drift_hz_s=np.array(s["d"], dtype=np.float64)[order],
                snr=np.array(s["snr"], dtype=np.float64)[order],
                pending=np.ones(len(s["f"]), dtype=bool),
            )
        )
    return arrays


def _occupancy(occupancy):
    if not occupancy:
        return OccupancyHits.empty()
    rows = sorted(occupancy)
    return OccupancyHits(
        *(np.array(column, dtype=np.float64) for column in zip(*rows, strict=True))
    )


@settings(max_examples=300, deadline=None)
@given(cadences())
def test_bulk_screening_gives_every_hit_the_reference_reason(cadence):
    scans, occupancy = cadence
    complete = [s for s in scans if s["complete"]]
    arrays = _arrays(scans)
    outcome = screen_cadence(arrays, RULES, BandEdges.of(BANDS), _occupancy(occupancy))
    for k, (scan, array) in enumerate(zip(scans, arrays, strict=True)):
        for position in range(array.size):
            original = int(np.argsort(np.array(scan["f"]), kind="stable")[position])
            if not scan["complete"]:
                assert outcome.codes[k][position] == PENDING  # an open scan is never judged
                continue
            expected = reference_reason(complete, complete.index(scan), original, occupancy)
            got = outcome.codes[k][position]
            assert got == (PENDING if expected is None else code_of(expected)), (k, original)
            event(str(expected))


def test_the_sky_fixed_signal_survives_and_interference_does_not():
    # An invented cadence: on, off, on. 1 GHz, channel 2 Hz, 300 s scans.
    signal = {"f": BASE_HZ + 5_000.0, "d": 0.02}
    persistent = {"f": BASE_HZ + 20_000.0, "d": 0.3}
    scans = []
    for k, on in enumerate((True, False, True)):
        t = 300.0 * k
        f = [persistent["f"]]
        d = [persistent["d"]]
        snr = [40.0]
        if on:
            f += [signal["f"] + signal["d"] * t, BASE_HZ + 50_000.0 + 7_000.0 * k]
            d += [signal["d"], -0.15]
            snr += [25.0, 30.0]
        scans.append(
            {"on": on, "complete": True, "t": t, "T": 300.0, "w": 2.0, "lo": BASE_HZ - 1e6,
             "hi": BASE_HZ + 1e6, "D": 1.0, "g": 0.0, "f": f, "d": d, "snr": snr}
        )  # fmt: skip
    arrays = _arrays(scans)
    outcome = screen_cadence(arrays, RULES, BandEdges.of(BANDS), None)
    reasons = {
        int(i): reason_of(int(c))
        for a, codes in zip(arrays, outcome.codes, strict=True)
        for i, c in zip(a.hit_id, codes, strict=True)
    }
    assert reasons[2] == Reason.SURVIVED and reasons[6] == Reason.SURVIVED
    assert reasons[1] == reasons[5] == Reason.PRESENT_OFF_SOURCE
    assert reasons[4] == Reason.OFF_SOURCE_SCAN
    assert reasons[3] == reasons[7] == Reason.ABSENT_ON_SOURCE
    assert outcome.signals == [[(0, 0), (2, 0)]]  # one signal: both on-source hits
    # the digest is a SHA-256 over sorted "id:reason" lines (hashlib, FIPS 180-4)
    import hashlib

    decisions = outcome.decided(arrays)
    assert decisions.pairs() == [
        (1, "present_off_source"), (2, "survived"), (3, "absent_on_source"),
        (4, "off_source_scan"), (5, "present_off_source"), (6, "survived"),
        (7, "absent_on_source"),
    ]  # fmt: skip
    text = "".join(f"{i}:{r}\n" for i, r in decisions.pairs())
    assert decisions.digest() == decided_digest(decisions.pairs())
    assert decisions.digest() == hashlib.sha256(text.encode()).hexdigest()
    assert decisions.counts() == {
        "absent_on_source": 2, "off_source_scan": 1, "present_off_source": 2, "survived": 2
    }  # fmt: skip
