"""Versions: of the service (the package) and of the HTTP API."""

from importlib.metadata import PackageNotFoundError, version

try:
    SERVICE_VERSION = version("rolloff")
except PackageNotFoundError:  # running from a source tree that was not installed
    SERVICE_VERSION = "0.0.0+source"

API_VERSION = "v1"
