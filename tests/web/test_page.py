"""The page at / in headless Chromium against a live service: the PM-7 anti-alias design end to end.

What the page shows is checked against the service itself (/v1/designs answering the same request),
not against numbers written here.
"""

from __future__ import annotations

import functools
import http.server
import json
import re
import shutil
import socket
import threading
from urllib.parse import parse_qs, urlsplit

import pytest

from service.api.views.page import STATIC
from tests.web.conftest import Service, free_port, shot

DESIGNED = "body[data-stage=designed], body[data-stage=complete], #status.error"
COMPLETE = "body[data-stage=complete], #status.error"
TIMEOUT_MS = 60_000


def fill_pm7_antialias(pg) -> None:
    """The PM-7 accelerometer anti-aliasing requirement: flat within 0.1 dB to 10 kHz, 80 dB down at 25.6 kHz."""
    pg.select_option("#response", "lowpass")
    pg.fill("#passband", "10kHz")
    pg.fill("#stopband", "25.6kHz")
    pg.fill("#ripple", "0.1")
    pg.fill("#attenuation", "80")


def design_request(pg, action) -> dict:
    """Run ``action`` and return the JSON body the page POSTed to /v1/designs."""
    with pg.expect_request(lambda r: urlsplit(r.url).path == "/v1/designs" and r.method == "POST") as req:
        action()
    return json.loads(req.value.post_data)


def read_download(pg, selector: str) -> tuple[str, str]:
    with pg.expect_download() as dl:
        pg.click(selector)
    d = dl.value
    return d.suggested_filename, open(d.path(), encoding="utf-8", newline="").read()   # CSV lines end in CRLF


@pytest.fixture
def designed(page, service):
    """The page after designing the PM-7 anti-alias filter: (page, the body it sent to /v1/designs)."""
    page.goto(service.url + "/")
    fill_pm7_antialias(page)
    body = design_request(page, lambda: page.click("#design-button"))
    page.wait_for_selector(COMPLETE, timeout=TIMEOUT_MS)
    assert page.locator("#status.error").count() == 0, page.inner_text("#status")
    return page, body


def test_pm7_design_schematics_plots_and_downloads(designed, service):
    pg, body = designed
    assert body["response"] == "lowpass" and body["passband_hz"] == "10kHz" and body["stopband_hz"] == "25.6kHz"
    # the same request, asked of the service directly
    status, _, text = service.post("/v1/designs", body)
    assert status == 200
    doc = json.loads(text)
    n = len(doc["stages"])
    assert n >= 1
    # one schematic per stage, each an SVG the browser drew, naming the stage's parts
    imgs = pg.locator(".schematic img")
    assert imgs.count() == n
    for i in range(n):
        assert imgs.nth(i).evaluate("img => img.complete && img.naturalWidth > 100")
    svg = pg.locator("#dl-schematic-2").get_attribute("href") if n >= 2 else None
    assert svg is None or svg.startswith("blob:")
    # stage headings and section figures from the document, numbered from 1
    for k, st in enumerate(doc["stages"], start=1):
        heading = pg.inner_text(f"#stage-{k}-title")
        assert heading.startswith(f"Stage {k} · {st['section']['kind'].replace('_', ' ')}")
    # the verdict: the edges table holds the document's own margins
    verdict = pg.inner_text("#verdict")
    for edge in doc["summary"]["edges"]:
        assert f"{edge['margin_db']:+.3f}".replace("-", "−") in verdict.replace("-", "−")
    # the plots: response with the mask, the passband detail, the tolerance envelope
    for fig in ("#plot-response", "#plot-passband", "#plot-envelope", "#plot-envelope-detail"):
        assert pg.locator(f"{fig} svg polyline").count() >= 1, fig
    assert pg.locator("#plot-response svg rect[fill='#b3261e']").count() >= 1      # the requirement's shading
    assert re.search(r"\d+(\.\d)? %", pg.inner_text("#yield-value"))
    # downloads: the BOM and the netlist are what /v1/designs answers for the same request
    name, bom = read_download(pg, "#dl-bom")
    assert name == "bom.csv"
    status, ctype, bom_direct = service.post("/v1/designs", {**body, "format": "csv"})
    assert status == 200 and ctype.startswith("text/csv")
    assert bom == bom_direct
    name, netlist = read_download(pg, "#dl-netlist")
    status, _, netlist_direct = service.post("/v1/designs", {**body, "format": "spice"})
    assert name == "netlist.cir" and netlist == netlist_direct
    name, saved = read_download(pg, "#dl-design")
    assert name == "design.json" and json.loads(saved)["stages"] == doc["stages"]
    shot(pg, "pm7-antialias-1280x800")
    pg.evaluate("() => window.scrollTo(0, 0)")
    shot(pg, "pm7-antialias-1280x800-first-screen", full_page=False)
    assert not pg.errors, pg.errors


