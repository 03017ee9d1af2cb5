"""WSGI entry point for gunicorn: ``gunicorn 'confirm_service.wsgi:app'``."""

from confirm_service.app import create_app

app = create_app()
