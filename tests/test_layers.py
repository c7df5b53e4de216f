"""The package's layers, read from every import (module level and inside functions).

base < model < codegen < engine < orbits < structures, frequency < scan < export <
widgets, studies, cli (DESIGN.md, DEVELOPERS.md). Lower layers never import higher ones, with
one exception: a result's ``save``, ``plot`` or ``bokeh`` method may reach ``export`` by an import inside
that method (the way xarray's ``to_netcdf`` reaches its writers). No two modules import each
other, directly or around a longer loop, once those deferred edges are set aside; no module
imports another module's private (underscore) names. Checked with the ``ast`` of every module
(common practice for import rules).
"""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "phaselab"
LAYERS = {"errors": 0, "base": 0, "model": 1, "codegen": 2, "engine": 3, "orbits": 4,
          "structures": 5, "frequency": 5, "scan": 6, "export": 7,
          "widgets": 8, "studies": 8, "cli": 8, "__init__": 8}
FORBIDDEN = {
    "base": {"numba", "numpy", "sympy", "bokeh", "ipywidgets", "matplotlib", "xarray"},
    "model": {"numba", "bokeh", "ipywidgets", "jupyter_bokeh", "matplotlib", "xarray", "dask"},
    "codegen": {"bokeh", "ipywidgets", "jupyter_bokeh", "matplotlib"},
    "engine": {"bokeh", "ipywidgets", "jupyter_bokeh", "matplotlib"},
    "orbits": {"bokeh", "ipywidgets", "jupyter_bokeh"},
    "structures": {"bokeh", "ipywidgets", "jupyter_bokeh"},
    "frequency": {"bokeh", "ipywidgets", "jupyter_bokeh"},
    "scan": {"bokeh", "ipywidgets", "jupyter_bokeh"},
}
#: methods through which a result reaches the export layer
DEFERRED_IN = {"save", "plot", "bokeh"}

MODULES = sorted(p for p in PACKAGE.rglob("*.py") if "loops" not in p.parts)


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


NAMES = {_module_name(p) for p in MODULES}


def _layer(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "__init__"


def _resolve(module: str, name: str | None = None) -> str:
    """The phaselab module an import statement loads (a submodule when it names one)."""
    if name and f"{module}.{name}" in NAMES:
        return f"{module}.{name}"
    while module not in NAMES and "." in module:
        module = module.rsplit(".", 1)[0]
    return module


def _imports(tree):
    """(target module, imported names, enclosing function or None) for every import."""
    out = []

    def visit(node, func):
        for child in ast.iter_child_nodes(node):
            inner = child.name if isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef)) else func
            if isinstance(child, ast.Import):
                out.extend((a.name, [], func) for a in child.names)
            elif isinstance(child, ast.ImportFrom) and child.module and child.level == 0:
                out.append((child.module, [a.name for a in child.names], func))
            visit(child, inner)

    visit(tree, None)
    return out


def _edges():
    """{module: {imported phaselab module: deferred?}} over the whole package."""
    graph = {}
    for path in MODULES:
        here = _module_name(path)
        edges = graph.setdefault(here, {})
        for module, names, func in _imports(ast.parse(path.read_text())):
            if not module.startswith("phaselab.") and module != "phaselab":
                continue
            for target in {_resolve(module, n) for n in names} or {_resolve(module)}:
                if target != here:
                    deferred = func in DEFERRED_IN and _layer(target) == "export"
                    edges[target] = edges.get(target, True) and deferred
    return graph


@pytest.mark.parametrize("path", MODULES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_imports_point_downwards(path):
    here = _module_name(path)
    layer = _layer(here)
    level = LAYERS[layer]
    for module, names, func in _imports(ast.parse(path.read_text())):
        top = module.split(".")[0]
        assert top not in FORBIDDEN.get(layer, set()), f"{here} ({layer}) imports {module}"
        if top != "phaselab" or module == "phaselab":
            continue
        target = _layer(module)
        if LAYERS[target] <= level:
            continue
        assert target == "export" and func in DEFERRED_IN, (
            f"{here} ({layer}) imports {module} (a higher layer) "
            + (f"inside {func}()" if func else "at module level"))


@pytest.mark.parametrize("path", MODULES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_no_private_names_across_modules(path):
    here = _module_name(path)
    for module, names, _ in _imports(ast.parse(path.read_text())):
        if module.startswith("phaselab") and _resolve(module) != here:
            private = [n for n in names if n.startswith("_") and not n.endswith("__")]
            assert not private, f"{here} imports private {private} from {module}"


def test_no_import_cycles():
    graph = {m: {t for t, deferred in e.items() if not deferred} for m, e in _edges().items()}
    # Tarjan's strongly connected components (common practice for cycle detection)
    index, low, stack, on, cycles, counter = {}, {}, [], set(), [], [0]

    def strong(v):
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in graph.get(v, ()):
            if w not in index:
                strong(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                cycles.append(sorted(comp))

    for v in sorted(graph):
        if v not in index:
            strong(v)
    assert not cycles, f"import cycles: {cycles}"


def test_every_module_has_a_layer():
    assert {_layer(_module_name(p)) for p in MODULES} <= set(LAYERS)


def test_every_package_says_why_it_exists():
    for init in PACKAGE.rglob("__init__.py"):
        doc = ast.get_docstring(ast.parse(init.read_text()))
        assert doc and doc.strip(), f"{init.relative_to(PACKAGE)} has no opening docstring"


def test_no_module_over_500_lines():
    long = {str(p.relative_to(PACKAGE)): n for p in MODULES
            if (n := len(p.read_text().splitlines())) > 500}
    assert not long, f"modules over 500 lines: {long}"


def test_no_folder_holds_most_of_the_package():
    sizes = {}
    for p in MODULES:
        key = p.relative_to(PACKAGE).parts[0]
        sizes[key] = sizes.get(key, 0) + len(p.read_text().splitlines())
    total = sum(sizes.values())
    big = {k: round(v / total, 2) for k, v in sizes.items() if v > 0.3 * total}
    assert not big, f"folders over 30 % of the package: {big}"
