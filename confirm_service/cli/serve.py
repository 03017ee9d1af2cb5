"""``confirm-service serve``: the HTTP server."""

from __future__ import annotations

import os

import click

from confirm_service.cli import main
from confirm_service.cli.context import open_database, require_signing_key, settings


@main.command("serve")
@click.option("--host", default="127.0.0.1", show_default=True)
@click.option("--port", default=8080, show_default=True, type=int)
@click.option("--gunicorn", "use_gunicorn", is_flag=True, help="Serve with gunicorn (production).")
@click.option("--workers", default=2, show_default=True, type=int, help="gunicorn workers.")
def serve(host: str, port: int, use_gunicorn: bool, workers: int) -> None:
    """Serve the API. Without --gunicorn, Flask's development server."""
    open_database().dispose()  # refuse to start on an unreachable or empty database
    require_signing_key()  # ... or without the instance's audit signing key
    if use_gunicorn:
        argv = [
            "gunicorn",
            "--bind",
            f"{host}:{port}",
            "--workers",
            str(workers),
            "--access-logfile",
            "-",
            "confirm_service.wsgi:app",
        ]
        os.execvp("gunicorn", argv)
    from confirm_service.app import create_app

    create_app(settings()).run(host=host, port=port)
