"""The blueprints of the service, registered in one place."""

from __future__ import annotations


def register_views(api) -> None:
    """Register every blueprint on the flask-smorest ``api``."""
    from service.api.views import approximations, catalog, designs, operations, responses, tolerance, values

    for module in (operations, catalog, values, approximations, designs, responses, tolerance):
        api.register_blueprint(module.blp)

    from service.api.views import page

    page.register(api)      # / and /docs: pages, not API operations (kept out of the OpenAPI document)

    from service.api.schemas.common import ENUMS
    from service.api.schemas import montecarlo, responses

    for name, schema in {**responses.REFERENCED_COMPONENTS, **montecarlo.REFERENCED_COMPONENTS}.items():
        if name not in api.spec.components.schemas:
            api.spec.components.schema(name, schema=schema)
    for name, choices in sorted(ENUMS.items()):
        api.spec.components.schema(name, {"type": "string", "enum": list(choices)})
