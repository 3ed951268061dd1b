"""How the modules of toolkit/ may import one another (docs/architecture.md, "Rooms").

Read from the source with ``ast`` (lazy imports inside functions included), not by importing, so a rule broken
in a branch that never runs still fails here. Rules of the project's own, no outside source.
"""

from __future__ import annotations

import ast
import collections
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "toolkit"
# The computing stages: they take values and return values. The job file is read once, at the edge.
STAGES = ("toolkit.fe", "toolkit.optimize", "toolkit.voids", "toolkit.rules", "toolkit.dxf_in",
          "toolkit.model", "toolkit.units", "toolkit.errors", "toolkit.limits", "toolkit.analysis",
          "toolkit.edge_stress", "toolkit.moving")


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _imports(path: Path, name: str):
    """(module imported from, name imported) for every ``from ... import`` in toolkit, lazy ones included."""
    package = name if path.name == "__init__.py" else name.rsplit(".", 1)[0]
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            base = package
            for _ in range(max(node.level - 1, 0)):
                base = base.rsplit(".", 1)[0]
            source = (base + ("." + node.module if node.module else "")) if node.level else (node.module or "")
            for alias in node.names:
                yield source, alias.name
        elif isinstance(node, ast.Import):
            for alias in node.names:
                yield alias.name, None


MODULES = {_module_name(p): p for p in sorted(ROOT.rglob("*.py"))}
IMPORTS = {name: list(_imports(path, name)) for name, path in MODULES.items()}


def _private(name: str) -> bool:
    return name.startswith("_") and not (name.startswith("__") and name.endswith("__"))


def test_the_walk_sees_the_package():
    assert {"toolkit.cli", "toolkit.voids.layout", "toolkit.fe.solve", "toolkit.jobfile"} <= set(MODULES)
    assert ("toolkit.voids.settings", "VoidOptions") in IMPORTS["toolkit.voids.layout"]


def test_no_module_imports_another_modules_private_name():
    found = [f"{name} imports {source}.{imported}" for name, pairs in IMPORTS.items()
             for source, imported in pairs
             if source.startswith("toolkit") and imported and _private(imported)
             and f"{source}.{imported}" not in MODULES and source != name]
    assert not found, "\n".join(found)


def test_no_stage_reads_the_job_file():
    found = [f"{name} imports {source}" for name, pairs in IMPORTS.items()
             if name.startswith(STAGES) for source, imported in pairs
             if source == "toolkit.jobfile" or (source == "toolkit" and imported == "jobfile")]
    assert not found, "\n".join(found)


def test_the_grid_needs_no_memory_law():
    # fe/ is the bottom of the numerical stack: limits -> fe.grid, never the other way (an import loop before).
    found = [f"{name} imports {source}" for name, pairs in IMPORTS.items() if name.startswith("toolkit.fe")
             for source, imported in pairs
             if source.startswith(("toolkit.limits", "toolkit.optimize", "toolkit.voids", "toolkit.pipeline"))
             or (source == "toolkit" and imported in ("limits", "optimize", "voids", "pipeline"))]
    assert not found, "\n".join(found)


def _edges() -> dict[str, set[str]]:
    edges = collections.defaultdict(set)
    for name, pairs in IMPORTS.items():
        for source, imported in pairs:
            if imported and f"{source}.{imported}" in MODULES:
                edges[name].add(f"{source}.{imported}")
            elif source in MODULES:
                edges[name].add(source)
    return edges


def import_loops(edges: dict[str, set[str]]) -> list[list[str]]:
    """The strongly connected groups of more than one module (Tarjan's algorithm, iterative)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    loops = []
    for start in sorted(set(edges) | {w for ws in edges.values() for w in ws}):
        if start in index:
            continue
        work = [(start, iter(sorted(edges.get(start, ()))))]
        index[start] = low[start] = len(index)
        stack.append(start)
        on_stack.add(start)
        while work:
            v, children = work[-1]
            w = next(children, None)
            if w is not None:
                if w not in index:
                    index[w] = low[w] = len(index)
                    stack.append(w)
                    on_stack.add(w)
                    work.append((w, iter(sorted(edges.get(w, ())))))
                elif w in on_stack:
                    low[v] = min(low[v], index[w])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[v])
            if low[v] == index[v]:
                group = []
                while True:
                    w = stack.pop()
                    on_stack.discard(w)
                    group.append(w)
                    if w == v:
                        break
                if len(group) > 1:
                    loops.append(sorted(group))
    return loops


def test_the_loop_finder_finds_a_planted_loop():
    assert import_loops({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert import_loops({"a": {"b"}, "b": set()}) == []


def test_no_import_loop_among_the_stages():
    loops = [group for group in import_loops(_edges()) if any(m.startswith(STAGES) for m in group)]
    assert not loops, loops
