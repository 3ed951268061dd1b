"""The import rules of toolkit/, read from the source with ast (nothing is imported). Rules of the project's own.

- No module takes another module's private name (``from .x import _name``, or ``x._name`` on a module it
  imported): a name with a leading underscore belongs to its own module.
- No import loop: following the imports, those made when a module loads and those inside functions alike, never
  leads back to where it started.
- No computing stage reads the job file (its settings are handed over as values), and fe/, the bottom of the
  numerical stack, imports nothing above it.

The checker is tested on small sources of its own, so that a rule it stopped seeing would show.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "toolkit"
# The modules these rules hold for: all of them.
SCOPE = ("toolkit",)
# The computing stages: they take values and return values; the job file is read once, at the edge.
STAGES = ("toolkit.fe", "toolkit.optimize", "toolkit.voids", "toolkit.rules", "toolkit.dxf_in", "toolkit.model",
          "toolkit.units", "toolkit.errors", "toolkit.limits", "toolkit.analysis", "toolkit.edge_stress",
          "toolkit.moving", "toolkit.arcs")


def module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def sources(package: Path = PACKAGE) -> dict[str, str]:
    return {module_name(p): p.read_text(encoding="utf-8") for p in sorted(package.rglob("*.py"))}


def _resolve(module: str, is_package: bool, level: int, target: str | None) -> str:
    """The absolute name of a relative import made in ``module``."""
    if level == 0:
        return target or ""
    base = module.split(".")
    if not is_package:
        base = base[:-1]
    base = base[: len(base) - (level - 1)]
    return ".".join(base + ([target] if target else []))


def imports(module: str, text: str, known: set[str], is_package: bool):
    """(imported module, private names taken from it, at load time?) for every import statement of a module;
    ``x._name`` attribute uses on an imported module count as taking ``_name`` from it."""
    tree = ast.parse(text)
    top = set(map(id, tree.body))
    aliases: dict[str, str] = {}
    found = []
    for node in ast.walk(tree):
        at_load = id(node) in top
        if isinstance(node, ast.Import):
            for a in node.names:
                found.append((a.name, [], at_load))
                if a.asname:
                    aliases[a.asname] = a.name
        elif isinstance(node, ast.ImportFrom):
            source = _resolve(module, is_package, node.level, node.module)
            taken = []
            for a in node.names:
                sub = f"{source}.{a.name}"
                if sub in known:  # a submodule imported by name: a module of its own
                    found.append((sub, [a.name] if _private(a.name) else [], at_load))
                    aliases[a.asname or a.name] = sub
                elif _private(a.name):
                    taken.append(a.name)
            found.append((source, taken, at_load))
    for node in ast.walk(tree):
        if isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name) and node.value.id in aliases \
                and _private(node.attr):
            found.append((aliases[node.value.id], [node.attr], False))
    return found


def _private(name: str) -> bool:
    return name.startswith("_") and not (name.startswith("__") and name.endswith("__"))


def _in_scope(name: str, scope=SCOPE) -> bool:
    return any(name == s or name.startswith(s + ".") for s in scope)


def private_uses(texts: dict[str, str], packages: set[str], scope=SCOPE) -> list[str]:
    """"importer: source._name" for every private name taken across modules where either side is in scope."""
    known = set(texts)
    out = []
    for module, text in texts.items():
        for source, taken, _ in imports(module, text, known, module in packages):
            if source == module or not (_in_scope(module, scope) or _in_scope(source, scope)):
                continue
            out += [f"{module}: {source}.{name}" for name in taken]
    return sorted(set(out))


def load_loops(texts: dict[str, str], packages: set[str], scope=SCOPE, *, lazy: bool = False) -> list[set[str]]:
    """The import cycles at load time among the modules of ``texts`` that hold a module in scope: each a strongly
    connected set of the graph of load-time imports (with ``lazy``, of every import, those inside functions too).
    A module's import of its own package (``from . import x`` loads the package first, already loading) is the
    loading order, not an edge."""
    known = set(texts)
    graph: dict[str, set[str]] = {}
    for module, text in texts.items():
        graph[module] = {source for source, _, at_load in imports(module, text, known, module in packages)
                         if (at_load or lazy) and source in known and source != module
                         and not module.startswith(source + ".")}
    # Tarjan's strongly connected components (Tarjan 1972, "Depth-first search and linear graph algorithms").
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    loops: list[set[str]] = []

    def visit(node: str) -> None:
        index[node] = low[node] = len(index)
        stack.append(node)
        on_stack.add(node)
        for nxt in sorted(graph[node]):
            if nxt not in index:
                visit(nxt)
                low[node] = min(low[node], low[nxt])
            elif nxt in on_stack:
                low[node] = min(low[node], index[nxt])
        if low[node] == index[node]:
            part = set()
            while True:
                top = stack.pop()
                on_stack.discard(top)
                part.add(top)
                if top == node:
                    break
            if len(part) > 1 and any(_in_scope(m, scope) for m in part):
                loops.append(part)

    for start in sorted(graph):
        if start not in index:
            visit(start)
    return loops


def packages_of(texts: dict[str, str]) -> set[str]:
    return {name for name in texts if (PACKAGE.parent / name.replace(".", "/") / "__init__.py").is_file()}


def test_no_module_takes_a_private_name_of_another():
    texts = sources()
    assert {"toolkit.write.sheet", "toolkit.voids.layout", "toolkit.fe.solve"} <= set(texts), "the walk sees them"
    assert private_uses(texts, packages_of(texts)) == []


def test_no_import_loop_even_through_imports_inside_functions():
    # (batch once borrowed the command line's paragraph rule, and the package's caution text was read back from
    # the package by the writers the package's own helper loads: both loops, both gone.)
    texts = sources()
    assert load_loops(texts, packages_of(texts), lazy=True) == []


def _taken_by(prefixes, texts):
    """(importer, imported module) for every import, lazy ones too, made by modules under ``prefixes``."""
    known, packages = set(texts), packages_of(texts)
    return [(m, source) for m, text in texts.items() if _in_scope(m, prefixes)
            for source, _, _ in imports(m, text, known, m in packages)]


def test_no_stage_reads_the_job_file():
    found = [pair for pair in _taken_by(STAGES, sources()) if pair[1] == "toolkit.jobfile"]
    assert found == []


def test_fe_imports_nothing_above_it():
    # The grid's memory check lives in limits, which imports the grid, never the other way (a loop before).
    above = ("toolkit.limits", "toolkit.optimize", "toolkit.voids", "toolkit.pipeline", "toolkit.write")
    found = [pair for pair in _taken_by(("toolkit.fe",), sources()) if _in_scope(pair[1], above)]
    assert found == []


# --- the checker on sources of its own


FAKE = {
    "toolkit.write": "",
    "toolkit.write.a": "from .b import shown, _hidden\n",
    "toolkit.write.b": "from . import c\n\ndef f():\n    return c._inner()\n",
    "toolkit.write.c": "import toolkit.write.a\n",
    "toolkit.other": "from .write.b import f\n",
}


def test_the_checker_sees_a_private_name_taken_by_from_import_and_by_attribute():
    found = private_uses(FAKE, {"toolkit.write"})
    assert found == ["toolkit.write.a: toolkit.write.b._hidden", "toolkit.write.b: toolkit.write.c._inner"]


def test_the_checker_sees_a_loop_at_load_time_and_not_one_inside_a_function():
    assert load_loops(FAKE, {"toolkit.write"}) == [{"toolkit.write.a", "toolkit.write.b", "toolkit.write.c"}]
    lazy = dict(FAKE, **{"toolkit.write.c": "def g():\n    import toolkit.write.a\n"})
    assert load_loops(lazy, {"toolkit.write"}) == []
    assert load_loops(lazy, {"toolkit.write"}, lazy=True) == [{"toolkit.write.a", "toolkit.write.b",
                                                               "toolkit.write.c"}]


def test_the_checker_sees_a_stage_reading_the_job_file():
    texts = dict(FAKE, **{"toolkit.jobfile": "", "toolkit.voids": "", "toolkit.voids.x": "def f():\n"
                          "    from ..jobfile import Job\n"})
    assert ("toolkit.voids.x", "toolkit.jobfile") in _taken_by(STAGES, texts)


@pytest.mark.parametrize("text", ["from .write.b import _hidden\n", "from .write import b\nb._hidden()\n"])
def test_the_checker_holds_modules_outside_to_the_rule_too(text):
    found = private_uses(dict(FAKE, **{"toolkit.other": text}), {"toolkit.write"})
    assert "toolkit.other: toolkit.write.b._hidden" in found
