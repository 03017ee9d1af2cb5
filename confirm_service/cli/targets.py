"""``confirm-service targets list|show|add|edit``: the sky positions of the log."""

from __future__ import annotations

from datetime import datetime

import click

from confirm_service.cli import main
from confirm_service.cli.context import cli_actor, open_database, validated
from confirm_service.timeutil import utc_and_mjd


def _target_options(adding: bool):
    def decorate(command):
        options = [
            click.option("--ra", "ra_deg", type=float, required=adding, help="ICRS RA (deg)."),
            click.option("--dec", "dec_deg", type=float, required=adding, help="ICRS Dec (deg)."),
            click.option(
                "--pm-ra", "pm_ra_mas_yr", type=float, help="Proper motion in RA·cos(Dec) (mas/yr)."
            ),
            click.option(
                "--pm-dec", "pm_dec_mas_yr", type=float, help="Proper motion in Dec (mas/yr)."
            ),
            click.option("--parallax", "parallax_mas", type=float, help="Parallax (mas)."),
            click.option("--distance", "distance_pc", type=float, help="Distance (pc)."),
            click.option(
                "--epoch",
                type=click.DateTime(formats=["%Y-%m-%dT%H:%M:%S%z", "%Y-%m-%dT%H:%M%z"]),
                help="Epoch of the position, ISO 8601 with offset (2016-01-01T00:00:00+00:00).",
            ),
        ]
        for option in reversed(options):
            command = option(command)
        return command

    return decorate


def _fields(fields: dict[str, object]) -> dict[str, object]:
    epoch = fields.get("epoch")
    if isinstance(epoch, datetime):
        fields = {**fields, "epoch": epoch.isoformat()}
    return fields


@main.group("targets")
def targets_group() -> None:
    """Sky targets: list, show, add, edit."""


@targets_group.command("list")
def list_targets() -> None:
    """One line per target: name and ICRS position."""
    from confirm_service.services import sites as service

    with open_database().read() as session:
        rows = service.list_targets(session, 0, 100_000)
        click.echo(
            f"{'name':<24} {'RA°':>10} {'Dec°':>10} {'pm RA mas/yr':>13} "
            f"{'pm Dec':>8} {'plx mas':>8}"
        )
        for t in rows:
            click.echo(
                f"{t.name:<24} {t.ra_deg:>10.5f} {t.dec_deg:>+10.5f} "
                f"{_opt(t.pm_ra_mas_yr):>13} {_opt(t.pm_dec_mas_yr):>8} {_opt(t.parallax_mas):>8}"
            )
    click.echo(f"{len(rows)} target(s)", err=True)


def _opt(value: float | None) -> str:
    return "—" if value is None else f"{value:.3f}"


@targets_group.command("show")
@click.argument("name")
def show_target(name: str) -> None:
    """Everything recorded about one target."""
    from confirm_service.services import sites as service

    with open_database().read() as session:
        t = service.target_by_name(session, name, "name")
        lines = [
            f"target {t.name}",
            f"  position   RA {t.ra_deg:.6f}°, Dec {t.dec_deg:+.6f}° (ICRS)",
            f"  motion     pm RA {_opt(t.pm_ra_mas_yr)} mas/yr, pm Dec {_opt(t.pm_dec_mas_yr)} "
            f"mas/yr, parallax {_opt(t.parallax_mas)} mas, distance {_opt(t.distance_pc)} pc",
            f"  epoch      {utc_and_mjd(t.epoch)}",
            f"  created    {utc_and_mjd(t.created_at)}",
            f"  updated    {utc_and_mjd(t.updated_at)}",
        ]
    click.echo("\n".join(lines))


@targets_group.command("add")
@click.argument("name")
@_target_options(adding=True)
def add_target(name: str, **fields: object) -> None:
    """Register target NAME (the same checks as POST /api/v1/targets)."""
    from confirm_service.schemas.log import TargetIn
    from confirm_service.services import sites as service

    data = validated(TargetIn, {"name": name, **_fields(fields)})
    with open_database().write() as session:
        service.create_target(session, cli_actor(), data)
    click.echo(f"target {name} registered")


@targets_group.command("edit")
@click.argument("name")
@_target_options(adding=False)
def edit_target(name: str, **fields: object) -> None:
    """Change the given fields of target NAME (the same checks as PATCH /api/v1/targets/NAME)."""
    from confirm_service.schemas.log import TargetUpdate
    from confirm_service.services import sites as service

    data = validated(TargetUpdate, _fields(fields))
    if not data.model_fields_set:
        raise click.UsageError("give at least one field to change")
    with open_database().write() as session:
        service.update_target(session, cli_actor(), name, data)
    click.echo(f"target {name} updated: {', '.join(sorted(data.model_fields_set))}")
