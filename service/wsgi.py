"""WSGI entry point for gunicorn: ``service.wsgi:app`` (settings from ROLLOFF_* variables)."""

from service.api.app import create_app

app = create_app()
