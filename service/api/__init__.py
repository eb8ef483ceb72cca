"""HTTP layer: app factory, /v1 blueprints, schemas, errors, OpenAPI, formats.

The only package that imports Flask and marshmallow. Views load the request
with a schema, call one computation function and dump its result.
"""
