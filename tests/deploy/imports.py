"""The third-party modules the tests, benchmarks and scripts import (read from their source with ast)."""

from __future__ import annotations

import ast
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
FIRST_PARTY = {"service", "tests", "benchlib"}


def sources() -> list[Path]:
    """Every Python file under tests/ and every Python script under scripts/."""
    files = sorted((ROOT / "tests").rglob("*.py"))
    for path in sorted((ROOT / "scripts").iterdir()):
        if path.is_file() and (path.suffix == ".py" or path.read_text(errors="replace").startswith("#!/usr/bin/env python")):
            files.append(path)
    return files


def third_party_modules() -> dict[str, list[str]]:
    """{top-level module: [files importing it]}, standard library and first-party left out."""
    found: dict[str, list[str]] = {}
    for path in sources():
        tree = ast.parse(path.read_text(), filename=str(path))
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                names = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                names = [node.module]
            else:
                continue
            for name in names:
                top = name.split(".")[0]
                if top in sys.stdlib_module_names or top in FIRST_PARTY or top == "__future__":
                    continue
                found.setdefault(top, []).append(str(path.relative_to(ROOT)))
    return found


if __name__ == "__main__":  # print them, one a line (used by scripts/check-test-imports)
    print("\n".join(sorted(third_party_modules())))
