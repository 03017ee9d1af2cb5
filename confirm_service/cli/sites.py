"""``confirm-service sites list|show|add|edit``: the telescope sites of the log."""

from __future__ import annotations

import click

from confirm_service.cli import main
from confirm_service.cli.context import cli_actor, open_database, validated
from confirm_service.timeutil import utc_and_mjd


def _site_options(adding: bool):
    """The site's fields as options; every one optional when editing."""
    needed = adding

    def decorate(command):
        options = [
            click.option("--name", required=needed, help="Full name of the site."),
            click.option(
                "--lat", "latitude_deg", type=float, required=needed, help="Latitude (deg, WGS84)."
            ),
            click.option(
                "--lon", "longitude_deg", type=float, required=needed, help="Longitude (deg, east)."
            ),
            click.option(
                "--height", "elevation_m", type=float, required=needed, help="Height (m, WGS84)."
            ),
            click.option(
                "--min-elevation",
                "min_elevation_deg",
                type=float,
                help="Lowest usable elevation (deg; 10 if not given when adding).",
            ),
            click.option(
                "--sun-avoidance",
                "sun_avoidance_deg",
                type=float,
                help="Smallest angle from the Sun (deg; 5 if not given when adding).",
            ),
            click.option("--webhook-url", help="Where follow-up requests are posted (https)."),
            click.option("--email", help="Where follow-up requests are mailed."),
            click.option(
                "--band",
                "bands",
                multiple=True,
                help="A receiver band LOW_HZ:HIGH_HZ (repeat for several).",
            ),
        ]
        for option in reversed(options):
            command = option(command)
        return command

    return decorate


def _bands(values: tuple[str, ...]) -> list[list[float]] | None:
    if not values:
        return None
    bands = []
    for value in values:
        low, sep, high = value.partition(":")
        try:
            bands.append([float(low), float(high)])
        except ValueError:
            raise click.BadParameter(
                f"{value!r}: give LOW_HZ:HIGH_HZ", param_hint="--band"
            ) from None
        if not sep:
            raise click.BadParameter(f"{value!r}: give LOW_HZ:HIGH_HZ", param_hint="--band")
    return bands


@main.group("sites")
def sites_group() -> None:
    """Telescope sites: list, show, add, edit."""


@sites_group.command("list")
def list_sites() -> None:
    """One line per site: code, position and limits."""
    from confirm_service.services import sites as service

    with open_database().read() as session:
        rows = service.all_sites(session)
        click.echo(
            f"{'code':<8} {'latitude°':>10} {'longitude°':>11} {'height m':>9} "
            f"{'min el°':>7} {'sun°':>5}  name"
        )
        for s in rows:
            click.echo(
                f"{s.code:<8} {s.latitude_deg:>10.4f} {s.longitude_deg:>11.4f} "
                f"{s.elevation_m:>9.1f} {s.min_elevation_deg:>7.1f} {s.sun_avoidance_deg:>5.1f}  "
                f"{s.name}"
            )
    click.echo(f"{len(rows)} site(s)", err=True)


@sites_group.command("show")
@click.argument("code")
def show_site(code: str) -> None:
    """Everything recorded about one site."""
    from confirm_service.services import sites as service

    with open_database().read() as session:
        s = service.site_by_code(session, code, "code")
        lines = [
            f"site {s.code}: {s.name}",
            f"  position   latitude {s.latitude_deg:.6f}°, longitude {s.longitude_deg:.6f}°, "
            f"height {s.elevation_m:.1f} m (WGS84)",
            f"  limits     elevation ≥ {s.min_elevation_deg:.1f}°, "
            f"Sun ≥ {s.sun_avoidance_deg:.1f}° away",
            f"  contact    {s.webhook_url or '—'} · {s.email or '—'}",
            "  bands      "
            + (", ".join(f"{lo:,.0f}–{hi:,.0f} Hz" for lo, hi in s.receiver_bands) or "—"),
            f"  created    {utc_and_mjd(s.created_at)}",
            f"  updated    {utc_and_mjd(s.updated_at)}",
        ]
    click.echo("\n".join(lines))


@sites_group.command("add")
@click.argument("code")
@_site_options(adding=True)
def add_site(code: str, bands: tuple[str, ...], **fields: object) -> None:
    """Register site CODE (the same checks as POST /api/v1/sites)."""
    from confirm_service.schemas.log import SiteIn
    from confirm_service.services import sites as service

    data = validated(SiteIn, {"code": code, **fields, "receiver_bands_hz": _bands(bands)})
    with open_database().write() as session:
        service.create_site(session, cli_actor(), data)
    click.echo(f"site {code} registered")


@sites_group.command("edit")
@click.argument("code")
@_site_options(adding=False)
def edit_site(code: str, bands: tuple[str, ...], **fields: object) -> None:
    """Change the given fields of site CODE (the same checks as PATCH /api/v1/sites/CODE)."""
    from confirm_service.schemas.log import SiteUpdate
    from confirm_service.services import sites as service

    data = validated(SiteUpdate, {**fields, "receiver_bands_hz": _bands(bands)})
    if not data.model_fields_set:
        raise click.UsageError("give at least one field to change")
    with open_database().write() as session:
        service.update_site(session, cli_actor(), code, data)
    click.echo(f"site {code} updated: {', '.join(sorted(data.model_fields_set))}")
