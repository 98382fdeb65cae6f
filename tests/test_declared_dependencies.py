"""Every outside package the code and the tests import is declared in pyproject.toml: the runtime ones under
``dependencies``, the ones only tests need under the ``test`` extra (a fresh ``pip install -e '.[test]'``
must be able to run the suite)."""

from __future__ import annotations

import ast
import re
import sys
import tomllib
from importlib.metadata import packages_distributions
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
OWN = {"planner", "models", "tests"}


def _imports(folder: Path) -> set[str]:
    out = set()
    for f in folder.rglob("*.py"):
        for node in ast.walk(ast.parse(f.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                out |= {a.name.split(".")[0] for a in node.names}
            elif isinstance(node, ast.ImportFrom) and not node.level and node.module:
                out.add(node.module.split(".")[0])
    return out - OWN - set(sys.stdlib_module_names)


def _names(requirements: list[str]) -> set[str]:
    return {re.split(r"[<>=!~\[; ]", r, maxsplit=1)[0].strip().lower().replace("_", "-") for r in requirements}


def _distributions(modules: set[str]) -> dict[str, set[str]]:
    found = packages_distributions()
    return {m: {d.lower().replace("_", "-") for d in found.get(m, [])} for m in modules}


def test_test_imports_are_declared():
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]
    runtime = _names(project["dependencies"])
    test = _names(project["optional-dependencies"]["test"])
    for module, dists in _distributions(_imports(ROOT / "tests")).items():
        assert dists, f"tests import {module}, which no installed distribution provides"
        assert dists & (runtime | test), f"tests import {module} ({', '.join(sorted(dists))}): add it to the test extra"
    # an optional extra (e.g. 'ipm') may provide what the code imports only where it is installed
    optional = set().union(*(_names(v) for k, v in project["optional-dependencies"].items() if k != "test"))
    for module, dists in _distributions(_imports(ROOT / "planner") | _imports(ROOT / "models")).items():
        assert dists & (runtime | optional), \
            f"the planner imports {module} ({', '.join(sorted(dists))}): add it to dependencies"
