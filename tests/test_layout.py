"""The package layout shows the architecture: layers as folders, imports pointing down, no cycles.

Every rule here reads the source with ``ast`` (no module is imported), so a
function-level or ``TYPE_CHECKING`` import counts like any other.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "sleepfuse"

# Lowest first. A module may import from its own layer and from layers below it.
LAYERS = [
    ("model",),
    ("readers",),
    ("scoring",),
    ("fusion",),
    ("output", "synthetic"),
    ("study",),
    ("run",),
    ("explore",),
    ("tui",),
    ("cli",),
]
MAX_TOP_LEVEL_MODULES = 8
MAX_LINES = 400
# Violations being removed on work branches; this set must be empty again before a stop.
PENDING = {
    "edge": set(),
    "size": set(),
    "private": set(),
}


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in PACKAGE.rglob("*.py")}


def _imports(name: str, path: Path, known: set[str]) -> set[str]:
    """Package modules that ``name`` imports, resolved to the most specific known module."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    is_pkg = path.name == "__init__.py"
    found: set[str] = set()
    for node in ast.walk(tree):
        targets: list[str] = []
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = name.split(".") if is_pkg else name.split(".")[:-1]
                base = base[: len(base) - (node.level - 1)]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            targets = [f"{mod}.{a.name}" for a in node.names] + [mod]
        for target in targets:
            while target and target not in known:
                target = target.rpartition(".")[0]
            if target and target.startswith("sleepfuse") and target != name:
                found.add(target)
    return found


def import_graph() -> dict[str, set[str]]:
    modules = _modules()
    known = set(modules)
    graph = {name: _imports(name, path, known) for name, path in modules.items()}
    # ``from pkg import x`` also names pkg/__init__; a package's own __init__ is no edge back.
    for name, deps in graph.items():
        deps.discard("sleepfuse")
        deps -= {d for d in deps if name.startswith(d + ".")}
        deps -= {d for d in deps if (name, d) in PENDING["edge"]}
    return graph


def find_cycle(graph: dict[str, set[str]]) -> list[str] | None:
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for dep in sorted(graph.get(node, ())):
            if state.get(dep) == 1:
                return stack[stack.index(dep):] + [dep]
            if dep not in state:
                cycle = visit(dep)
                if cycle:
                    return cycle
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(graph):
        if node not in state:
            cycle = visit(node)
            if cycle:
                return cycle
    return None


def _layer(module: str) -> int | None:
    parts = module.split(".")
    if len(parts) < 2:
        return None
    for i, names in enumerate(LAYERS):
        if parts[1] in names:
            return i
    return None


def test_no_import_cycles():
    cycle = find_cycle(import_graph())
    assert cycle is None, "import cycle: " + " -> ".join(cycle)


def test_no_cycles_between_folders():
    graph: dict[str, set[str]] = {}
    for module, deps in import_graph().items():
        src = ".".join(module.split(".")[:2])
        graph.setdefault(src, set()).update(".".join(d.split(".")[:2]) for d in deps)
    for src, deps in graph.items():
        deps.discard(src)
    cycle = find_cycle(graph)
    assert cycle is None, "folders import each other: " + " -> ".join(cycle)


def test_cycle_finder_sees_a_cycle():
    assert find_cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert find_cycle({"a": {"b"}, "b": set()}) is None


def test_dependencies_point_down_the_layers():
    upward = []
    for module, deps in import_graph().items():
        mine = _layer(module)
        for dep in deps:
            theirs = _layer(dep)
            if mine is not None and theirs is not None and theirs > mine:
                upward.append(f"{module} -> {dep}")
    assert not upward, "imports that point up the layers:\n" + "\n".join(sorted(upward))


def test_every_folder_has_a_layer():
    folders = {p.name for p in PACKAGE.iterdir() if p.is_dir() and (p / "__init__.py").exists()}
    assert folders <= {n for names in LAYERS for n in names}


def test_few_modules_at_the_top():
    top = sorted(p.name for p in PACKAGE.glob("*.py"))
    assert len(top) <= MAX_TOP_LEVEL_MODULES, top


@pytest.mark.parametrize("path", sorted(PACKAGE.rglob("*.py")), ids=lambda p: str(p.relative_to(PACKAGE)))
def test_module_size(path):
    if str(path.relative_to(PACKAGE)) in PENDING["size"]:
        pytest.skip("being split on a work branch")
    lines = len(path.read_text(encoding="utf-8").splitlines())
    assert lines <= MAX_LINES, f"{path.name} has {lines} lines; split it by job"


def test_no_private_library_internals():
    offenders = []
    for path in PACKAGE.rglob("*.py"):
        if str(path.relative_to(PACKAGE)) in PENDING["private"]:
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            names = []
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and not node.level:
                names = [node.module or ""] + [f"{node.module}.{a.name}" for a in node.names]
            for n in names:
                parts = n.split(".")
                if parts[0] != "sleepfuse" and any(p.startswith("_") and not p.startswith("__") for p in parts[1:]):
                    offenders.append(f"{path.relative_to(PACKAGE)}: {n}")
    assert not offenders, offenders
