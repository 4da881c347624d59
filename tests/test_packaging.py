"""The explicit package list in pyproject.toml names every package of the tree."""

from __future__ import annotations

import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_every_package_is_listed():
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    found = {
        ".".join(p.parent.relative_to(ROOT).parts)
        for top in ("sim", "planners")
        for p in (ROOT / top).rglob("__init__.py")
    }
    assert found <= listed, f"add to pyproject.toml: {sorted(found - listed)}"
    assert {"sim.bundled.fields", "sim.bundled.scenarios"} <= listed


def test_planners_never_imports_sim():
    for path in (ROOT / "planners").rglob("*.py"):
        for line in path.read_text().splitlines():
            s = line.strip()
            assert not (s.startswith("import sim") or s.startswith("from sim")), f"{path}: {s}"
