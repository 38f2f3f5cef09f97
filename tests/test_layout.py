"""The package's layers import one way, and no module imports itself back through a loop.

core -> nothing above it; sheet -> core; workbooks -> sheet, core; commands -> everything.
The imports are read from the source with ``ast`` (every import, also those inside functions),
so a lazy import that crosses a layer upwards is caught too.
"""
from __future__ import annotations

import ast
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "udfs" / "tailstop"
LAYERS = ("core", "sheet", "workbooks", "extension", "commands")  # each may import only the ones before it


def module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def imported_modules(path: Path):
    """Absolute names of the tailstop modules ``path`` imports."""
    name = module_name(path)
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if target.startswith("tailstop"):
                found.add(target)
                found.update(f"{target}.{alias.name}" for alias in node.names)
        elif isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names if alias.name.startswith("tailstop"))
    modules = {module_name(p) for p in PACKAGE.rglob("*.py")}
    return {m for m in found if m in modules}


def layer(module: str):
    parts = module.split(".")
    return parts[1] if len(parts) > 1 and parts[1] in LAYERS else None


SOURCES = sorted(PACKAGE.rglob("*.py"))


@pytest.mark.parametrize("path", SOURCES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_imports_run_down_the_layers(path):
    own = layer(module_name(path))
    if own is None:
        return  # tailstop/__init__.py re-exports the core
    allowed = set(LAYERS[: LAYERS.index(own) + 1])
    upward = sorted(m for m in imported_modules(path) if layer(m) not in allowed and layer(m) is not None)
    assert not upward, f"{module_name(path)} ({own}) imports from a layer above it: {upward}"


def test_no_import_loops():
    graph = {module_name(p): imported_modules(p) for p in SOURCES}
    for module in graph:  # a package's __init__ is imported by its submodules' import; ignore that edge
        graph[module] = {m for m in graph[module] if m != module and not module.startswith(m + ".")}
    state, stack = {}, []

    def visit(node):
        state[node] = "open"
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == "open":
                loop = stack[stack.index(nxt):] + [nxt]
                raise AssertionError("import loop: " + " -> ".join(loop))
            if nxt not in state:
                visit(nxt)
        stack.pop()
        state[node] = "done"

    for module in sorted(graph):
        if module not in state:
            visit(module)


def test_the_checker_sees_a_loop_and_an_upward_import(tmp_path, monkeypatch):
    # the two checks above must be able to fail: a tiny package with both faults
    fake = tmp_path / "tailstop"
    (fake / "core").mkdir(parents=True)
    (fake / "sheet").mkdir()
    (fake / "__init__.py").write_text("")
    (fake / "core" / "__init__.py").write_text("")
    (fake / "sheet" / "__init__.py").write_text("")
    (fake / "core" / "a.py").write_text("from ..sheet import b\n")
    (fake / "sheet" / "b.py").write_text("from ..core import a\n")
    monkeypatch.setattr(sys.modules[__name__], "PACKAGE", fake)
    with pytest.raises(AssertionError, match="layer above"):
        test_imports_run_down_the_layers(fake / "core" / "a.py")
    monkeypatch.setattr(sys.modules[__name__], "SOURCES", sorted(fake.rglob("*.py")))
    with pytest.raises(AssertionError, match="import loop"):
        test_no_import_loops()
