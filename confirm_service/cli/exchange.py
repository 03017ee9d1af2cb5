"""``confirm-service import`` and ``export``: the observation log as CSV, JSON Lines or VOTable.

The file format is described in :mod:`confirm_service.services.exchange`.
"""

from __future__ import annotations

import sys
from datetime import datetime
from pathlib import Path

import click

from confirm_service.cli import main
from confirm_service.cli.context import cli_actor, open_database, settings
from confirm_service.services.exchange import columns, export, importer
from confirm_service.timeutil import parse_aware_time

FORMAT_HELP = "csv, jsonl or votable; by default from the extension (.csv, .jsonl, .vot or .xml)."


class AwareTime(click.ParamType):
    """An ISO 8601 date-time with a UTC offset; a naive value is refused."""

    name = "ISO-8601"

    def convert(
        self, value: object, param: click.Parameter | None, ctx: click.Context | None
    ) -> datetime:
        if isinstance(value, datetime):
            return value
        try:
            return parse_aware_time(str(value))
        except ValueError as exc:
            self.fail(f"{exc}; give e.g. 2026-11-20T03:00:00+00:00", param, ctx)


@main.command("import")
@click.argument("file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--format", "file_format", type=click.Choice(columns.FORMATS), help=FORMAT_HELP)
@click.option(
    "--max-reasons",
    type=click.IntRange(min=0),
    default=20,
    show_default=True,
    help="How many refusal reasons to list in the summary.",
)
def import_command(file: Path, file_format: str | None, max_reasons: int) -> None:
    """Import observations and detections from FILE, one row per detection.

    CSV and JSON Lines are read row by row; a VOTable is parsed whole in memory by astropy.
    Consecutive rows with identical observation columns form one observation, created in its
    own transaction: an observation with any bad row is refused whole. Importing a file
    twice records its observations twice. Progress goes to stderr, the summary to stdout.
    Exit status: 0 all rows accepted, 1 some refused, 2 unusable input (or a database
    failure; observations before it stay committed).
    """
    try:
        fmt = columns.format_of(file, file_format)
    except columns.UnusableInput as exc:
        click.echo(f"error: {exc}", err=True)
        sys.exit(2)
    config = settings()
    database = open_database()
    try:
        with click.progressbar(
            length=max(_size_of(file), 1), label=f"importing {file.name}", file=sys.stderr
        ) as bar:
            done = [0]

            def advance(position: int, _total: int) -> None:
                if position > done[0]:
                    bar.update(position - done[0])
                    done[0] = position

            summary = importer.import_file(
                database,
                cli_actor(),
                file,
                fmt,
                config.clock_skew_allowance_s,
                config.max_batch_detections,
                max_reasons,
                advance,
            )
    finally:
        database.dispose()
    for line in summary.lines():
        click.echo(line)
    for problem in (summary.unusable, summary.database_error):
        if problem is not None:
            click.echo(f"error: {problem}", err=True)
    sys.exit(summary.exit_status)


def _size_of(path: Path) -> int:
    try:
        return path.stat().st_size
    except OSError:
        return 0


@main.command("export")
@click.option(
    "--out",
    "out",
    required=True,
    type=click.Path(dir_okay=False, path_type=Path),
    help="File to write (replaced only once complete).",
)
@click.option("--format", "file_format", type=click.Choice(columns.FORMATS), help=FORMAT_HELP)
@click.option("--site", default=None, help="Only observations at this site code.")
@click.option("--target", default=None, help="Only observations of this target name.")
@click.option("--from", "start_from", type=AwareTime(), help="Start at or after (with offset).")
@click.option("--to", "start_to", type=AwareTime(), help="Start before this time (with offset).")
def export_command(
    out: Path,
    file_format: str | None,
    site: str | None,
    target: str | None,
    start_from: datetime | None,
    start_to: datetime | None,
) -> None:
    """Export observations and their detections, one row per detection.

    CSV and JSON Lines are streamed page by page; a VOTable is assembled in memory and
    written at the end. An observation without detections is one row with empty detection
    columns. The summary goes to stdout.
    """
    try:
        fmt = columns.format_of(out, file_format)
    except columns.UnusableInput as exc:
        raise click.UsageError(str(exc)) from None
    wanted = export.ExportFilter(site, target, start_from, start_to)
    database = open_database()

    def note(observations: int) -> None:
        if observations % 1000 == 0:
            click.echo(f"exported {observations} observations so far", err=True)

    try:
        summary = export.export_file(database, out, fmt, wanted, progress=note)
    except OSError as exc:
        click.echo(f"error: cannot write {out}: {exc.strerror or exc}", err=True)
        sys.exit(2)
    finally:
        database.dispose()
    click.echo(f"exported {summary.observations} observations ({summary.rows} rows) to {out}")
