"""The README's design to a yield target (PM-7 accelerometer anti-alias filter): it reaches its target, an
independent /v1/tolerance run of 2,000 boards passes at least 95 % of them, and the README states the figures
the service gives."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from service import create_app

README = (Path(__file__).resolve().parents[2] / "README.md").read_text()


def _example() -> tuple[dict, dict]:
    """The design request and the /v1/tolerance options of the README's yield block."""
    block = next(b for b in re.findall(r"```sh\n(.*?)```", README, re.S) if '"yield"' in b)
    design = json.loads(re.search(r"-o design95\.json -d '(.*?)'\n", block, re.S).group(1))
    check = re.search(r'-d "(\{\\"design\\": \$\(cat design95\.json\), .*?\})"', block).group(1)
    options = json.loads(check.replace('\\"', '"').replace("$(cat design95.json)", "null"))
    return design, options


@pytest.fixture(scope="module")
def replies():
    client = create_app({"TESTING": True, "request_deadline_s": 300.0}).test_client()
    design, options = _example()
    r = client.post("/v1/designs", json=design)
    assert r.status_code == 200, r.get_json()
    doc = r.get_json()
    c = client.post("/v1/tolerance", json=dict(options, design=doc))
    assert c.status_code == 200, c.get_json()
    return doc, c.get_json()["yield"]


def test_the_readme_showcase_passes_on_95_percent_of_boards(replies):
    doc, check = replies
    y = doc["yield"]
    assert y["reached"] and y["ci95_low"] >= 0.95 and doc["verdict"]["meets"]
    # source: /v1/tolerance, 2,000 other boards, every one verified: at least 95 % pass, and the two estimates
    # agree within their Wilson intervals (E. B. Wilson, JASA 22 (1927) 209-212)
    assert check["trials"] == 2000 and check["fraction"] >= 0.95
    assert check["ci95_low"] <= y["ci95_high"] and y["ci95_low"] <= check["ci95_high"]
    assert doc["cost"]["total"] < doc["cost"]["all_tightest"]


def test_the_readme_states_what_the_service_gives(replies):
    doc, check = replies
    y, cost = doc["yield"], doc["cost"]
    stated = (f"passes on {y['passed']} of 1,000 boards (Wilson interval\n{100 * y['ci95_low']:.1f}–"
              f"{100 * y['ci95_high']:.1f} %) at a relative cost of {cost['total']:g} (every part in its cheapest "
              f"grade: {cost['all_cheapest']:g};\nin its tightest: {cost['all_tightest']:g}), and on "
              f"{100 * check['fraction']:.1f} % of the 2,000 boards of the check.")
    text = " ".join(README.split())
    assert " ".join(stated.split()) in text, f"update the README's figures to: {stated}"
