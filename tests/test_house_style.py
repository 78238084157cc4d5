"""House style checked with ast over benchsuite/: short functions, imports that point one way, no circle.

* No function over :data:`MAX_LINES` lines (``def`` to last line, docstring included) outside the
  numerical kernels of :data:`KERNELS`, each listed with what it is.
* Imports point down the layer order of DEVELOPERS.md (:data:`LAYERS`): a module may import its
  own layer or a lower one, never a higher one; the pure modules (:data:`PURE`) are importable from
  anywhere and import only each other.  Imports inside functions count too.
* No import circle between modules (imports inside functions included).
"""

from __future__ import annotations

import ast
from collections import defaultdict
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "benchsuite"
MAX_LINES = 50

#: ``path:function`` -> why it may be longer: numerical kernels, kept whole like PySCF's.
KERNELS = {
    "methods/ucc.py:minimise": "quasi-Newton optimisation of the exponential product (BFGS loop)",
    "methods/ucc.py:_polish": "Newton polish of the converged amplitudes",
    "qubit/sector.py:davidson": "Davidson eigensolver with restarts",
    "qubit/sector.py:operator": "sector matrix-vector product in packed Pauli form",
}

#: Layer of each top-level unit of benchsuite/, lowest first (DEVELOPERS.md, "The pipeline").
LAYERS = {
    "registry": 0, "chem": 1, "qubit": 2, "methods": 3, "runner": 4, "store": 5, "report": 6, "gate": 7,
    "api": 8, "pytest_session": 8, "pytest_plugin": 9, "commands": 10, "cli": 11,
}
#: Pure modules: no PySCF, no package state; importable from any layer.
PURE = {"constants", "errors", "scoring", "defaults", "benchsuite"}


def _modules() -> dict[str, Path]:
    out = {}
    for path in PACKAGE.rglob("*.py"):
        parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
        out[".".join(parts[:-1] if parts[-1] == "__init__" else parts)] = path
    return out


def _imports(path: Path):
    """``(module imported, line)`` for every benchsuite import in ``path`` (``from X import name``
    gives ``X.name`` as well as ``X``, so a submodule imported by name counts)."""
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("benchsuite"):
            yield node.module, node.lineno
            for alias in node.names:
                yield f"{node.module}.{alias.name}", node.lineno
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.startswith("benchsuite"):
                    yield alias.name, node.lineno


def _resolve(name: str, modules) -> str | None:
    while name and name not in modules:
        name = name.rpartition(".")[0]
    return name or None


def _unit(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else parts[0]


def _graph() -> dict[str, set[str]]:
    modules = _modules()
    graph = defaultdict(set)
    for module, path in modules.items():
        for name, _ in _imports(path):
            target = _resolve(name, modules)
            if target and target != module and not module.startswith(target + "."):
                graph[module].add(target)
    return graph


def test_no_function_over_the_limit_outside_numerical_kernels():
    long = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                lines = node.end_lineno - node.lineno + 1
                if lines > MAX_LINES:
                    long[f"{path.relative_to(PACKAGE).as_posix()}:{node.name}"] = lines
    assert set(long) - set(KERNELS) == set(), {k: v for k, v in long.items() if k not in KERNELS}
    assert set(KERNELS) <= set(long), f"no longer over the limit, drop from KERNELS: {set(KERNELS) - set(long)}"


def test_every_unit_has_a_layer():
    units = {_unit(m) for m in _modules()}
    assert units - set(LAYERS) - PURE == set()


def test_imports_point_down_the_layers():
    modules = _modules()
    upward = []
    for module, path in modules.items():
        here = _unit(module)
        for name, line in _imports(path):
            target = _resolve(name, modules)
            there = _unit(target) if target else None
            if there is None or there == here:
                continue
            if here in PURE and there not in PURE:
                upward.append(f"{path.relative_to(PACKAGE)}:{line} pure {here} imports {there}")
            elif there not in PURE and here not in PURE and LAYERS[there] > LAYERS[here]:
                upward.append(f"{path.relative_to(PACKAGE)}:{line} {here} imports {there}")
    assert upward == []


def test_no_import_circle():
    graph = _graph()
    index, low, stack, on_stack, circles = {}, {}, [], set(), []

    def visit(v):                      # Tarjan's strongly connected components
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph.get(v, ()):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = set()
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.add(w)
                if w == v:
                    break
            if len(component) > 1:
                circles.append(sorted(component))

    for v in list(_modules()):
        if v not in index:
            visit(v)
    assert circles == []


def test_the_checks_see_real_edges():
    """The checks look at real edges: the graph holds a known import, and the layer table orders the pipeline."""
    assert LAYERS["gate"] > LAYERS["report"] and LAYERS["qubit"] > LAYERS["chem"]
    graph = _graph()
    assert "benchsuite.store.records" in graph["benchsuite.gate.plan"]      # the graph sees real edges


def test_cli_stays_a_thin_layer():
    """cli.py parses, applies defaults and maps errors to exit codes; the commands live in commands/."""
    lines = (PACKAGE / "cli.py").read_text(encoding="utf-8").count("\n")
    assert lines < 250, lines
    heavy = {name for name, _ in _imports(PACKAGE / "cli.py")} & {
        "benchsuite.gate", "benchsuite.runner", "benchsuite.store", "benchsuite.chem", "benchsuite.methods"}
    assert heavy == set()
