"""The import graph of kinroots (stdlib ``ast``): layers point downward, no cycles.

Layers, top to bottom (DEVELOPERS.md, "Architecture")::

    cli/, api.py  ->  report/  ->  plots/  ->  study/  ->  io/  ->  physics/
                                  study/  ->  roots/     (roots/ and physics/ independent)

Every ``import`` counts for the layers, also inside functions and under
``TYPE_CHECKING``: a lazy import is still a dependency.  Cycles: none through imports made
at import time; the cycles through lazy imports are listed (`KNOWN_LAZY_CYCLES`) so that
none is added.  Inside the package ``from kinroots import X`` is allowed only for
``__version__`` (the other package names are the public API, which sits on top).
"""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "kinroots"

#: Layer of each top-level part, and the layers it may import (itself included).
ALLOWED: dict[str, set[str]] = {
    "physics": {"physics"},
    "roots": {"roots"},
    "io": {"io", "physics"},
    "study": {"study", "io", "physics", "roots"},
    "plots": {"plots", "study", "io", "physics", "roots"},
    "report": {"report", "plots", "io", "physics"},
    "cli": {"cli", "report", "plots", "study", "io", "physics", "roots"},
    "api": {"api", "plots", "study", "io", "physics", "roots"},
    "__main__": {"cli"},
    "__init__": set(),
}


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in PACKAGE.rglob("*.py")}


def _resolve(name: str, modules: dict[str, Path]) -> str:
    """The module file an imported dotted name lives in (longest known prefix)."""
    parts = name.split(".")
    for n in range(len(parts), 0, -1):
        candidate = ".".join(parts[:n])
        if candidate in modules:
            return candidate
    return name


def _imports(module: str, path: Path, modules: dict[str, Path]
             ) -> list[tuple[str, int, bool]]:
    """(imported kinroots module, line, at import time) for every import in ``path``.

    "At import time": at module level, outside functions and ``if TYPE_CHECKING:``.
    """
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    is_package = path.name == "__init__.py"
    out: list[tuple[str, int, bool]] = []

    def targets(node: ast.Import | ast.ImportFrom) -> list[str]:
        if isinstance(node, ast.Import):
            return [_resolve(a.name, modules) for a in node.names
                    if a.name.split(".")[0] == "kinroots"]
        base = node.module or ""
        if node.level:
            anchor = module.split(".") if is_package else module.split(".")[:-1]
            anchor = anchor[: len(anchor) - node.level + 1]
            base = ".".join([*anchor, base] if base else anchor)
        if base.split(".")[0] != "kinroots":
            return []
        if base == "kinroots":
            return ["kinroots" if a.name == "__version__" else f"kinroots.{a.name}"
                    for a in node.names]
        # "from pkg import submodule" imports the submodule
        return [_resolve(f"{base}.{a.name}", modules) for a in node.names]

    def visit(node: ast.AST, eager: bool) -> None:
        for child in ast.iter_child_nodes(node):
            if isinstance(child, ast.Import | ast.ImportFrom):
                out.extend((t, child.lineno, eager) for t in targets(child))
            elif isinstance(child, ast.FunctionDef | ast.AsyncFunctionDef | ast.Lambda):
                visit(child, False)
            elif isinstance(child, ast.If) and "TYPE_CHECKING" in ast.unparse(child.test):
                for part in child.body:
                    visit(ast.Module(body=[part], type_ignores=[]), False)
                for part in child.orelse:
                    visit(ast.Module(body=[part], type_ignores=[]), eager)
            else:
                visit(child, eager)

    visit(tree, True)
    return out


def _layer(module: str) -> str:
    parts = module.split(".")
    if len(parts) == 1:
        return "__init__"
    return parts[1]


def _graph() -> dict[str, list[tuple[str, int, bool]]]:
    modules = _modules()
    return {m: _imports(m, p, modules) for m, p in modules.items()}


def test_layers_import_downward_only():
    bad = []
    for module, edges in _graph().items():
        allowed = ALLOWED[_layer(module)]
        for target, line, _ in edges:
            if target == "kinroots":  # `from kinroots import __version__`
                continue
            if _layer(target) not in allowed:
                bad.append(f"{module} (line {line}) imports {target}")
    assert not bad, "upward or sideways imports:\n" + "\n".join(sorted(bad))


def _cycles(eager_only: bool) -> set[str]:
    """Every import cycle found by depth-first search, as "a -> b -> a" strings."""
    graph = {m: sorted({t for t, _, eager in edges if t != m and (eager or not eager_only)})
             for m, edges in _graph().items()}
    cycles: set[str] = set()
    state: dict[str, int] = {}  # 1: on the stack, 2: done
    stack: list[str] = []

    def visit(m: str) -> None:
        state[m] = 1
        stack.append(m)
        for t in graph.get(m, []):
            if t not in graph:
                continue
            if state.get(t) == 1:  # written from its smallest module: order-independent
                ring = stack[stack.index(t):]
                first = ring.index(min(ring))
                ring = ring[first:] + ring[:first]
                cycles.add(" -> ".join([*ring, ring[0]]))
            elif t not in state:
                visit(t)
        stack.pop()
        state[m] = 2

    for m in sorted(graph):
        if m not in state:
            visit(m)
    return cycles


#: Cycles through imports made only inside functions or for type checking: no import-time
#: failure, but still two modules that need each other.  None is left (the Landau moments
#: live in physics/models/_landau.py below the builders and Krook, the magnetized Krook
#: dispersion functions in krook_dispersion.py above both, and rows reads a solution
#: through a protocol); a new one fails the test.
KNOWN_LAZY_CYCLES: set[str] = set()


def test_no_import_cycles_at_import_time():
    cycles = _cycles(eager_only=True)
    assert not cycles, "import cycles:\n" + "\n".join(sorted(cycles))


def test_lazy_import_cycles_are_the_known_ones():
    cycles = _cycles(eager_only=False)
    assert cycles == KNOWN_LAZY_CYCLES, (
        f"new: {sorted(cycles - KNOWN_LAZY_CYCLES)}; gone (take them off the list): "
        f"{sorted(KNOWN_LAZY_CYCLES - cycles)}")


def test_the_graph_sees_known_edges():
    """The parser finds imports that exist (a test that cannot fail would prove nothing)."""
    graph = _graph()
    targets = {t for t, _, eager in graph["kinroots.io.case"] if eager}
    assert {"kinroots.physics.plasma", "kinroots.io.checker"} <= targets
    lazy = {t for t, _, eager in graph["kinroots.api"] if not eager}
    assert "kinroots.study.problem" in lazy
    assert _layer("kinroots.cli._common") == "cli" and _layer("kinroots") == "__init__"
