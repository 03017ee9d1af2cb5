"""Physics core: Doppler shift and drift from Earth's motion, predictions, visibility.

Pure computation on astropy (no web framework, no database). Importing the package switches
astropy to offline IERS data (see iers.configure_offline).
"""

from .doppler import (
    HYDROGEN_LINE_HZ,
    MAX_EARTH_ACCELERATION_M_S2,
    SPEED_OF_LIGHT_M_S,
    barycentric_drift_hz_s,
    barycentric_frequency_hz,
    doppler_factor,
    drift_from_acceleration_hz_s,
    earth_drift_hz_s,
    max_earth_drift_hz_s,
    radial_velocity_and_acceleration,
    radial_velocity_m_s,
    residual_drift_hz_s,
    topocentric_drift_hz_s,
    topocentric_frequency_hz,
)
from .errors import PhysicsAccuracyWarning, PhysicsInputError
from .frames import (
    location_key,
    site_distance_km,
    site_location,
    target_coord,
    target_key,
    time_from_unix_s,
    unix_s_from_time,
    utc_datetime,
    utc_time,
)
from .iers import (
    check_time_coverage,
    configure_offline,
    current_ephemeris,
    default_jpl_ephemeris_path,
    iers_coverage,
    reset_accuracy_warning,
    set_ephemeris,
)
from .interpolant import RadialVelocityTrack, TrackBundle, TrackCache, TrackRequest, build_tracks
from .prediction import (
    MODEL_DESCRIPTION,
    Prediction,
    SignalMeasurement,
    barycentric_gap_s,
    predict_signal,
    predict_signal_many,
)
from .visibility import (
    VisibilityWindow,
    altaz,
    max_elevation_deg,
    next_windows,
    sun_separation_deg,
    visibility_windows,
)

configure_offline()

__all__ = [
    "HYDROGEN_LINE_HZ",
    "MAX_EARTH_ACCELERATION_M_S2",
    "MODEL_DESCRIPTION",
    "SPEED_OF_LIGHT_M_S",
    "PhysicsAccuracyWarning",
    "PhysicsInputError",
    "Prediction",
    "RadialVelocityTrack",
    "SignalMeasurement",
    "TrackBundle",
    "TrackCache",
    "TrackRequest",
    "VisibilityWindow",
    "altaz",
    "max_elevation_deg",
    "barycentric_drift_hz_s",
    "barycentric_frequency_hz",
    "barycentric_gap_s",
    "build_tracks",
    "check_time_coverage",
    "configure_offline",
    "current_ephemeris",
    "default_jpl_ephemeris_path",
    "doppler_factor",
    "drift_from_acceleration_hz_s",
    "earth_drift_hz_s",
    "max_earth_drift_hz_s",
    "iers_coverage",
    "location_key",
    "next_windows",
    "predict_signal",
    "predict_signal_many",
    "radial_velocity_and_acceleration",
    "radial_velocity_m_s",
    "reset_accuracy_warning",
    "residual_drift_hz_s",
    "set_ephemeris",
    "site_distance_km",
    "site_location",
    "sun_separation_deg",
    "target_coord",
    "target_key",
    "time_from_unix_s",
    "topocentric_drift_hz_s",
    "topocentric_frequency_hz",
    "unix_s_from_time",
    "utc_datetime",
    "utc_time",
    "visibility_windows",
]
