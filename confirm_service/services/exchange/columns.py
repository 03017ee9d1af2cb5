"""The exchange columns, their types and units, and the formats by file extension."""

from __future__ import annotations

from pathlib import Path

OBSERVATION_COLUMNS = (
    "site",
    "target",
    "pointing_ra_deg",
    "pointing_dec_deg",
    "start",
    "duration_s",
    "frequency_min_hz",
    "frequency_max_hz",
    "channel_width_hz",
    "time_resolution_s",
    "on_source",
    "beam",
    "cadence",
    "pipeline_run",
)
DETECTION_COLUMNS = (
    "frequency_hz",
    "drift_hz_s",
    "snr",
    "time_offset_s",
    "bandwidth_hz",
    "detection_beam",
    "candidate",
)
IGNORED_COLUMNS = ("observation_id", "detection_id")
IMPORT_COLUMNS = OBSERVATION_COLUMNS + DETECTION_COLUMNS
EXPORT_COLUMNS = ("observation_id",) + OBSERVATION_COLUMNS + ("detection_id",) + DETECTION_COLUMNS
REQUIRED_COLUMNS = (
    "site",
    "start",
    "duration_s",
    "frequency_min_hz",
    "frequency_max_hz",
    "channel_width_hz",
    "time_resolution_s",
    "on_source",
)
FLOAT_COLUMNS = frozenset(
    {
        "pointing_ra_deg",
        "pointing_dec_deg",
        "duration_s",
        "frequency_min_hz",
        "frequency_max_hz",
        "channel_width_hz",
        "time_resolution_s",
        "frequency_hz",
        "drift_hz_s",
        "snr",
        "time_offset_s",
        "bandwidth_hz",
    }
)
BOOL_COLUMNS = frozenset({"on_source", "candidate"})
INT_COLUMNS = frozenset(IGNORED_COLUMNS)
UNITS = {
    "pointing_ra_deg": "deg",
    "pointing_dec_deg": "deg",
    "duration_s": "s",
    "frequency_min_hz": "Hz",
    "frequency_max_hz": "Hz",
    "channel_width_hz": "Hz",
    "time_resolution_s": "s",
    "frequency_hz": "Hz",
    "drift_hz_s": "Hz/s",
    "time_offset_s": "s",
    "bandwidth_hz": "Hz",
}
DESCRIPTIONS = {
    "observation_id": "Observation id in the exporting service (ignored on import)",
    "site": "Site code",
    "target": "Target name",
    "pointing_ra_deg": "Pointing right ascension, ICRS",
    "pointing_dec_deg": "Pointing declination, ICRS",
    "start": "Scan start, ISO 8601 with UTC offset",
    "duration_s": "Scan duration",
    "frequency_min_hz": "Lower edge of the recorded band",
    "frequency_max_hz": "Upper edge of the recorded band",
    "channel_width_hz": "Channel width",
    "time_resolution_s": "Time resolution",
    "on_source": "True when pointed at the target, false for an off-source scan",
    "beam": "Beam of the scan",
    "cadence": "On/off cadence the scan belongs to",
    "pipeline_run": "Pipeline run that produced the detections",
    "detection_id": "Detection id in the exporting service (ignored on import)",
    "frequency_hz": "Topocentric frequency of the detection at time_offset_s",
    "drift_hz_s": "Drift rate",
    "snr": "Signal-to-noise ratio",
    "time_offset_s": "Time of frequency_hz after the scan start",
    "bandwidth_hz": "Bandwidth of the detection",
    "detection_beam": "Beam the detection was seen in",
    "candidate": "True when the pipeline flagged the detection as a candidate",
}
FORMATS = ("csv", "jsonl", "votable")
EXTENSIONS = {".csv": "csv", ".jsonl": "jsonl", ".vot": "votable", ".xml": "votable"}


class UnusableInput(Exception):
    """The file cannot be read as the exchange format at all (one line for the operator)."""


def format_of(path: Path, requested: str | None = None) -> str:
    """The exchange format: ``requested`` if given, else from the file extension."""
    if requested is not None:
        if requested not in FORMATS:
            raise UnusableInput(f"unknown format {requested!r}; use one of {', '.join(FORMATS)}")
        return requested
    found = EXTENSIONS.get(path.suffix.lower())
    if found is None:
        known = ", ".join(EXTENSIONS)
        raise UnusableInput(
            f"cannot tell the format of {path.name!r} from its extension ({known}); give --format"
        )
    return found


def check_columns(names: list[str], origin: str) -> list[str | None]:
    """Column names of the file in order; ignored ones become None. Refuse unknown or missing."""
    cleaned = [name.strip() for name in names]
    unknown = [n for n in cleaned if n not in IMPORT_COLUMNS and n not in IGNORED_COLUMNS]
    if unknown:
        raise UnusableInput(f"{origin}: unknown column(s) {', '.join(map(repr, unknown))}")
    duplicated = sorted({n for n in cleaned if cleaned.count(n) > 1})
    if duplicated:
        raise UnusableInput(f"{origin}: column(s) named twice: {', '.join(duplicated)}")
    missing = [n for n in REQUIRED_COLUMNS if n not in cleaned]
    if missing:
        raise UnusableInput(f"{origin}: required column(s) missing: {', '.join(missing)}")
    return [None if n in IGNORED_COLUMNS else n for n in cleaned]
