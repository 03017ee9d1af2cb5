"""``confirm-service predict`` and ``confirm-service visibility``."""

from __future__ import annotations

import json
from datetime import datetime
from typing import Any

import click

from confirm_service.cli import main
from confirm_service.cli.context import open_database
from confirm_service.errors import Invalid
from confirm_service.services import sky
from confirm_service.timeutil import is_aware, parse_iso_time


def parse_time(value: str | None, field: str) -> datetime | None:
    """An ISO 8601 time with an explicit offset; a naive time is refused."""
    if value is None:
        return None
    try:
        parsed = parse_iso_time(value)
    except ValueError:
        raise Invalid("bad time", [(field, f"{value!r} is not ISO 8601")]) from None
    if not is_aware(parsed):
        raise Invalid("naive time", [(field, "needs a time-zone offset, e.g. +00:00")])
    return parsed


def site_options(prefix: str, label: str):
    dash = prefix.replace("_", "-")

    def decorate(command):
        for option in reversed(
            [
                click.option(f"--{dash}", f"{prefix}", default=None, help=f"{label}: site code"),
                click.option(
                    f"--{dash}-lat",
                    f"{prefix}_lat",
                    type=float,
                    default=None,
                    help=f"{label}: latitude, deg",
                ),
                click.option(
                    f"--{dash}-lon",
                    f"{prefix}_lon",
                    type=float,
                    default=None,
                    help=f"{label}: longitude, deg east",
                ),
                click.option(
                    f"--{dash}-height",
                    f"{prefix}_height",
                    type=float,
                    default=None,
                    help=f"{label}: height above the ellipsoid, m",
                ),
            ]
        ):
            command = option(command)
        return command

    return decorate


def target_options(command):
    command = click.option("--dec", type=float, default=None, help="ICRS declination, deg")(command)
    command = click.option("--ra", type=float, default=None, help="ICRS right ascension, deg")(
        command
    )
    return click.option("--target", default=None, help="registered target name")(command)


def _database_if_needed(*names: str | None):
    return open_database() if any(names) else None


def _resolve(database, kind, *args):
    if database is None:
        if kind == "site":
            return sky.resolve_site(None, None, *args)
        return sky.resolve_target(None, None, *args)
    with database.read() as session:
        if kind == "site":
            return sky.resolve_site(session, *args)
        return sky.resolve_target(session, *args)


@main.command("predict")
@site_options("site", "detecting site")
@target_options
@click.option("--time", "time_text", default=None, help="ISO 8601 with offset")
@click.option("--observed-frequency-hz", type=float, default=None)
@click.option("--observed-drift-hz-s", type=float, default=None)
@click.option("--drift-uncertainty-hz-s", type=float, default=None)
@click.option(
    "--detection",
    "detection_id",
    type=int,
    default=None,
    help="a stored hit: its site, target, instant, frequency, drift and their uncertainties "
    "(1 sigma from its scan's channel width and length under the configured protocol)",
)
@site_options("to_site", "second site")
@click.option("--to-time", "to_time_text", default=None, help="ISO 8601 with offset")
@click.option("--json", "as_json", is_flag=True, help="machine-readable output")
def predict(
    site,
    site_lat,
    site_lon,
    site_height,
    target,
    ra,
    dec,
    time_text,
    observed_frequency_hz,
    observed_drift_hz_s,
    drift_uncertainty_hz_s,
    detection_id,
    to_site,
    to_site_lat,
    to_site_lon,
    to_site_height,
    to_time_text,
    as_json,
):
    """Doppler quantities of a detection, and the signal expected at a second site/time.

    With ``--detection`` everything about the hit comes from the log, uncertainties included;
    otherwise give the site, target, time and observed frequency."""
    to_time = parse_time(to_time_text, "to_time")
    if detection_id is not None:
        database = _database_if_needed("detection")
        there = _second_site(database, to_site, to_site_lat, to_site_lon, to_site_height)
        with database.read() as session:
            hit = sky.stored_hit(session, detection_id)
        result = sky.predict(
            hit.site,
            hit.target,
            hit.time,
            hit.frequency_hz,
            hit.drift_hz_s,
            hit.drift_uncertainty_hz_s,
            there,
            to_time,
            frequency_uncertainty_hz=hit.frequency_uncertainty_hz,
        )
        _show_prediction(result, as_json)
        return
    if time_text is None or observed_frequency_hz is None:
        raise click.UsageError("give --detection, or --time and --observed-frequency-hz")
    time = parse_time(time_text, "time")
    database = _database_if_needed(site, target, to_site)
    here = (
        _resolve(database, "site", site, site_lat, site_lon, site_height)
        if database
        else sky.resolve_site(None, None, site_lat, site_lon, site_height)
    )
    where = (
        _resolve(database, "target", target, ra, dec)
        if database and target
        else sky.resolve_target(None, None, ra, dec)
    )
    there = _second_site(database, to_site, to_site_lat, to_site_lon, to_site_height)
    result = sky.predict(
        here,
        where,
        time,
        observed_frequency_hz,
        observed_drift_hz_s,
        drift_uncertainty_hz_s,
        there,
        to_time,
    )
    _show_prediction(result, as_json)


