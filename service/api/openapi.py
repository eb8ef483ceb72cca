"""The OpenAPI document: generated from the schemas, committed under openapi/.

``rolloff openapi --write`` regenerates ``openapi/openapi.json``;
``rolloff openapi --check`` (and a test) fail when the committed copy differs
from what the code generates.

Names in the document are chosen here, once:

- **Component names** (:func:`component_name`): a schema class ``FooSchema``
  is the component ``Foo``, unless :data:`RENAMED` says otherwise. A name may
  not be one a client generator uses for its own types (:data:`RESERVED`,
  e.g. openapi-python-client's ``Response``) nor a Python builtin, and two
  classes may not share a name: :class:`ComponentNames` raises instead of
  letting apispec append a number.
- **Enumerations** of the domain (response type, family, section kind ...)
  are components of their own (:data:`service.api.schemas.common.ENUMS`), so
  a client has one enumeration type per concept, and a nullable one is
  ``oneOf: [{$ref}, {type: null}]`` rather than a second copy of the values.
- **operationId**: every operation has one, a snake_case verb phrase set by
  its view (``design_filter``); the GET form of a POST operation adds
  ``_by_query``, and the operation of one representation adds its name
  (``design_filter_csv``).
"""

from __future__ import annotations

import builtins
import json
from pathlib import Path

COMMITTED = Path(__file__).resolve().parents[2] / "openapi" / "openapi.json"

#: Type names client generators define for themselves (openapi-python-client 0.29: ``types.py``, ``client.py``,
#: ``errors.py``); a component of that name shadows them in the generated code.
RESERVED = frozenset({"Response", "File", "FileTypes", "Unset", "UNSET", "Client", "AuthenticatedClient",
                      "UnexpectedStatus", "Errors", "Types", "Api", "Models"})

#: Schema class (module.qualname) -> component name, where the class name minus ``Schema`` would collide or mislead.
RENAMED = {
    "service.api.schemas.responses.ResponseSchema": "FrequencyResponse",
    "service.api.views.catalog.FamilySchema": "FamilyInfo",
    "service.api.schemas.designs.WarningSchema": "DesignWarning",
}


class NameCollision(ValueError):
    """Two schemas (or a schema and a reserved name) would share one component name."""


def _key(cls: type) -> str:
    return f"{cls.__module__}.{cls.__qualname__}"


def component_name(schema) -> str:
    """The component name of a marshmallow schema class or instance (see the module notes)."""
    cls = schema if isinstance(schema, type) else type(schema)
    name = RENAMED.get(_key(cls))
    if name is None:
        name = cls.__name__
        if name.endswith("Schema") and len(name) > len("Schema"):
            name = name[: -len("Schema")]
    return name


def check_name(name: str, owner: str = "") -> str:
    """``name`` when a client generator can use it; :class:`NameCollision` otherwise."""
    if name in RESERVED or name in dir(builtins):
        raise NameCollision(f"component name {name!r}{f' ({owner})' if owner else ''} collides with a type of "
                            "generated clients or a Python builtin: add the schema to RENAMED")
    return name


class ComponentNames:
    """apispec's ``schema_name_resolver`` for one document: explicit, unique, generator-safe names."""

    def __init__(self) -> None:
        self.owners: dict[str, str] = {}

    def __call__(self, schema) -> str:
        cls = schema if isinstance(schema, type) else type(schema)
        name = check_name(component_name(cls), _key(cls))
        if not isinstance(schema, type) and (schema.only or schema.exclude):
            raise NameCollision(f"{_key(cls)} is used with only/exclude: give that variant a class of its own")
        owner = self.owners.setdefault(name, _key(cls))
        if owner != _key(cls):
            raise NameCollision(f"{_key(cls)} and {owner} both resolve to the component name {name!r}: add one "
                                "to RENAMED")
        return name


def generate() -> dict:
    """The OpenAPI document of an app built with default settings."""
    from service.api.app import create_app

    app = create_app({"api_keys": (), "api_keys_file": "", "cors_origins": ()})
    return app.extensions["rolloff_api"].spec.to_dict()


def render(document: dict) -> str:
    """Canonical text form (sorted keys, 2-space indent, trailing newline)."""
    return json.dumps(document, indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def write(path: Path = COMMITTED) -> Path:
    """Regenerate the committed document."""
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(render(generate()), encoding="utf-8")
    return path


def is_current(path: Path = COMMITTED) -> bool:
    """True when the committed document equals what the code generates."""
    return path.exists() and path.read_text(encoding="utf-8") == render(generate())
