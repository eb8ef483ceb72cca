"""marshmallow schemas of the /v1 API (request loading, reply documentation)."""
