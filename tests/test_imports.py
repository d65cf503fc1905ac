"""The package's import graph: imports point only down the floors, and no module imports itself round a cycle.

Every import is counted, also the ones inside functions (fourfold imports heavy modules lazily, and a lazy
upward import is still an upward dependency). The floors, lowest first, are the project's own layering
(DEVELOPERS.md, "Layout").
"""

from __future__ import annotations

import ast
from pathlib import Path

import fourfold

PACKAGE = Path(fourfold.__file__).parent
FLOORS = (
    ("units", "errors", "data"),
    ("chem",),
    ("geometry",),
    ("field",),
    ("compute",),
    ("study",),
    ("verdict",),
    ("report",),
    ("pipeline",),
    ("cli", "__main__"),
)


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _imports(path: Path) -> set[str]:
    """fourfold modules imported anywhere in the file (relative imports resolved)."""
    module = _module_name(path)
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            found |= {a.name for a in node.names if a.name.startswith("fourfold")}
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if not target.startswith("fourfold"):
                continue
            # `from .x import y` may name a submodule y: count it as that module when it is one
            for alias in node.names:
                candidate = f"{target}.{alias.name}"
                found.add(candidate if _is_module(candidate) else target)
    return {_existing(name) for name in found} - {module}


def _is_module(name: str) -> bool:
    rel = Path(*name.split(".")[1:])
    return (PACKAGE / rel).with_suffix(".py").exists() or (PACKAGE / rel / "__init__.py").exists()


def _existing(name: str) -> str:
    """The longest prefix of a dotted name that is a module of the package."""
    parts = name.split(".")
    while len(parts) > 1 and not _is_module(".".join(parts)):
        parts.pop()
    return ".".join(parts)


def _floor(module: str) -> int:
    top = module.split(".")[1] if "." in module else ""
    for index, names in enumerate(FLOORS):
        if top in names:
            return index
    raise AssertionError(f"{module} belongs to no floor: add its top-level name to FLOORS")


def _graph() -> dict[str, set[str]]:
    return {_module_name(p): _imports(p) for p in PACKAGE.rglob("*.py")}


def test_every_module_has_a_floor():
    for module in _graph():
        if module != "fourfold":
            _floor(module)


def test_imports_point_down():
    upward = [f"{m} imports {t}" for m, targets in _graph().items() if m != "fourfold"
              for t in targets if t != "fourfold" and _floor(t) > _floor(m)]
    assert not upward, "upward imports:\n" + "\n".join(sorted(upward))


def test_no_import_cycles():
    graph = _graph()
    index, low, stack, on_stack, cycles = {}, {}, [], set(), []

    def visit(node):  # Tarjan's strongly connected components
        index[node] = low[node] = len(index)
        stack.append(node)
        on_stack.add(node)
        for target in graph.get(node, ()):
            if target not in index:
                visit(target)
                low[node] = min(low[node], low[target])
            elif target in on_stack:
                low[node] = min(low[node], index[target])
        if low[node] == index[node]:
            component = []
            while True:
                member = stack.pop()
                on_stack.discard(member)
                component.append(member)
                if member == node:
                    break
            if len(component) > 1:
                cycles.append(sorted(component))

    for node in graph:
        if node not in index:
            visit(node)
    assert not cycles, "import cycles: " + "; ".join(" ↔ ".join(c) for c in cycles)


def test_the_check_sees_an_upward_import(tmp_path):
    """The walker resolves relative imports inside functions (the form fourfold's lazy imports take)."""
    source = PACKAGE / "chem" / "complex.py"
    assert "fourfold.units" in _imports(source) or "fourfold.errors" in _imports(source)