def test_reload_from_the_address_gives_the_same_design(designed, browser, service):
    pg, body = designed
    url = pg.url
    query = parse_qs(urlsplit(url).query)
    assert query["passband"] == ["10kHz"] and query["stopband"] == ["25.6kHz"]
    assert "api-key" not in url and "key" not in query
    _, first = read_download(pg, "#dl-design")
    context = browser.new_context(viewport={"width": 1280, "height": 800}, accept_downloads=True)
    again = context.new_page()
    try:
        body2 = design_request(again, lambda: again.goto(url))
        again.wait_for_selector(COMPLETE, timeout=TIMEOUT_MS)
        assert body2 == body
        _, second = read_download(again, "#dl-design")
        assert json.loads(second) == json.loads(first)
        assert again.input_value("#passband") == "10kHz"
    finally:
        context.close()


def test_validation_error_is_shown_beside_its_field(page, service):
    page.goto(service.url + "/")
    fill_pm7_antialias(page)
    page.fill("#passband", "10kHzz")
    page.click("#design-button")
    page.wait_for_selector("#passband[aria-invalid=true]", timeout=TIMEOUT_MS)
    message = page.inner_text("#passband-error")
    # the service's own message for the field (RFC 9457 problem, errors map)
    status, _, text = service.post("/v1/approximations/compare", {
        "response": "lowpass", "passband_hz": "10kHzz", "stopband_hz": "25.6kHz", "passband_ripple_db": 0.1,
        "stopband_attenuation_db": 80})
    assert status == 422
    assert message == " ".join(json.loads(text)["errors"]["passband_hz"])
    assert "passband-error" in page.get_attribute("#passband", "aria-describedby")
    # beside the field: right under the input, in the same column
    field = page.locator("#passband").bounding_box()
    msg = page.locator("#passband-error").bounding_box()
    assert 0 <= msg["y"] - (field["y"] + field["height"]) < 30 and abs(msg["x"] - field["x"]) < 5
    assert page.evaluate("() => document.activeElement.id") == "passband"
    assert page.input_value("#stopband") == "25.6kHz"          # nothing else lost
    shot(page, "validation-error")
    # fixing it clears the mark
    page.fill("#passband", "10kHz")
    page.click("#design-button")
    page.wait_for_selector(DESIGNED, timeout=TIMEOUT_MS)
    assert page.locator("#passband[aria-invalid=true]").count() == 0


def test_infeasible_requirement_names_the_field(page, service):
    page.goto(service.url + "/")
    fill_pm7_antialias(page)
    page.fill("#stopband", "9k")
    page.select_option("#family", "elliptic")
    page.click("#design-button")
    page.wait_for_selector("#stopband[aria-invalid=true]", timeout=TIMEOUT_MS)
    assert "stopband_hz" in page.inner_text("#stopband-error")


def test_bad_stock_rows_are_listed_and_nothing_is_lost(page, service):
    page.goto(service.url + "/")
    fill_pm7_antialias(page)
    stock = ("kind,value,tolerance,dielectric,part_id\n"
             "capacitor,1n,0.02,C0G,A\n"
             "capacitor,4.7q,0.02,C0G,B\n"
             "capacitor,10n,0.02,C0G,C\n"
             "inductor,10n,0.02,C0G,D\n"
             "capacitor,22n,two,C0G,E\n")
    page.fill("#stock", stock)
    before = {sel: page.input_value(sel) for sel in ("#passband", "#stopband", "#ripple", "#attenuation", "#gbw",
                                                     "#stock", "#r-tol", "#trials")}
    page.click("#design-button")
    page.wait_for_selector("#stock-errors:not([hidden])", timeout=TIMEOUT_MS)
    listed = page.inner_text("#stock-errors")
    assert "line 3 (value)" in listed and "4.7q" in listed
    assert "line 5 (kind)" in listed and "resistor, capacitor" in listed
    assert "line 6 (tolerance)" in listed
    assert "line 2" not in listed and "line 4" not in listed
    assert {sel: page.input_value(sel) for sel in before} == before
    assert page.get_attribute("#stock", "aria-invalid") == "true"
    shot(page, "stock-errors")


