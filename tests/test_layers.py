"""The package's layers, read from its imports: lower layers never import higher ones.

model < codegen < compute < scan < export < widgets, studies, cli (DESIGN.md). The compute
and scan layers reach the export layer only inside ``save`` and ``plot`` methods, imported
there on first use. Checked with the ``ast`` of every module (common practice for import rules).
"""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "phaselab"
LAYERS = {"model": 0, "models": 0, "errors": 0, "atomic": 0, "codegen": 1, "compute": 2, "scan": 3, "export": 4,
          "widgets": 5, "studies": 5, "cli": 5, "__init__": 5}
FORBIDDEN = {
    "model": {"numba", "bokeh", "ipywidgets", "jupyter_bokeh", "matplotlib", "xarray", "dask"},
    "codegen": {"bokeh", "ipywidgets", "jupyter_bokeh", "matplotlib"},
    "compute": {"bokeh", "ipywidgets", "jupyter_bokeh"},
    "scan": {"bokeh", "ipywidgets", "jupyter_bokeh"},
}
UPWARD_ALLOWED_IN = {"save", "plot"}


def _layer_of_module(path: Path) -> str:
    rel = path.relative_to(PACKAGE)
    return rel.parts[0] if len(rel.parts) > 1 else rel.stem


def _imports(tree):
    """(module name, enclosing function name or None) for every import in the tree."""
    out = []

    def visit(node, func):
        for child in ast.iter_child_nodes(node):
            name = child.name if isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef)) else func
            if isinstance(child, ast.Import):
                out.extend((a.name, func) for a in child.names)
            elif isinstance(child, ast.ImportFrom) and child.module and child.level == 0:
                out.append((child.module, func))
            visit(child, name)

    visit(tree, None)
    return out


MODULES = sorted(p for p in PACKAGE.rglob("*.py") if "loops" not in p.parts)


@pytest.mark.parametrize("path", MODULES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_imports_point_downwards(path):
    layer = _layer_of_module(path)
    level = LAYERS[layer]
    for module, func in _imports(ast.parse(path.read_text())):
        top = module.split(".")[0]
        assert top not in FORBIDDEN.get(layer, set()), f"{path.name} ({layer}) imports {module}"
        if top != "phaselab" or module == "phaselab":
            continue
        target = module.split(".")[1]
        if target == "errors":
            continue
        target_level = LAYERS[target]
        if target_level <= level:
            continue
        assert layer in ("compute", "scan") and target == "export" and func in UPWARD_ALLOWED_IN, (
            f"{path.relative_to(PACKAGE)} ({layer}) imports {module} (a higher layer) "
            + (f"inside {func}()" if func else "at module level"))


def test_every_module_has_a_layer():
    assert {_layer_of_module(p) for p in MODULES} <= set(LAYERS)
