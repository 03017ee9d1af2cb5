"""The candidate's reference signal and its predicted track, through confirm_service.physics.

Hypothesis tested by every check (physics.prediction.MODEL_DESCRIPTION): a transmitter fixed on
the sky at the target whose barycentric frequency changes at a constant rate. From the reference
detection at site A, time t_A (v: barycentric correction, D = 1 + v/c, a = dv/dt):

    f_bary = f_A / D_A,  residual r = drift_A - f_bary a_A / c,  rate = r / D_A^2
    at site B, time t:  f_B = (f_bary + rate * gap) D_B,
                        drift_B = rate D_B^2 + (f_bary + rate * gap) a_B / c

with the same physics functions (doppler.py) that ``physics.predict_signal`` uses, and v, a from
the physics TrackCache interpolants (``TrackCache.kinematics``: one call serves a whole batch of
candidates, every point of every scan and report vectorised).

Fast barycentric gap. ``physics.barycentric_gap_s`` (astropy light-travel time) costs tens of
ms per call, too slow per candidate. Since d(t_b)/dt = D (cycles conserved), the gap is taken as
``(t - t_A) * (1 + (v_A + v_B) / (2c))`` and its error is bounded (``gap_error_bound_s``) by
Earth rotation (omega R = 465.1 m/s, IERS omega with the WGS84 equatorial radius) plus Earth's
motion about the Earth-Moon barycentre (13 m/s, from memory) times |t - t_A| / c, the orbit's
curvature (29.8 km/s, Omega = 2 pi / 365.25 d: V Omega^2 |dt|^3 / (12 c)), one Earth diameter
of light time between sites (42.6 ms) and one possible leap second. ``|rate| * bound`` is added
to the matching tolerance, so the shortcut can only widen a track, never miss a signal; the
tests compare it with ``physics.predict_signal``.

Drift resolution of a scan (the smallest drift distinguishable from zero) is
``channel_width_hz / duration_s``: a signal drifting by less than one channel over the whole
scan cannot be told from a constant one. (``channel_width_hz / time_resolution_s`` is instead
the largest drift that stays inside one channel per spectrum.)

A ``PhysicsContext`` keeps the TrackCache and the site/target objects between candidates;
reuse one per thread so that evaluating many candidates of the same targets stays fast.
"""

from __future__ import annotations

import math
import threading
from collections import OrderedDict
from collections.abc import Callable, Hashable, Sequence
from dataclasses import dataclass
from typing import Any, Generic, TypeVar

import numpy as np

from confirm_service import physics
from confirm_service.protocol.facts import (
    CandidateFacts,
    DetectionFact,
    ObservationFact,
    SiteFact,
    TargetFact,
)
from confirm_service.protocol.loader import ProtocolLike, model_of

DEFAULT_FREQUENCY_UNCERTAINTY_CHANNELS = 1.0
DEFAULT_DRIFT_UNCERTAINTY_RESOLUTIONS = 1.0

_C = physics.SPEED_OF_LIGHT_M_S
_ROTATION_AND_MOON_M_S = 7.292115e-5 * 6_378_137.0 + 13.0
_ORBIT_M_S = 29_780.0
_ORBIT_RATE_RAD_S = 2.0 * math.pi / (365.25 * 86_400.0)
_SITE_LIGHT_TIME_S = 12_756_274.0 / _C
_LEAP_SECOND_S = 1.0


def gap_error_bound_s(elapsed_s: np.ndarray) -> np.ndarray:
    """Bound (s) on |fast gap - barycentric gap| for elapsed times (s); see module doc."""
    dt = np.abs(np.asarray(elapsed_s, dtype=np.float64))
    rotation = _ROTATION_AND_MOON_M_S * dt / _C
    curvature = _ORBIT_M_S * _ORBIT_RATE_RAD_S**2 * dt**3 / (12.0 * _C)
    return rotation + curvature + _SITE_LIGHT_TIME_S + _LEAP_SECOND_S


def drift_resolution_hz_s(observation: ObservationFact) -> float:
    """Smallest drift (Hz/s) the scan can tell from zero: channel_width_hz / duration_s."""
    return observation.channel_width_hz / observation.duration_s


def detection_unix_s(detection: DetectionFact, observation: ObservationFact) -> float:
    """Time of a detection's frequency: scan start + time offset (unix s)."""
    return observation.start_unix_s + detection.time_offset_s


