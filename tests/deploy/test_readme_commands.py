"""The README's two set-up commands and the CI script that runs them and every README example."""

from __future__ import annotations

import importlib.machinery
import importlib.util
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _script(name: str):
    loader = importlib.machinery.SourceFileLoader(name.replace("-", "_"), str(ROOT / "scripts" / name))
    spec = importlib.util.spec_from_loader(loader.name, loader)
    module = importlib.util.module_from_spec(spec)
    loader.exec_module(module)
    return module


EXAMPLES = _script("readme-examples")
README = (ROOT / "README.md").read_text()


def test_readme_has_exactly_the_two_set_up_commands():
    marked = {note: body.strip() for note, body in EXAMPLES.blocks(README) if note in ("start-command", "test-command")}
    assert marked == {"start-command": "bash scripts/serve", "test-command": "bash scripts/test"}
    quick_start = README[README.index("## Quick start"):README.index("## Examples")]
    assert quick_start.count("```sh") == 2
    # the statement of the job comes first
    assert README.index("rolloff is an HTTP service") < README.index("## Quick start")


def test_ci_runs_the_readme_test_command_with_the_system_python():
    ci = (ROOT / ".ci" / "run").read_text()
    assert "readme_block test-command" in ci and 'PATH="$SYSTEM_PATH"' in ci
    assert "SYSTEM_PATH=/usr/sbin:/usr/bin:/sbin:/bin" in ci
    for step in ("scripts/check-test-imports", "scripts/fuzz", "scripts/readme-examples", "scripts/container-smoke"):
        assert step in ci


def test_examples_parser_reads_expected_statuses():
    body = ("curl -s localhost:8000/a   # 401\n"
            "curl -s 'localhost:8000/v1/values/nearest?value=4.87k'   # 4700\n"
            "  -H 'x' \\\n"
            "python3 -c 'print(1)'\n")
    assert EXAMPLES.curl_lines(body) == [("curl -s localhost:8000/a   # 401", 401),
                                         ("curl -s 'localhost:8000/v1/values/nearest?value=4.87k'   # 4700", None)]


def test_every_readme_example_block_with_curl_is_run():
    examples = [(note, body) for note, body in EXAMPLES.blocks(README)
                if note not in ("start-command", "test-command", "skip") and EXAMPLES.curl_lines(body)]
    curls = sum(len(EXAMPLES.curl_lines(body)) for _, body in examples)
    assert curls == sum(1 for line in README.splitlines() if line.strip().startswith("curl "))
    assert any(note.startswith("env ROLLOFF_API_KEYS=") for note, _ in examples)


def test_lock_script_and_lock_test_share_the_digest():
    from tests.deploy.test_lock import digest

    lock = _script("lock")
    deps = ["flask>=3.1,<4", "numpy >= 1.26"]
    assert lock.requirement_digest(deps) == digest(deps)
