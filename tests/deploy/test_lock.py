"""The hashed locks (requirements.lock, requirements-build.lock) against pyproject.toml.

A lock disagrees with pyproject.toml when: its recorded digest is not that of the
requirement list it pins (a dependency added, removed or changed without
`python3 scripts/lock`), a requirement is missing or pinned outside its
specifier, a pin has no hash, or (in an environment installed from the lock, as
scripts/test makes it) a locked package needs a package the lock lacks.
"""

from __future__ import annotations

import hashlib
import json
import re
import tomllib
from importlib import metadata
from pathlib import Path

import pytest
from packaging.markers import default_environment
from packaging.requirements import Requirement
from packaging.utils import canonicalize_name

ROOT = Path(__file__).resolve().parents[2]
PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text())
LOCKS = {
    "requirements.lock": PYPROJECT["project"]["dependencies"],
    "requirements-build.lock": PYPROJECT["build-system"]["requires"],
}
# The image's target, for which the locks are resolved (scripts/lock: Python 3.11 on Linux).
TARGET = {**default_environment(), "python_version": "3.11", "python_full_version": "3.11.2",
          "sys_platform": "linux", "platform_system": "Linux", "os_name": "posix",
          "implementation_name": "cpython", "platform_python_implementation": "CPython"}


def digest(requirements: list[str]) -> str:
    """Same formula as scripts/lock: sha256 of the sorted, space-free requirement strings as JSON."""
    return hashlib.sha256(json.dumps(sorted("".join(r.split()) for r in requirements)).encode()).hexdigest()


def parse_lock(text: str) -> dict[str, tuple[str, list[str]]]:
    """{canonical name: (version, [sha256 hashes])} of a pip requirements file with hashes."""
    pins: dict[str, tuple[str, list[str]]] = {}
    for entry in re.sub(r"\\\n\s*", " ", text).splitlines():
        entry = entry.split(" #", 1)[0].strip()
        if not entry or entry.startswith("#"):
            continue
        m = re.fullmatch(r"([A-Za-z0-9._-]+)==([^\s;]+)(?:\s*;[^-]*)?((?:\s+--hash=sha256:[0-9a-f]{64})*)", entry)
        assert m, f"not an exact pin with hashes: {entry[:120]}"
        pins[canonicalize_name(m.group(1))] = (m.group(2), re.findall(r"sha256:([0-9a-f]{64})", m.group(3)))
    return pins


@pytest.fixture(scope="module", params=sorted(LOCKS))
def lock(request):
    name = request.param
    text = (ROOT / name).read_text()
    return name, text, parse_lock(text), LOCKS[name]


def test_lock_records_the_digest_of_the_current_requirements(lock):
    name, text, _, requirements = lock
    first = text.splitlines()[0]
    assert first == f"# requirements-sha256: {digest(requirements)}", (
        f"{name} was not compiled from pyproject.toml's current list: run `python3 scripts/lock` and commit it")


def test_every_requirement_is_pinned_within_its_specifier(lock):
    name, _, pins, requirements = lock
    for text in requirements:
        req = Requirement(text)
        if req.marker and not req.marker.evaluate(TARGET):
            continue
        key = canonicalize_name(req.name)
        assert key in pins, f"{req.name} is not in {name}"
        assert req.specifier.contains(pins[key][0], prereleases=True), (
            f"{name} pins {req.name}=={pins[key][0]}, outside {req.specifier}")


def test_every_pin_is_exact_and_hashed(lock):
    name, _, pins, _ = lock
    assert pins
    for package, (version, hashes) in pins.items():
        assert hashes, f"{package}=={version} in {name} has no hash"


def test_digest_changes_with_the_requirements():
    deps = list(LOCKS["requirements.lock"])
    assert digest(deps) == digest(list(reversed(deps)))
    assert digest(deps) != digest(deps + ["schemdraw>=0.19"])
    assert digest(deps) != digest(deps[1:])


def _requires(dist: metadata.Distribution, extras: set[str]) -> list[Requirement]:
    out = []
    for text in dist.requires or []:
        req = Requirement(text)
        if req.marker is None or any(req.marker.evaluate({**TARGET, "extra": e}) for e in extras | {""}):
            out.append(req)
    return out


def test_runtime_lock_is_closed_under_dependencies():
    """Every package a locked package needs (on the target) is locked too.

    Read from the installed packages' metadata, so it needs an environment
    installed from requirements.lock (scripts/test installs it first).
    """
    pins = parse_lock((ROOT / "requirements.lock").read_text())
    installed = {}
    for package, (version, _) in pins.items():
        try:
            dist = metadata.distribution(package)
        except metadata.PackageNotFoundError:
            dist = None
        if dist is None or dist.version != version:
            pytest.skip(f"this environment has {package} {dist.version if dist else 'missing'}, the lock "
                        f"{version}: install it from requirements.lock (as scripts/test does) to check closure")
        installed[package] = dist
    wanted: dict[str, set[str]] = {canonicalize_name(Requirement(r).name): set(Requirement(r).extras)
                                   for r in LOCKS["requirements.lock"]}
    for dist in installed.values():  # extras that locked packages ask of each other (apispec[marshmallow])
        for req in _requires(dist, set()):
            wanted.setdefault(canonicalize_name(req.name), set()).update(req.extras)
    missing = []
    for package, dist in installed.items():
        for req in _requires(dist, wanted.get(package, set())):
            key = canonicalize_name(req.name)
            if key not in pins:
                missing.append(f"{package} needs {req}")
            elif not req.specifier.contains(pins[key][0], prereleases=True):
                missing.append(f"{package} needs {req}, the lock has {pins[key][0]}")
    assert not missing, missing