@dataclass(frozen=True, slots=True)
class ReferenceSignal:
    """The reference detection seen through the sky-fixed hypothesis.

    Frequencies Hz, drifts Hz/s, time unix s, radial velocity m/s (positive toward the target).
    ``barycentric_rate_hz_s`` is the rate of the barycentric frequency (Hz per barycentric s).
    """

    barycentric_frequency_hz: float
    residual_drift_hz_s: float
    unix_s: float
    observed_frequency_hz: float
    observed_drift_hz_s: float
    earth_drift_hz_s: float
    radial_velocity_m_s: float
    barycentric_rate_hz_s: float
    frequency_uncertainty_hz: float
    drift_uncertainty_hz_s: float
    drift_resolution_hz_s: float
    channel_width_hz: float
    site: SiteFact
    target: TargetFact


@dataclass(frozen=True, slots=True)
class PointPrediction:
    """Predicted track at many (site, time) points, float64 arrays of one length.

    ``frequency_uncertainty_hz`` is the 1-sigma statistical uncertainty (physics model);
    ``systematic_hz`` bounds the fast-gap shortcut's error and is added to tolerances as is.
    """

    unix_s: np.ndarray
    frequency_hz: np.ndarray
    frequency_uncertainty_hz: np.ndarray
    systematic_hz: np.ndarray
    drift_hz_s: np.ndarray
    earth_drift_hz_s: np.ndarray
    radial_velocity_m_s: np.ndarray


_Value = TypeVar("_Value")


class _BoundedCache(Generic[_Value]):
    """A small least-recently-used mapping."""

    def __init__(self, max_entries: int) -> None:
        self.max_entries = max_entries
        self._items: OrderedDict[Hashable, _Value] = OrderedDict()

    def get_or_make(self, key: Hashable, make: Callable[[], _Value]) -> _Value:
        if key in self._items:
            self._items.move_to_end(key)
            return self._items[key]
        value = make()
        self._items[key] = value
        if len(self._items) > self.max_entries:
            self._items.popitem(last=False)
        return value


def target_coord_of(target: TargetFact) -> Any:
    """The astropy coordinate of a target fact: position and proper motion at its catalogue
    epoch (J2000.0 when none), so the Doppler terms apply the motion up to each scan's time."""
    return physics.target_coord(
        target.ra_deg,
        target.dec_deg,
        pm_ra_mas_yr=target.pm_ra_mas_yr,
        pm_dec_mas_yr=target.pm_dec_mas_yr,
        parallax_mas=target.parallax_mas,
        distance_pc=target.distance_pc,
        epoch=target.epoch,
    )


def _site_key(site: SiteFact) -> tuple[str, float, float, float]:
    return ("site", float(site.latitude_deg), float(site.longitude_deg), float(site.elevation_m))


def _target_key(target: TargetFact) -> tuple[Any, ...]:
    return (
        "target",
        float(target.ra_deg),
        float(target.dec_deg),
        target.pm_ra_mas_yr,
        target.pm_dec_mas_yr,
        target.parallax_mas,
        target.distance_pc,
        target.epoch,
    )


class PhysicsContext:
    """Physics objects reused across candidates: TrackCache, locations, targets, distances.

    Not meant to be shared between threads (its small caches take no lock);
    ``default_physics_context()`` gives one per thread.
    """

    def __init__(self, cache: Any | None = None, max_entries: int = 4096) -> None:
        self.cache = cache if cache is not None else physics.TrackCache()
        self._locations: _BoundedCache[Any] = _BoundedCache(max_entries)
        self._targets: _BoundedCache[Any] = _BoundedCache(max_entries)
        self._requests: _BoundedCache[Any] = _BoundedCache(max_entries)
        self._distances: _BoundedCache[float] = _BoundedCache(max_entries)
        self._elevations: _BoundedCache[float] = _BoundedCache(max_entries)
        self._known_distances: dict[tuple[SiteFact, SiteFact], float] = {}

    def location(self, site: SiteFact) -> Any:
        """EarthLocation of a site (WGS84)."""
        return self._locations.get_or_make(
            _site_key(site),
            lambda: physics.site_location(site.latitude_deg, site.longitude_deg, site.elevation_m),
        )

    def target(self, target: TargetFact) -> Any:
        """ICRS SkyCoord of a target."""
        return self._targets.get_or_make(
            _target_key(target),
            lambda: target_coord_of(target),
        )

    def track_request(self, site: SiteFact, target: TargetFact) -> Any:
        """The physics TrackRequest of a (site, target) pair, with cheap explicit keys."""
        site_key, target_key = _site_key(site), _target_key(target)
        return self._requests.get_or_make(
            (site_key, target_key),
            lambda: physics.TrackRequest(
                self.location(site), self.target(target), site_key, target_key
            ),
        )

    def max_elevation_deg(
        self, site: SiteFact, target: TargetFact, start_unix_s: float, duration_s: float
    ) -> float:
        """Highest elevation (deg) of the target at the site during a span (cached)."""
        key = (_site_key(site), _target_key(target), float(start_unix_s), float(duration_s))
        return self._elevations.get_or_make(
            key,
            lambda: physics.max_elevation_deg(
                self.location(site), self.target(target), start_unix_s, duration_s
            ),
        )

    def distance_km(self, site_a: SiteFact, site_b: SiteFact) -> float:
        """Straight-line distance between two sites, km (symmetric, cached)."""
        known = self._known_distances.get((site_a, site_b))
        if known is not None:
            return known
        key_a, key_b = sorted((_site_key(site_a), _site_key(site_b)))
        distance = self._distances.get_or_make(
            (key_a, key_b),
            lambda: float(physics.site_distance_km(self.location(site_a), self.location(site_b))),
        )
        if len(self._known_distances) > 16 * self._distances.max_entries:
            self._known_distances.clear()
        self._known_distances[(site_a, site_b)] = distance
        return distance