def test_network_failure_and_server_error_keep_the_form(page, service):
    page.goto(service.url + "/")
    fill_pm7_antialias(page)
    page.select_option("#family", "elliptic")
    page.fill("#gbw", "50MHz")
    page.route("**/v1/designs", lambda route: route.abort("connectionrefused"))
    page.click("#design-button")
    page.wait_for_selector("#status.error", timeout=TIMEOUT_MS)
    assert "could not be reached" in page.inner_text("#status")
    assert page.input_value("#gbw") == "50MHz" and page.input_value("#passband") == "10kHz"
    assert page.is_enabled("#design-button")
    page.unroute("**/v1/designs")
    page.route("**/v1/designs", lambda route: route.fulfill(
        status=503, content_type="application/problem+json",
        body=json.dumps({"type": "about:blank", "title": "Service Unavailable", "status": 503,
                         "detail": "the service is restarting"})))
    page.click("#design-button")
    page.wait_for_selector("#status.error", timeout=TIMEOUT_MS)
    text = page.inner_text("#status")
    assert "HTTP 503" in text and "inputs are kept" in text
    assert page.input_value("#gbw") == "50MHz"
    shot(page, "server-error")


def test_every_control_is_labelled_and_the_form_works_by_keyboard(page, service):
    page.goto(service.url + "/")
    for control in page.locator("form input, form select, form textarea").all():
        cid = control.get_attribute("id")
        assert cid and page.locator(f"label[for='{cid}']").count() == 1, cid
    page.focus("#passband")
    page.keyboard.press("Control+A")
    page.keyboard.type("10kHz")
    for _ in range(60):
        if page.evaluate("() => document.activeElement.id") == "design-button":
            break
        page.keyboard.press("Tab")
    assert page.evaluate("() => document.activeElement.id") == "design-button"
    page.keyboard.press("Enter")
    page.wait_for_selector(DESIGNED, timeout=TIMEOUT_MS)
    assert page.locator("#status.error").count() == 0


def test_busy_state_and_no_layout_jump(page, service):
    page.goto(service.url + "/")
    where = "el => { const r = el.getBoundingClientRect(); return [r.top + window.scrollY, r.height]; }"
    watched = ("#status", "#verdict-panel", "#compare-panel", "#stages-panel", "#design-button")
    before = {sel: page.locator(sel).evaluate(where) for sel in watched}
    held = []
    page.route("**/v1/designs", lambda route: held.append(route))       # hold the design until we have looked
    page.click("#design-button")
    page.wait_for_selector("#status.busy", timeout=10_000)
    for _ in range(200):
        if held:
            break
        page.wait_for_timeout(50)
    assert held, "the page did not ask for a design"
    assert page.get_attribute("#results", "aria-busy") == "true"
    assert page.is_disabled("#design-button") and page.inner_text("#design-button") == "Working…"
    during = {sel: page.locator(sel).evaluate(where) for sel in watched}
    for sel in ("#status", "#verdict-panel", "#compare-panel", "#design-button"):
        # the panels above the stages keep their place while the service works (the comparison fills in
        # its own box); only what comes after the stages may move once the stages arrive
        assert abs(during[sel][0] - before[sel][0]) < 1, sel
    assert abs(during["#status"][1] - before["#status"][1]) < 1
    held[0].continue_()
    page.wait_for_selector(COMPLETE, timeout=TIMEOUT_MS)
    assert page.get_attribute("#results", "aria-busy") == "false"
    page.unroute_all(behavior="ignoreErrors")


def test_narrow_window(browser, service):
    context = browser.new_context(viewport={"width": 420, "height": 860})
    pg = context.new_page()
    try:
        pg.goto(service.url + "/")
        pg.select_option("#family", "elliptic")
        pg.click("#design-button")
        pg.wait_for_selector(DESIGNED, timeout=TIMEOUT_MS)
        # the page itself never scrolls sideways; wide schematics scroll inside their box
        assert pg.evaluate("() => document.documentElement.scrollWidth <= window.innerWidth + 1")
        assert pg.locator(".schematic img").count() >= 1
        shot(pg, "pm7-antialias-420-wide")
    finally:
        context.close()


def test_api_key_kept_in_the_tab_only(browser):
    key = "pm7-bench-key-1"
    keyed = Service(ROLLOFF_API_KEYS=key)
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    pg = context.new_page()
    try:
        pg.goto(keyed.url + "/")
        pg.select_option("#family", "elliptic")
        pg.click("#design-button")
        pg.wait_for_selector("#status.error", timeout=TIMEOUT_MS)
        assert "API key" in pg.inner_text("#status")
        assert pg.evaluate("() => document.activeElement.id") == "api-key"
        pg.fill("#api-key", key)
        pg.dispatch_event("#api-key", "change")
        pg.click("#design-button")
        pg.wait_for_selector(COMPLETE, timeout=TIMEOUT_MS)
        assert pg.locator("#status.error").count() == 0
        assert pg.evaluate("() => sessionStorage.getItem('rolloff.apiKey')") == key
        assert pg.evaluate("() => localStorage.length") == 0
        assert key not in pg.url
    finally:
        context.close()
        keyed.stop()


