"""The package's import graph: layers point down, no cycles (issue 8 §1).

The graph is built from the source with :mod:`ast` (every ``import`` statement, those
inside functions included, relative imports resolved), by walking the package directory,
so modules added, moved or split later are covered without editing this file. The graph
builder itself is checked on a small package written here, with a known cycle and a
known upward import, so the checks below cannot pass by finding no edges.
"""

from __future__ import annotations

import ast
from pathlib import Path

import modalnb

PACKAGE_DIR = Path(modalnb.__file__).resolve().parent

#: What the engine (modalnb.estimate) may import: itself, the private foundation modules
#: (``modalnb._errors``, ``modalnb._utils``, ``modalnb._noise``, ``modalnb._pulse``, ...)
#: and the record-set definition. Everything else (checks, recipe, pipeline, fitting,
#: session, export, report, widgets, cli, io, demo, bench and test support) is above it.
ENGINE = "modalnb.estimate"


def engine_may_import(target: str) -> bool:
    if target == "modalnb":  # the package itself re-exports every layer
        return False
    return (
        target == ENGINE
        or target.startswith(ENGINE + ".")
        or target.split(".")[1].startswith("_")
        or target == "modalnb.records"
    )


def module_names(root: Path, package: str) -> dict[str, Path]:
    """Dotted module name -> file, for every ``.py`` file under `root` (a package dir)."""
    out = {}
    for path in sorted(root.rglob("*.py")):
        rel = path.relative_to(root).with_suffix("")
        parts = [package, *rel.parts]
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = path
    return out


def import_graph(root: Path, package: str) -> dict[str, set[str]]:
    """Module -> modules of the same package it imports (any scope, relative resolved)."""
    modules = module_names(root, package)
    graph: dict[str, set[str]] = {name: set() for name in modules}
    for name, path in modules.items():
        is_pkg = path.name == "__init__.py"
        here = name.split(".") if is_pkg else name.split(".")[:-1]
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            targets: list[str] = []
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    base = here[: len(here) - (node.level - 1)]
                    mod = ".".join(base + ([node.module] if node.module else []))
                else:
                    mod = node.module or ""
                for alias in node.names:
                    sub = f"{mod}.{alias.name}"
                    targets.append(sub if sub in modules else mod)
            for target in targets:
                # `import a.b.c` imports a.b.c; keep the longest prefix that is a module
                parts = target.split(".")
                while parts and ".".join(parts) not in modules:
                    parts.pop()
                if parts and ".".join(parts) != name:
                    graph[name].add(".".join(parts))
    return graph


def find_cycle(graph: dict[str, set[str]]) -> list[str] | None:
    """One import cycle as a list of modules (first == last), or None."""
    state: dict[str, int] = {}  # 1 = on the stack, 2 = done
    stack: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(graph):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def reachable(graph: dict[str, set[str]], start: str) -> dict[str, list[str]]:
    """Every module reachable from `start`, with one import path to it."""
    paths = {start: [start]}
    todo = [start]
    while todo:
        node = todo.pop()
        for nxt in sorted(graph.get(node, ())):
            if nxt not in paths:
                paths[nxt] = [*paths[node], nxt]
                todo.append(nxt)
    return paths


def test_graph_builder_finds_function_level_relative_cycles(tmp_path):
    pkg = tmp_path / "pkg"
    (pkg / "engine").mkdir(parents=True)
    (pkg / "__init__.py").write_text("from .engine import run\n")
    (pkg / "engine" / "__init__.py").write_text("from ._a import run\n")
    (pkg / "engine" / "_a.py").write_text("from ._b import helper\n\ndef run():\n    return helper()\n")
    (pkg / "engine" / "_b.py").write_text(
        "def helper():\n    from ._a import run\n    from ..top import thing\n    return run, thing\n")
    (pkg / "top.py").write_text("import pkg.engine._a\nthing = 1\n")
    graph = import_graph(pkg, "pkg")
    assert graph["pkg.engine._b"] == {"pkg.engine._a", "pkg.top"}
    assert graph["pkg.top"] == {"pkg.engine._a"}
    assert graph["pkg"] == {"pkg.engine"}
    cycle = find_cycle(graph)
    assert cycle is not None and cycle[0] == cycle[-1]
    assert {"pkg.engine._a", "pkg.engine._b"} <= set(cycle)
    assert "pkg.top" in reachable(graph, "pkg.engine._a")


def test_graph_covers_the_package():
    graph = import_graph(PACKAGE_DIR, "modalnb")
    assert "modalnb.estimate._fit" in graph and "modalnb.estimate._core" in graph["modalnb.estimate._fit"]
    assert "modalnb.fitting" in graph["modalnb"]  # modalnb.fit_modes comes from the fitting layer
    assert sum(len(v) for v in graph.values()) > 3 * len(graph) // 2


def test_no_import_cycle_in_the_package():
    cycle = find_cycle(import_graph(PACKAGE_DIR, "modalnb"))
    assert cycle is None, "import cycle: " + " -> ".join(cycle or [])


def test_engine_imports_no_higher_layer():
    graph = import_graph(PACKAGE_DIR, "modalnb")
    engine = [m for m in graph if m == ENGINE or m.startswith(ENGINE + ".")]
    assert len(engine) >= 5
    bad = []
    for module in engine:
        for target, path in reachable(graph, module).items():
            if not engine_may_import(target):
                bad.append(" -> ".join(path))
    assert not bad, "the engine reaches a higher layer: " + "; ".join(sorted(bad)[:5])


def test_public_api_holds_what_users_use_not_internals():
    # issue 8 §4: the notebook state and the recipe error are public; record internals are not
    import modalnb

    assert {"Analysis", "RecipeError", "fit_modes", "ModeFit", "run_recipe"} <= set(modalnb.__all__)
    assert not {"get_sample_rate", "has_force"} & set(modalnb.__all__)
    missing = [name for name in modalnb.__all__ if not hasattr(modalnb, name)]
    assert missing == []
    assert issubclass(modalnb.RecipeError, modalnb.ModalnbError)