_THREAD_STATE = threading.local()


def default_physics_context() -> PhysicsContext:
    """This thread's shared PhysicsContext."""
    context = getattr(_THREAD_STATE, "context", None)
    if context is None:
        context = PhysicsContext()
        _THREAD_STATE.context = context
    return context


def measurement_uncertainty(
    protocol: ProtocolLike | None, channel_width_hz: float, duration_s: float
) -> tuple[float, float]:
    """1-sigma (frequency Hz, drift Hz/s) of a hit measured with ``channel_width_hz`` channels
    over a ``duration_s`` scan: the protocol's [matching] numbers of channels and of drift
    resolutions (channel width / duration)."""
    frequency_channels, drift_resolutions = _uncertainty_scales(protocol)
    return frequency_channels * channel_width_hz, drift_resolutions * channel_width_hz / duration_s


def _uncertainty_scales(protocol: ProtocolLike | None) -> tuple[float, float]:
    if protocol is None:
        return DEFAULT_FREQUENCY_UNCERTAINTY_CHANNELS, DEFAULT_DRIFT_UNCERTAINTY_RESOLUTIONS
    matching = model_of(protocol).matching
    return (
        matching.reference_frequency_uncertainty_channels,
        matching.reference_drift_uncertainty_resolutions,
    )


def predict_references(
    context: PhysicsContext,
    references: Sequence[tuple[DetectionFact, ObservationFact, TargetFact]],
    pairs: Sequence[tuple[SiteFact, TargetFact]],
    point_pair: np.ndarray,
    point_owner: np.ndarray,
    unix_s: np.ndarray,
    protocol: ProtocolLike | None = None,
) -> tuple[list[ReferenceSignal], PointPrediction]:
    """Reference signals of many candidates and the predicted track at many points.

    Point i is at time ``unix_s[i]`` at the site of ``pairs[point_pair[i]]`` and belongs to the
    candidate ``references[point_owner[i]]``. One TrackCache call serves every point and every
    reference.
    """
    frequency_channels, drift_resolutions = _uncertainty_scales(protocol)
    requests = [context.track_request(site, target) for site, target in pairs]
    numbers = {pair: i for i, pair in enumerate(pairs)}
    reference_pair = []
    for _, observation, target in references:
        number = numbers.get((observation.site, target))
        if number is None:
            number = numbers[(observation.site, target)] = len(requests)
            requests.append(context.track_request(observation.site, target))
        reference_pair.append(number)
    n = len(references)
    t_a = np.array([detection_unix_s(d, o) for d, o, _ in references], dtype=np.float64)
    times = np.concatenate([t_a, np.asarray(unix_s, dtype=np.float64)])
    pair_index = np.concatenate([np.array(reference_pair, np.int64), point_pair])
    velocity, acceleration = context.cache.kinematics(requests, pair_index, times)
    f_a = np.array([d.frequency_hz for d, _, _ in references], dtype=np.float64)
    drift_a = np.array([d.drift_hz_s for d, _, _ in references], dtype=np.float64)
    width = np.array([o.channel_width_hz for _, o, _ in references], dtype=np.float64)
    duration = np.array([o.duration_s for _, o, _ in references], dtype=np.float64)
    v_a, a_a = velocity[:n], acceleration[:n]
    f_bary = physics.barycentric_frequency_hz(f_a, v_a)
    earth_a = physics.drift_from_acceleration_hz_s(f_a, v_a, a_a)
    residual = physics.residual_drift_hz_s(drift_a, earth_a)
    rate = physics.barycentric_drift_hz_s(residual, v_a)
    resolution = width / duration
    signals = [
        ReferenceSignal(
            barycentric_frequency_hz=fb,
            residual_drift_hz_s=r,
            unix_s=t,
            observed_frequency_hz=f,
            observed_drift_hz_s=d,
            earth_drift_hz_s=e,
            radial_velocity_m_s=v,
            barycentric_rate_hz_s=q,
            frequency_uncertainty_hz=frequency_channels * w,
            drift_uncertainty_hz_s=drift_resolutions * res,
            drift_resolution_hz_s=res,
            channel_width_hz=w,
            site=parts[1].site,
            target=parts[2],
        )
        for parts, fb, r, t, f, d, e, v, q, w, res in zip(
            references,
            f_bary.tolist(),
            residual.tolist(),
            t_a.tolist(),
            f_a.tolist(),
            drift_a.tolist(),
            earth_a.tolist(),
            v_a.tolist(),
            rate.tolist(),
            width.tolist(),
            resolution.tolist(),
            strict=True,
        )
    ]
    owner = np.asarray(point_owner, dtype=np.int64)
    prediction = _track(
        times[n:],
        velocity[n:],
        acceleration[n:],
        t_a=t_a[owner],
        v_a=v_a[owner],
        f_bary=f_bary[owner],
        rate=rate[owner],
        sigma_f=frequency_channels * width[owner],
        sigma_drift=drift_resolutions * resolution[owner],
    )
    return signals, prediction


