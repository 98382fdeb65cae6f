"""The layout rules of the contributor guide, checked from the source's own imports (no code is run).

- no import cycles among the planner's modules (imports inside functions count too;
  imports under ``if TYPE_CHECKING:`` do not, since they never run);
- the layers are read top-down: a module imports only from its own layer or the ones below
  (cli > serve > analysis > api > output > engine > scenario > files, errors > models);
- no private name (``_x``) is imported from another module;
- no module is longer than 500 lines, and planner/ holds at most 8 modules at its top level.

Run ``python -m pytest -q tests/test_layout.py`` after moving code.
"""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
#: Layers from the bottom up; a module may import from its own layer or any lower one.
LAYERS = ["models", "planner.errors", "planner.files", "planner.scenario", "planner.engine", "planner.output",
          "planner.api", "planner.analysis", "planner.serve", "planner.cli", "planner"]
MAX_LINES = 500
MAX_TOP_MODULES = 8


def _modules() -> dict[str, Path]:
    out = {}
    for top in ("planner", "models"):
        for f in (ROOT / top).rglob("*.py"):
            parts = list(f.relative_to(ROOT).with_suffix("").parts)
            if parts[-1] == "__init__":
                parts = parts[:-1]
            out[".".join(parts)] = f
    return out


MODULES = _modules()


def _is_package(name: str) -> bool:
    return MODULES[name].name == "__init__.py"


def _resolve(current: str, level: int, module: str | None) -> str:
    if not level:
        return module or ""
    base = current.split(".") if _is_package(current) else current.split(".")[:-1]
    base = base[: len(base) - (level - 1)]
    return ".".join(base + ([module] if module else []))


def _type_checking_nodes(tree: ast.AST) -> set[int]:
    skip: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If):
            test = node.test
            name = test.id if isinstance(test, ast.Name) else getattr(test, "attr", "")
            if name == "TYPE_CHECKING":
                for sub in node.body:
                    skip.update(id(n) for n in ast.walk(sub))
    return skip


def imports(name: str) -> list[tuple[str, list[str], int]]:
    """(imported module, names taken from it, line) for every planner/models import in module ``name``."""
    tree = ast.parse(MODULES[name].read_text(encoding="utf-8"))
    skip = _type_checking_nodes(tree)
    out = []
    for node in ast.walk(tree):
        if id(node) in skip:
            continue
        if isinstance(node, ast.Import):
            for a in node.names:
                if a.name.split(".")[0] in ("planner", "models"):
                    out.append((a.name, [], node.lineno))
        elif isinstance(node, ast.ImportFrom):
            target = _resolve(name, node.level, node.module)
            if target.split(".")[0] not in ("planner", "models"):
                continue
            plain = []
            for a in node.names:
                sub = f"{target}.{a.name}"
                if sub in MODULES:
                    out.append((sub, [], node.lineno))
                else:
                    plain.append(a.name)
            if plain:  # names defined by the module itself (a submodule taken by name is its own edge)
                out.append((target, plain, node.lineno))
    return out


def _layer(name: str) -> int:
    best = -1
    for k, prefix in enumerate(LAYERS):
        if name == prefix or name.startswith(prefix + "."):
            if best < 0 or len(prefix) > len(LAYERS[best]):
                best = k
    return best


def _graph() -> dict[str, set[str]]:
    return {m: {t for t, _, _ in imports(m) if t in MODULES and t != m} for m in MODULES}


def test_no_import_cycles():
    graph = _graph()
    cycles = []
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(m: str) -> None:
        state[m] = 1
        stack.append(m)
        for t in sorted(graph[m]):
            if state.get(t) == 1:
                cycles.append(stack[stack.index(t):] + [t])
            elif t not in state:
                visit(t)
        stack.pop()
        state[m] = 2

    for m in sorted(graph):
        if m not in state:
            visit(m)
    assert not cycles, "import cycles:\n" + "\n".join(" -> ".join(c) for c in cycles)


def test_layers_are_read_top_down():
    bad = []
    for m in MODULES:
        for t, _, line in imports(m):
            if t in MODULES and _layer(t) > _layer(m):
                bad.append(f"{MODULES[m].relative_to(ROOT)}:{line} imports {t} (a higher layer)")
    assert not bad, "\n".join(bad)


def test_no_private_names_across_modules():
    bad = []
    for m in MODULES:
        for t, names, line in imports(m):
            for n in names:
                if n.startswith("_") and t != m:
                    bad.append(f"{MODULES[m].relative_to(ROOT)}:{line} imports {n} from {t}")
    assert not bad, "\n".join(bad)


def test_modules_fit_in_one_sitting():
    long = {str(f.relative_to(ROOT)): n for f in MODULES.values()
            if (n := len(f.read_text(encoding="utf-8").splitlines())) > MAX_LINES}
    assert not long, f"modules over {MAX_LINES} lines: {long}"


def test_few_modules_at_the_top_of_planner():
    top = sorted(p.name for p in (ROOT / "planner").glob("*.py"))
    assert len(top) <= MAX_TOP_MODULES, top


def test_the_rules_can_fail():
    """The checker itself sees an import, a private name and a layer (guards against a checker that finds nothing)."""
    found = imports("planner.cli.main")
    assert any(t.startswith("planner.") for t, _, _ in found)
    assert _layer("planner.cli.main") > _layer("planner.engine.certificate") > _layer("models.data")
