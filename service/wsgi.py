"""WSGI entry point for gunicorn: ``service.wsgi:app`` (settings from ROLLOFF_* variables)."""

from service.api.app import create_app
from service.config import load_or_exit

# Checked before the app is built, so that a WSGI server loading this module with an invalid
# ROLLOFF_* value stops with one line on stderr and exit status 2 (no traceback).
load_or_exit(warn=False)
app = create_app()