def predict_from_reference(
    context: PhysicsContext,
    detection: DetectionFact,
    observation: ObservationFact,
    target: TargetFact,
    sites: Sequence[SiteFact],
    site_index: np.ndarray,
    unix_s: np.ndarray,
    protocol: ProtocolLike | None = None,
) -> tuple[ReferenceSignal, PointPrediction]:
    """The reference signal and the predicted track at points (sites[site_index], unix_s)."""
    times = np.asarray(unix_s, dtype=np.float64)
    signals, prediction = predict_references(
        context,
        [(detection, observation, target)],
        [(site, target) for site in sites],
        np.asarray(site_index, dtype=np.int64),
        np.zeros(times.size, dtype=np.int64),
        times,
        protocol,
    )
    return signals[0], prediction


def _track(
    unix_s: np.ndarray,
    velocity: np.ndarray,
    acceleration: np.ndarray,
    *,
    t_a: np.ndarray,
    v_a: np.ndarray,
    f_bary: np.ndarray,
    rate: np.ndarray,
    sigma_f: np.ndarray,
    sigma_drift: np.ndarray,
) -> PointPrediction:
    """The physics model at points whose references are given per point (arrays)."""
    elapsed = unix_s - t_a
    factor_a = physics.doppler_factor(v_a)
    gap = elapsed * (1.0 + (v_a + velocity) / (2.0 * _C))
    f_bary_b = f_bary + rate * gap
    if np.any(f_bary_b <= 0.0):
        raise physics.PhysicsInputError(
            "unix_s", "the drift extrapolates to a non-positive frequency"
        )
    factor_b = physics.doppler_factor(velocity)
    sigma_bary = np.hypot(sigma_f / factor_a, gap * sigma_drift / factor_a**2)
    return PointPrediction(
        unix_s=unix_s,
        frequency_hz=physics.topocentric_frequency_hz(f_bary_b, velocity),
        frequency_uncertainty_hz=sigma_bary * factor_b,
        systematic_hz=np.abs(rate) * gap_error_bound_s(elapsed) * factor_b,
        drift_hz_s=physics.topocentric_drift_hz_s(f_bary_b, rate, velocity, acceleration),
        earth_drift_hz_s=f_bary_b * acceleration / _C,
        radial_velocity_m_s=np.asarray(velocity, dtype=np.float64),
    )


def reference_of(
    source: CandidateFacts | tuple[DetectionFact, ObservationFact, TargetFact],
    protocol: ProtocolLike | None = None,
    physics_context: PhysicsContext | None = None,
) -> ReferenceSignal:
    """The reference signal of a candidate (or of a detection, its scan and its target).

    Uncertainties come from the protocol's [matching] section when a protocol is given,
    otherwise one channel and one drift resolution.
    """
    if isinstance(source, CandidateFacts):
        detection, observation, target = (
            source.reference,
            source.reference_observation,
            source.target,
        )
    else:
        detection, observation, target = source
    context = physics_context or default_physics_context()
    reference, _ = predict_from_reference(
        context, detection, observation, target, [], np.empty(0, np.int64), np.empty(0), protocol
    )
    return reference
