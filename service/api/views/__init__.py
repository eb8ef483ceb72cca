"""The blueprints of the service, registered in one place."""

from __future__ import annotations


def register_views(api) -> None:
    """Register every blueprint on the flask-smorest ``api``."""
    from service.api.views import approximations, catalog, designs, operations, values

    for module in (operations, catalog, values, approximations, designs):
        api.register_blueprint(module.blp)
