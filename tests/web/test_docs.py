"""/docs in headless Chromium: Swagger UI, served offline, shows every operation of /v1/openapi.json."""

from __future__ import annotations

import json

from tests.web.conftest import Service, shot

METHODS = ("get", "put", "post", "delete", "patch", "options", "head")


def operations(service: Service, key: str | None = None) -> set[tuple[str, str]]:
    status, _, text = service.get("/v1/openapi.json", key=key)
    assert status == 200
    spec = json.loads(text)
    return {(m.upper(), path) for path, item in spec["paths"].items() for m in item if m in METHODS}


def shown(pg) -> set[tuple[str, str]]:
    pg.wait_for_selector(".opblock-summary", timeout=30_000)
    out = set()
    for block in pg.locator(".opblock-summary").all():
        method = block.locator(".opblock-summary-method").inner_text().strip().upper()
        path = block.locator(".opblock-summary-path").get_attribute("data-path")
        out.add((method, path))
    return out


def test_docs_show_every_operation(page, service):
    offline = []
    page.on("request", lambda r: offline.append(r.url) if not r.url.startswith(service.url) else None)
    page.goto(service.url + "/docs")
    assert shown(page) == operations(service)
    assert not offline, offline                     # nothing fetched from anywhere but the service
    assert page.locator(".info .title").inner_text().startswith("rolloff")
    shot(page, "docs", full_page=False)
    assert not page.errors, page.errors


def test_docs_need_the_key_when_the_service_has_keys(browser):
    key = "pm7-docs-key"
    keyed = Service(ROLLOFF_API_KEYS=key)
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    pg = context.new_page()
    try:
        pg.goto(keyed.url + "/docs")
        pg.wait_for_selector("text=Failed to load API definition", timeout=30_000)
        assert pg.locator(".opblock-summary").count() == 0           # nothing about the API without the key
        pg.fill("#docs-api-key", key)
        pg.click("#docs-key button[type=submit]")
        assert shown(pg) == operations(keyed, key)
    finally:
        context.close()
        keyed.stop()
