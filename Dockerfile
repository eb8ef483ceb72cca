# rolloff: analog filter design service
FROM python:3.11-slim

ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    PIP_NO_CACHE_DIR=1 \
    PIP_DISABLE_PIP_VERSION_CHECK=1 \
    MPLCONFIGDIR=/tmp/matplotlib \
    PROMETHEUS_MULTIPROC_DIR=/tmp/rolloff-metrics \
    ROLLOFF_HOST=0.0.0.0 \
    ROLLOFF_PORT=8000 \
    ROLLOFF_WORKERS=2

WORKDIR /app

# Dependencies first, so that a source change does not reinstall them.
COPY requirements.lock /app/requirements.lock
RUN pip install --no-cache-dir -r /app/requirements.lock

COPY pyproject.toml README.md /app/
COPY service /app/service
RUN pip install --no-cache-dir --no-deps /app \
    && useradd --system --uid 10001 --no-create-home --shell /usr/sbin/nologin rolloff

USER 10001
EXPOSE 8000

# The service's own health endpoint, checked with the Python already in the image.
HEALTHCHECK --interval=30s --timeout=5s --start-period=20s --retries=3 \
    CMD ["python", "-c", "import sys, urllib.request; sys.exit(0 if urllib.request.urlopen('http://127.0.0.1:8000/healthz', timeout=4).status == 200 else 1)"]

# Run read-only: `docker run --read-only --tmpfs /tmp ...`. Every write goes to /tmp: matplotlib's
# cache (MPLCONFIGDIR), the metrics files (PROMETHEUS_MULTIPROC_DIR, emptied at start by the gunicorn
# config) and gunicorn's worker heartbeat files (worker_tmp_dir); no control socket is made.
# Workers, threads, timeouts and limits come from ROLLOFF_* variables (see README).
CMD ["sh", "-c", "mkdir -p \"$PROMETHEUS_MULTIPROC_DIR\" && exec gunicorn --config python:service.gunicorn_conf service.wsgi:app"]
