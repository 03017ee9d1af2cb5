"""The ``confirm-service`` command group. Each sub-module adds one group of commands.

Start-up stays fast because nothing heavy is imported until a command runs: the group knows each
command's module and one-line help from :data:`COMMANDS`, imports only the module of the command
asked for, and the modules themselves import astropy, numpy, Flask and the services inside the
functions that need them. ``python -X importtime -m confirm_service.cli sites list`` shows what a
command loads; ``benchmarks/bench_cli_startup.py`` prints the figures.
"""

from __future__ import annotations

import importlib
import pkgutil
import sys
from typing import Any

import click

COMMANDS: dict[str, tuple[str, str]] = {
    "audit": ("audit", "The tamper-evident audit log (RFC 6962 tree, signed checkpoints)."),
    "candidates": ("candidates", "Candidates under confirmation: list, show, reopen, retract."),
    "db": ("database", "Database schema."),
    "demo": ("demo", "Run an invented scenario on a fresh SQLite database."),
    "dossier": ("dossier", "Write a candidate's dossier, or verify one offline."),
    "export": ("exchange", "Export scans and detections (CSV, JSON Lines, VOTable)."),
    "import": ("exchange", "Import scans and detections from a file."),
    "predict": ("physics", "Doppler prediction of a signal at a site and time."),
    "partner": ("partners", "Shared secrets of partner sites for signed follow-up messages."),
    "protocol": ("protocol", "Confirmation protocol files."),
    "scheduler": ("scheduler", "The scheduler process (one per deployment)."),
    "screening": ("screening", "Hits screened out, with their reasons; replay of screening runs."),
    "serve": ("serve", "Serve the API and the web pages."),
    "sites": ("sites", "Telescope sites: list, show, add, edit."),
    "targets": ("targets", "Sky targets: list, show, add, edit."),
    "token": ("tokens", "API tokens for machines (stored hashed; shown once)."),
    "user": ("users", "People's accounts for the web pages (passwords stored hashed)."),
    "visibility": ("physics", "When a target is observable from a site."),
}
"""Command name -> (module under ``confirm_service.cli``, one-line help)."""


class CommandGroup(click.Group):
    """Loads each command's module on first use; configuration and service errors become a
    one-line message and exit status 2."""

    def list_commands(self, ctx: click.Context) -> list[str]:
        self._load_unlisted_modules()
        return sorted(set(COMMANDS) | set(self.commands))

    def get_command(self, ctx: click.Context, cmd_name: str) -> click.Command | None:
        if cmd_name not in self.commands:
            if cmd_name in COMMANDS:
                importlib.import_module(f"{__name__}.{COMMANDS[cmd_name][0]}")
            else:
                self._load_unlisted_modules()
        return self.commands.get(cmd_name)

    def format_commands(self, ctx: click.Context, formatter: click.HelpFormatter) -> None:
        """The command list from :data:`COMMANDS` without importing every module."""
        self._load_unlisted_modules()
        rows = [(name, COMMANDS[name][1]) for name in sorted(COMMANDS)]
        rows += [
            (name, command.get_short_help_str(60))
            for name, command in sorted(self.commands.items())
            if name not in COMMANDS
        ]
        with formatter.section("Commands"):
            formatter.write_dl(rows)

    def _load_unlisted_modules(self) -> None:
        """Import command modules that :data:`COMMANDS` does not name (their commands register
        themselves on import)."""
        listed = {module for module, _ in COMMANDS.values()} | {"context", "progress", "timefmt"}
        for info in pkgutil.iter_modules(__path__):
            if info.name not in listed and not info.name.startswith("_"):
                importlib.import_module(f"{__name__}.{info.name}")

    def invoke(self, ctx: click.Context) -> Any:
        from confirm_service.config import ConfigError
        from confirm_service.errors import ServiceError

        try:
            return super().invoke(ctx)
        except ConfigError as exc:
            click.echo(f"error: {exc}", err=True)
            sys.exit(2)
        except ServiceError as exc:
            click.echo(f"error: {exc.detail}" + (f" ({exc})" if exc.errors else ""), err=True)
            sys.exit(2)


@click.group(cls=CommandGroup)
@click.version_option(package_name="confirm-service")
def main() -> None:
    """Follow-up and confirmation of narrowband technosignature candidates."""
