"""The page's and the docs' routes through the Flask test client: content types, headers, offline files."""

from __future__ import annotations

import re

import pytest

from service import create_app
from service.api.views.page import STATIC


@pytest.fixture
def client():
    return create_app({"TESTING": True}).test_client()


def test_page_and_its_files(client):
    r = client.get("/")
    assert r.status_code == 200 and r.mimetype == "text/html"
    html = r.get_data(as_text=True)
    assert "script-src 'self'" in r.headers["Content-Security-Policy"]
    assert r.headers["X-Content-Type-Options"] == "nosniff"
    # every file the page names is served from here, as the right type (no CDN, no build step)
    names = re.findall(r'(?:href|src)="(assets/[^"]+)"', html)
    assert names
    for name in names:
        f = client.get("/" + name)
        assert f.status_code == 200, name
        assert f.mimetype in ("text/css", "text/javascript", "application/javascript"), (name, f.mimetype)
    for module in (STATIC / "js").glob("*.js"):
        text = module.read_text(encoding="utf-8")
        assert "http://" not in text.replace("http://www.w3.org/2000/svg", "") and "https://" not in text, module
        for dep in re.findall(r'from "\./([\w.]+)"', text):
            assert client.get(f"/assets/js/{dep}").status_code == 200, (module.name, dep)


def test_docs_files_come_from_the_package(client):
    r = client.get("/docs")
    assert r.status_code == 200 and r.mimetype == "text/html"
    html = r.get_data(as_text=True)
    for name in re.findall(r'(?:href|src)="((?:docs|assets)/[^"]+)"', html):
        assert client.get("/" + name).status_code == 200, name
    assert "Apache License" in client.get("/docs/LICENSE").get_data(as_text=True)
    assert client.get("/docs/oauth2-redirect.html").status_code == 404
    assert client.get("/assets/../views/page.py").status_code == 404


def test_pages_are_not_api_operations(client):
    paths = client.get("/v1/openapi.json").get_json()["paths"]
    assert "/" not in paths and "/docs" not in paths
    assert not any(p.startswith(("/assets", "/docs")) for p in paths)


def test_with_keys_the_pages_load_and_the_api_needs_the_key():
    client = create_app({"TESTING": True, "api_keys": ("k-1",)}).test_client()
    assert client.get("/").status_code == 200
    assert client.get("/docs").status_code == 200
    assert client.get("/v1/openapi.json").status_code == 401
    assert client.get("/v1/openapi.json", headers={"Authorization": "Bearer k-1"}).status_code == 200


def test_every_page_file_ships_in_the_package():
    import fnmatch
    import tomllib
    from pathlib import Path

    root = Path(__file__).resolve().parents[2]
    globs = tomllib.loads((root / "pyproject.toml").read_text())["tool"]["setuptools"]["package-data"]["service"]
    for f in STATIC.rglob("*"):
        if f.is_file():
            rel = f.relative_to(root / "service").as_posix()
            assert any(fnmatch.fnmatch(rel, g) and rel.count("/") == g.count("/") for g in globs), rel
