"""The OpenAPI document: generated from the schemas, committed under openapi/.

``rolloff openapi --write`` regenerates ``openapi/openapi.json``;
``rolloff openapi --check`` (and a test) fail when the committed copy differs
from what the code generates.
"""

from __future__ import annotations

import json
from pathlib import Path

COMMITTED = Path(__file__).resolve().parents[2] / "openapi" / "openapi.json"


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