def _show_prediction(result: Any, as_json: bool) -> None:
    if as_json:
        click.echo(result.model_dump_json(indent=2))
        return
    _print_prediction(result)


def _second_site(
    database: Any, code: str | None, lat: float | None, lon: float | None, height: float | None
) -> Any:
    """The site a prediction is made for, by code or position; None when none is given."""
    if not code and lat is None:
        return None
    if database and code:
        return _resolve(database, "site", code, lat, lon, height, "to_site")
    return sky.resolve_site(None, None, lat, lon, height, "to_site")


def _print_prediction(result: Any) -> None:
    """One aligned line per quantity the prediction holds, then its notes."""
    rows = [
        ("radial velocity (toward target)", result.radial_velocity_m_s, "m/s"),
        ("Earth drift at observed frequency", result.earth_drift_hz_s, "Hz/s"),
        ("barycentric frequency", result.barycentric_frequency_hz, "Hz"),
        ("residual drift", result.residual_drift_hz_s, "Hz/s"),
        ("predicted frequency at second site", result.predicted_frequency_hz, "Hz"),
        ("  uncertainty (1 sigma)", result.predicted_frequency_uncertainty_hz, "Hz"),
        ("predicted drift at second site", result.predicted_drift_hz_s, "Hz/s"),
        ("  uncertainty (1 sigma)", result.predicted_drift_uncertainty_hz_s, "Hz/s"),
        ("second site radial velocity", result.to_radial_velocity_m_s, "m/s"),
        ("second site Earth drift", result.to_earth_drift_hz_s, "Hz/s"),
        ("distance between sites", result.site_distance_km, "km"),
    ]
    unknown_sigma = result.drift_uncertainty_hz_s is None and not result.frequency_uncertainty_hz
    for label, value, unit in rows:
        if value is None:
            continue
        if unknown_sigma and label.strip().startswith("uncertainty"):
            click.echo(f"{label:<36} {'not known':>22} (give --detection or the uncertainties)")
            continue
        click.echo(f"{label:<36} {value:>22.6f} {unit}")
    for note in result.notes:
        click.echo(f"note: {note}")


@main.command("visibility")
@site_options("site", "site (omit for every registered site)")
@target_options
@click.option("--from", "from_text", required=True, help="ISO 8601 with offset")
@click.option("--days", type=float, default=1.0, show_default=True)
@click.option(
    "--count", type=int, default=3, show_default=True, help="windows per site when no site is given"
)
@click.option("--json", "as_json", is_flag=True)
def visibility(
    site,
    site_lat,
    site_lon,
    site_height,
    target,
    ra,
    dec,
    from_text,
    days,
    count,
    as_json,
):
    """When a target is above a site's minimum elevation and clear of the Sun.

    Geometry only: each site's own safety rules (e.g. Sun avoidance) still govern the telescope.
    """
    start = parse_time(from_text, "from")
    database = _database_if_needed(site, target) or (
        open_database() if site is None and site_lat is None else None
    )
    where = (
        _resolve(database, "target", target, ra, dec)
        if database and target
        else sky.resolve_target(None, None, ra, dec)
    )
    if site is None and site_lat is None:
        with database.read() as session:
            found = sky.next_windows_everywhere(session, where, start, count)
        _print_windows_everywhere(found, as_json)
        return
    here = (
        _resolve(database, "site", site, site_lat, site_lon, site_height)
        if database and site
        else sky.resolve_site(None, None, site_lat, site_lon, site_height)
    )
    result = sky.visibility(here, where, start, days)
    if as_json:
        click.echo(result.model_dump_json(indent=2))
        return
    _print_windows(result)


def _print_windows_everywhere(found: dict[str, Any], as_json: bool) -> None:
    """The next windows at every registered site, as JSON or one line per window."""
    if as_json:
        document = {
            code: [
                {
                    "start": w.start.isoformat(),
                    "end": w.end.isoformat(),
                    "max_elevation_deg": w.max_elevation_deg,
                }
                for w in windows
            ]
            for code, windows in found.items()
        }
        click.echo(json.dumps(document, indent=2))
        return
    for code, windows in found.items():
        for w in windows:
            click.echo(
                f"{code:<8} {w.start:%Y-%m-%d %H:%M:%S} – {w.end:%Y-%m-%d %H:%M:%S} UTC"
                f"  peak {w.max_elevation_deg:5.1f} deg"
            )


def _print_windows(result: Any) -> None:
    """A table of one site's windows (UTC, duration in hours, peak elevation), then notes."""
    click.echo(f"{'start (UTC)':<20} {'end (UTC)':<20} {'duration':>10} {'peak elevation':>15}")
    for w in result.windows:
        click.echo(
            f"{w.start:%Y-%m-%d %H:%M:%S}  {w.end:%Y-%m-%d %H:%M:%S}  "
            f"{w.duration_s / 3600:8.2f} h  {w.max_elevation_deg:12.1f} deg"
        )
    for note in result.notes:
        click.echo(f"note: {note}")