def _copy_of_the_page(service_url: str, tmp_path):
    """The page's files as a team would host them on their own server, pointed at ``service_url``."""
    root = tmp_path / "site"
    shutil.copytree(STATIC, root / "assets")
    html = (STATIC / "index.html").read_text(encoding="utf-8")
    (root / "index.html").write_text(html.replace('<meta name="rolloff-api" content="">',
                                                  f'<meta name="rolloff-api" content="{service_url}">'))
    return root


@pytest.mark.parametrize("allowed", [True, False], ids=["origin-allowed", "origin-not-allowed"])
def test_page_hosted_elsewhere_calls_the_service_under_cors(browser, tmp_path, allowed):
    """A copy of the page on another origin designs when ROLLOFF_CORS_ORIGINS lists it, and cannot otherwise."""
    with socket.socket() as probe:               # hold the site's port while the service picks its own
        site_port = free_port()
        probe.bind(("127.0.0.1", site_port))
        site_origin = f"http://127.0.0.1:{site_port}"
        svc = Service(**({"ROLLOFF_CORS_ORIGINS": site_origin} if allowed else {}))
    handler = functools.partial(http.server.SimpleHTTPRequestHandler, directory=str(_copy_of_the_page(svc.url, tmp_path)))
    handler.log_message = lambda *a, **k: None
    site = http.server.ThreadingHTTPServer(("127.0.0.1", site_port), handler)
    threading.Thread(target=site.serve_forever, daemon=True).start()
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    try:
        pg = context.new_page()
        pg.goto(site_origin + "/")
        pg.select_option("#family", "elliptic")
        pg.click("#design-button")
        if allowed:
            pg.wait_for_selector(DESIGNED, timeout=TIMEOUT_MS)
            assert pg.locator("#status.error").count() == 0, pg.inner_text("#status")
            assert pg.locator(".schematic img").count() >= 1
        else:
            pg.wait_for_selector("#status.error", timeout=TIMEOUT_MS)
            assert "could not be reached" in pg.inner_text("#status")
    finally:
        context.close()
        site.shutdown()
        site.server_close()
        svc.stop()


def test_pick_a_family_from_the_comparison(designed, service):
    pg, _ = designed
    rows = pg.locator("#compare-table tbody tr")
    assert rows.count() >= 5
    assert pg.locator("#compare-table input[name=pick-family]:checked").get_attribute("value") == "elliptic"
    pg.check("#pick-chebyshev2")
    body = design_request(pg, lambda: pg.click("#use-family"))
    assert body["family"] == "chebyshev2"
    pg.wait_for_selector(DESIGNED, timeout=TIMEOUT_MS)
    assert pg.input_value("#family") == "chebyshev2"
    assert "chebyshev2" in pg.inner_text("#verdict")
    assert parse_qs(urlsplit(pg.url).query)["family"] == ["chebyshev2"]


def test_yield_target_is_sent_only_when_set(page, service):
    page.goto(service.url + "/")
    page.select_option("#family", "elliptic")
    bodies, statuses = [], []

    def seen(response):
        if urlsplit(response.url).path == "/v1/designs":
            bodies.append(json.loads(response.request.post_data))
            statuses.append(response.status)

    page.on("response", seen)
    page.click("#design-button")
    page.wait_for_selector(COMPLETE, timeout=TIMEOUT_MS)
    assert "yield" not in bodies[0]
    bodies.clear()
    statuses.clear()
    # a target the PM-7 stock grades can reach (90 % cannot: the service answers 422 naming the limiting parts)
    page.fill("#yield-target", "20")
    page.click("#design-button")
    page.wait_for_selector(COMPLETE, timeout=TIMEOUT_MS)
    assert bodies[0]["yield"] == {"target": 0.2, "trials": 500, "seed": 1}
    if statuses[0] == 422:
        # a service that does not take the field yet: the page designs without it and says so
        assert "yield" not in bodies[1] and statuses[1] == 200
        assert "does not take a yield target" in page.inner_text("#status")
    assert page.inner_text("#yield-target-verdict").startswith("Target 20.0 %")
