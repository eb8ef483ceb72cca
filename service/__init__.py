"""rolloff: an HTTP service that designs analog active filters and checks them.

``from service import create_app`` gives the Flask application factory. The
factory is imported lazily so that the computation packages
(``service.approximation``, ``service.circuit``, ...) can be imported without
loading Flask.
"""

from typing import Any

__all__ = ["create_app"]


def __getattr__(name: str) -> Any:
    if name == "create_app":
        from service.api.app import create_app

        return create_app
    raise AttributeError(f"module 'service' has no attribute {name!r}")
