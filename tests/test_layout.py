"""The package's boundaries: what may import what (docs/architecture.md describes them)."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "figproof"


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _sources() -> dict[str, Path]:
    return {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py")) if "demo" not in p.relative_to(PACKAGE).parts}


def _imports(path: Path, package: str) -> set[str]:
    """Every module named by an import anywhere in the file, lazy imports inside functions included."""
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                base = ".".join(package.split(".")[: len(package.split(".")) - node.level + 1] + ([base] if base else []))
            found.add(base)
            found.update(f"{base}.{alias.name}" for alias in node.names)
    return found


def _graph() -> dict[str, set[str]]:
    sources = _sources()
    graph: dict[str, set[str]] = {}
    for name, path in sources.items():
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        graph[name] = {m for m in _imports(path, package) if m in sources and m != name}
    return graph


def test_no_import_cycles_between_figproof_modules() -> None:
    graph = _graph()
    # a cycle exists iff a depth-first search meets a module that is still on its stack
    state: dict[str, int] = {}
    cycle: list[str] = []

    def visit(node: str, stack: list[str]) -> bool:
        state[node] = 1
        for nxt in sorted(graph[node]):
            if state.get(nxt) == 1:
                cycle.extend([*stack[stack.index(nxt):], node, nxt] if nxt in stack else [node, nxt])
                return True
            if nxt not in state and visit(nxt, [*stack, node]):
                return True
        state[node] = 2
        return False

    for start in sorted(graph):
        if start not in state and visit(start, []):
            break
    assert not cycle, " -> ".join(cycle)


def test_only_the_child_package_imports_pyplot() -> None:
    offenders = [name for name, path in _sources().items()
                 if not name.startswith("figproof.child")
                 and any(m == "matplotlib.pyplot" for m in _imports(path, name.rpartition(".")[0]))]
    assert offenders == []


def test_rules_science_and_model_import_no_drawing_or_image_library() -> None:
    heavy = ("matplotlib", "PIL")
    offenders = []
    for name, path in _sources().items():
        if name.split(".")[1:2] and name.split(".")[1] in ("rules", "science", "model", "policy"):
            bad = sorted(m for m in _imports(path, name) if m.split(".")[0] in heavy)
            if bad:
                offenders.append(f"{name}: {bad}")
    assert offenders == []


# What each folder may import, as the table in docs/architecture.md says ("hashing" and "notebook" are
# standard-library helpers at the top level that every layer may use; "figproof" is the package's version).
SHARED = {"figproof", "hashing", "notebook"}
MAY_IMPORT = {
    "model": set(),
    "science": set(),
    "rules": {"model", "science"},
    "policy": {"model"},
    "discover": {"config", "model"},
    "child": {"model"},
    "run": {"model", "discover"},
    "compare": {"model", "run"},
}


def _layer(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "figproof"


def test_each_folder_imports_only_the_layers_it_may() -> None:
    offenders = []
    for name, targets in sorted(_graph().items()):
        allowed = MAY_IMPORT.get(_layer(name))
        if allowed is None:
            continue
        bad = sorted(t for t in targets if _layer(t) not in {_layer(name), *allowed, *SHARED})
        if bad:
            offenders.append(f"{name}: {bad}")
    assert offenders == []


@pytest.mark.parametrize(("module", "absent"), [
    ("figproof.rules", ("matplotlib", "PIL")),
    ("figproof.config", ("figproof.rules", "matplotlib", "PIL")),
    ("figproof.discover.inventory", ("figproof.rules", "matplotlib", "PIL")),
    ("figproof.model.context", ("matplotlib", "PIL")),
])
def test_importing_a_layer_loads_nothing_it_does_not_need(module: str, absent: tuple[str, ...]) -> None:
    code = (f"import sys, {module}; "
            f"print(sorted({{m.split('.')[0] if not m.startswith('figproof') else m for m in sys.modules}} "
            f"& set({list(absent)!r})))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


def test_the_warm_pool_server_preloads_every_child_module() -> None:
    """A child module the server did not import is imported again by every forked child (about 10 ms a script)."""
    import figproof.child
    from figproof.child.server import PRELOAD

    child = Path(figproof.child.__file__).parent
    modules = {f"figproof.child.{p.stem}" for p in child.glob("*.py") if p.stem not in ("__init__", "server")}
    assert modules <= set(PRELOAD), sorted(modules - set(PRELOAD))
