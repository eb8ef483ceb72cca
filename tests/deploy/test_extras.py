"""Every package the tests import is declared: in the runtime dependencies or the `test` extras.

The CI step scripts/check-test-imports also installs only the declared extras into
an empty virtual environment and imports each of these modules.
"""

from __future__ import annotations

import tomllib
from importlib import metadata

from packaging.requirements import Requirement
from packaging.utils import canonicalize_name

from tests.deploy.imports import ROOT, third_party_modules

PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text())


def _declared() -> set[str]:
    reqs = PYPROJECT["project"]["dependencies"] + PYPROJECT["project"]["optional-dependencies"]["test"]
    return {canonicalize_name(Requirement(r).name) for r in reqs}


def test_tests_import_something_third_party():
    modules = third_party_modules()
    for expected in ("numpy", "pytest", "mpmath", "hypothesis"):
        assert expected in modules


def test_every_imported_module_comes_from_a_declared_distribution():
    providers = metadata.packages_distributions()
    declared = _declared()
    undeclared = {}
    for module, files in third_party_modules().items():
        dists = {canonicalize_name(d) for d in providers.get(module, [])}
        if not dists & declared:
            undeclared[module] = (sorted(dists) or ["not installed"], files[:3])
    assert not undeclared, f"add to [project.optional-dependencies] test: {undeclared}"
