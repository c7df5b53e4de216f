"""The error contract of phaselab/errors.py: every failure raises a subclass, never the bare base.

The check reads every module's syntax tree (common practice for a contract check: a source
walk catches the sites no test happens to reach).
"""
import ast
from pathlib import Path

import pytest

import phaselab
from phaselab import errors

PACKAGE = Path(phaselab.__file__).parent


def bare_raises(source: str, filename: str = "<source>") -> list[int]:
    """Line numbers of ``raise PhaselabError(...)`` (or ``raise errors.PhaselabError``) in
    ``source``, the class called or raised as it is."""
    lines = []
    for node in ast.walk(ast.parse(source, filename)):
        if not isinstance(node, ast.Raise) or node.exc is None:
            continue
        target = node.exc.func if isinstance(node.exc, ast.Call) else node.exc
        name = target.id if isinstance(target, ast.Name) else getattr(target, "attr", None)
        if name == "PhaselabError":
            lines.append(node.lineno)
    return sorted(lines)


def test_the_check_finds_every_form_of_a_bare_raise():
    source = ("from phaselab import errors\n"
              "from phaselab.errors import PhaselabError, ParameterError\n"
              "def f(x):\n"
              "    if x:\n"
              "        raise PhaselabError('a')\n"
              "    raise errors.PhaselabError\n"
              "def g():\n"
              "    try:\n"
              "        pass\n"
              "    except PhaselabError:\n"
              "        raise ParameterError('b') from None\n")
    assert bare_raises(source) == [5, 6]


def test_no_module_raises_the_bare_base_class():
    modules = sorted(PACKAGE.rglob("*.py"))
    assert len(modules) > 100          # the walk really reads the package
    found = [f"{path.relative_to(PACKAGE.parent)}:{line}"
             for path in modules for line in bare_raises(path.read_text(), str(path))]
    assert not found, ("raise a subclass of PhaselabError (see phaselab/errors.py), not the base: "
                       + ", ".join(found))


@pytest.mark.parametrize("name", ["ParameterError", "ExpressionError", "ModelError", "IntegrationError",
                                  "StudyFileError", "DataFileError", "MissingExtraError"])
def test_every_error_class_derives_from_the_base_and_is_public(name):
    cls = getattr(errors, name)
    assert issubclass(cls, errors.PhaselabError)
    assert getattr(phaselab, name) is cls
    assert name in phaselab.__all__


def test_a_missing_extra_is_also_an_import_error():
    assert issubclass(errors.MissingExtraError, ImportError)
