"""The layers (DEVELOPERS.md): api -> workflows -> computation packages, one way.

The computation packages and the workflow layer never import Flask, marshmallow or the api layer; the
computation packages never import the workflow layer (it composes them, not the other way round).
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

SERVICE = Path(__file__).resolve().parents[1] / "service"
COMPUTATION = ["approximation", "circuit", "components", "realization", "response", "tolerance"]
BELOW_API = COMPUTATION + ["workflows"]
FORBIDDEN = ("flask", "marshmallow", "webargs", "flask_smorest", "apispec", "werkzeug", "service.api", "gunicorn")

# Allowed imports between computation packages (DESIGN.md: imports run one way).
ALLOWED = {
    "workflows": {"approximation", "circuit", "components", "realization", "response", "tolerance"},
    "approximation": set(),
    "circuit": set(),
    "components": set(),
    "realization": {"approximation", "circuit", "components"},
    "response": {"circuit", "approximation"},
    "tolerance": {"response", "realization", "circuit", "components", "approximation"},
}


def _imports(path: Path) -> list[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names += [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.append(node.module)
    return names


def _modules(package: str):
    return sorted((SERVICE / package).rglob("*.py"))


@pytest.mark.parametrize("package", BELOW_API)
def test_computation_package_imports_no_web_framework(package):
    offenders = [f"{p.relative_to(SERVICE)} imports {name}" for p in _modules(package) for name in _imports(p)
                 if name == "service" or any(name == f or name.startswith(f + ".") for f in FORBIDDEN)]
    assert not offenders, offenders


@pytest.mark.parametrize("package", BELOW_API)
def test_imports_between_layers_run_one_way(package):
    offenders = []
    for p in _modules(package):
        for name in _imports(p):
            parts = name.split(".")
            if parts[0] == "service" and len(parts) > 1 and parts[1] in ALLOWED and parts[1] != package:
                if parts[1] not in ALLOWED[package]:
                    offenders.append(f"{p.relative_to(SERVICE)} imports {name}")
    assert not offenders, offenders


def test_importing_computation_does_not_load_flask():
    code = ("import sys; import service.components, service.units, service.config; "
            + "".join(f"import service.{p}; " for p in BELOW_API if (SERVICE / p / "__init__.py").exists())
            + "bad = [m for m in ('flask', 'marshmallow', 'werkzeug') if m in sys.modules]; "
              "print(bad); sys.exit(1 if bad else 0)")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert result.returncode == 0, result.stdout + result.stderr


def test_only_config_reads_the_environment():
    offenders = []
    for p in SERVICE.rglob("*.py"):
        if p.name == "config.py" or p.name == "cli.py":
            continue
        text = p.read_text(encoding="utf-8")
        if "os.environ" in text or "os.getenv" in text:
            offenders.append(str(p.relative_to(SERVICE)))
    assert not offenders, offenders
