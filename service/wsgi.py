"""WSGI entry point for gunicorn: ``service.wsgi:app`` (settings from ROLLOFF_* variables).

Loaded once in the gunicorn master (``preload_app``), which then forks the
workers: everything imported or initialised here is shared, copy-on-write,
by every worker. :func:`warm_up` therefore loads what the views otherwise
load on first use (scipy.signal, the tolerance engine and its compiled
loops, matplotlib and its fonts) and runs the readiness checks once. In a worker, a first import under
load holds the interpreter lock for seconds, during which that worker's
/healthz and /readyz could not answer.
"""

import io

from service.api.app import create_app
from service.config import load_or_exit


def warm_up() -> None:
    """Import and initialise, once, what the first request of each kind would otherwise load."""
    import scipy.signal  # noqa: F401
    import service.tolerance  # noqa: F401
    from matplotlib.figure import Figure

    from service.compiled import warm

    from service.api.views.operations import readiness_checks

    figure = Figure(figsize=(2, 1))
    axes = figure.subplots()
    axes.semilogx([1.0, 10.0], [0.0, -3.0], label="warm-up")
    axes.set_title("warm-up")
    axes.legend()
    figure.savefig(io.BytesIO(), format="svg")
    readiness_checks()
    warm()  # compiled loops: loaded from the disk cache, or compiled once here (seconds), never in a request


# Checked before the app is built, so that a WSGI server loading this module with an invalid
# ROLLOFF_* value stops with one line on stderr and exit status 2 (no traceback).
load_or_exit(warn=False)
app = create_app()
warm_up()
