# rolloff: analog filter design service
# Base: any Debian-based image with python3 (3.11) and the venv module. The default is the
# official Python image; where no registry is reachable, build one from Debian's packages with
# scripts/base-image and pass --build-arg BASE_IMAGE=localhost/rolloff-base:bookworm.
ARG BASE_IMAGE=docker.io/library/python:3.11-slim-bookworm
FROM ${BASE_IMAGE}

ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    PIP_NO_CACHE_DIR=1 \
    PIP_DISABLE_PIP_VERSION_CHECK=1 \
    PATH=/opt/rolloff/bin:$PATH \
    MPLCONFIGDIR=/tmp/matplotlib \
    PROMETHEUS_MULTIPROC_DIR=/tmp/rolloff-metrics \
    NUMBA_CACHE_DIR=/tmp/numba-cache \
    ROLLOFF_HOST=0.0.0.0 \
    ROLLOFF_PORT=8000 \
    ROLLOFF_WORKERS=2

WORKDIR /app

# Dependencies first, so that a source change does not reinstall them: every package pinned and
# hash-checked (requirements.lock; the build tools in requirements-build.lock), in a virtual
# environment of its own (a distribution's python3 is externally managed, PEP 668).
# Behind a TLS-inspecting proxy, hand the build its CA bundle as a secret (never stored in the
# image): `--secret id=pip-ca,src=/etc/ssl/certs/ca-certificates.crt`.
COPY requirements.lock requirements-build.lock /app/
RUN --mount=type=secret,id=pip-ca \
    if [ -f /run/secrets/pip-ca ]; then export PIP_CERT=/run/secrets/pip-ca; fi \
    && python3 -m venv /opt/rolloff \
    && /opt/rolloff/bin/pip install --no-cache-dir --require-hashes \
       -r /app/requirements-build.lock -r /app/requirements.lock

COPY pyproject.toml README.md /app/
COPY service /app/service
# The compiled loops (service/compiled.py) are compiled here, once, into /opt/rolloff/numba-cache; the
# container copies them to its writable NUMBA_CACHE_DIR at start (a host with another CPU recompiles
# them there, once, before the workers fork).
RUN /opt/rolloff/bin/pip install --no-cache-dir --no-deps --no-build-isolation /app \
    && NUMBA_CACHE_DIR=/opt/rolloff/numba-cache /opt/rolloff/bin/python -c "from service.compiled import warm; warm()" \
    && groupadd --system --gid 10001 rolloff \
    && useradd --system --uid 10001 --gid 10001 --no-create-home --shell /usr/sbin/nologin rolloff

USER 10001
EXPOSE 8000

# Kept by Docker and by `podman build --format docker`; OCI images (podman's and buildah's
# default) drop HEALTHCHECK: there the orchestrator's probes on /healthz and /readyz do this job
# (deploy/kubernetes/deployment.yaml).
HEALTHCHECK --interval=30s --timeout=5s --start-period=20s --retries=3 \
    CMD ["python", "-c", "import os, sys, urllib.request; sys.exit(0 if urllib.request.urlopen('http://127.0.0.1:%s/healthz' % os.environ.get('ROLLOFF_PORT', '8000'), timeout=4).status == 200 else 1)"]

# Run read-only: `docker run --read-only --tmpfs /tmp ...`. Every write goes to /tmp: matplotlib's
# cache (MPLCONFIGDIR), the metrics files (PROMETHEUS_MULTIPROC_DIR, emptied at start by the gunicorn
# config), the compiled loops (NUMBA_CACHE_DIR) and gunicorn's worker heartbeat files (worker_tmp_dir);
# no control socket is made.
# Workers, threads, timeouts and limits come from ROLLOFF_* variables (see README). SIGTERM drains
# in-flight requests for ROLLOFF_GRACEFUL_TIMEOUT_S seconds (give `docker stop -t` more than that).
CMD ["sh", "-c", "mkdir -p \"$PROMETHEUS_MULTIPROC_DIR\" && if [ -n \"$NUMBA_CACHE_DIR\" ] && [ -d /opt/rolloff/numba-cache ]; then mkdir -p \"$NUMBA_CACHE_DIR\" && cp -R /opt/rolloff/numba-cache/. \"$NUMBA_CACHE_DIR\"/; fi && exec gunicorn --config python:service.gunicorn_conf service.wsgi:app"]
