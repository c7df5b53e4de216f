"""The text of the assembled loop modules: the kernel access functions written from one table
are the text the modules were written with before (so every cached module keeps its name and
every result its bits), and the loop-source module stands on its own (no import cycle with
the background build)."""

import ast
from pathlib import Path

import pytest

from phaselab.codegen import KERNELS
from phaselab.engine import loop_source
from phaselab.errors import ParameterError

# The kernel access functions as they were written out by hand, one template per form, before
# they were generated from engine/loop_source.ACCESS (the reference the table must reproduce).
GENERIC_ACCESS = '''
@njit(cache=True, nogil=True)
def nstate(z):
    return z.shape[0]


@njit(cache=True, nogil=True)
def hamiltonian(kern, z, prm):
    return kern({hamiltonian}, z.ctypes, prm.ctypes, z.ctypes)


@njit(cache=True, nogil=True)
def grad_q(kern, z, prm, out):
    kern({grad_q}, z.ctypes, prm.ctypes, out.ctypes)


@njit(cache=True, nogil=True)
def grad_p(kern, z, prm, out):
    kern({grad_p}, z.ctypes, prm.ctypes, out.ctypes)


@njit(cache=True, nogil=True)
def vector_field(kern, z, prm, out):
    kern({vector_field}, z.ctypes, prm.ctypes, out.ctypes)


@njit(cache=True, nogil=True)
def jacobian(kern, z, prm, out):
    kern({jacobian}, z.ctypes, prm.ctypes, out.ctypes)


@njit(cache=True, nogil=True)
def hess_pp(kern, z, prm, out):
    kern({hess_pp}, z.ctypes, prm.ctypes, out.ctypes)


@njit(cache=True, nogil=True)
def hess_qq(kern, z, prm, out):
    kern({hess_qq}, z.ctypes, prm.ctypes, out.ctypes)


@njit(cache=True, nogil=True)
def map_step(kern, z, prm, out):
    kern({map_step}, z.ctypes, prm.ctypes, out.ctypes)


@njit(cache=True, nogil=True)
def map_jacobian(kern, z, prm, out):
    kern({map_jacobian}, z.ctypes, prm.ctypes, out.ctypes)
'''

INLINED_FLOW_ACCESS = '''
@njit(cache=True, nogil=True)
def nstate(z):
    return NSTATE


@njit(cache=True, nogil=True)
def hamiltonian(kern, z, prm):
    return k_hamiltonian(z, prm)


@njit(cache=True, nogil=True)
def grad_q(kern, z, prm, out):
    k_grad_q(z, prm, out)


@njit(cache=True, nogil=True)
def grad_p(kern, z, prm, out):
    k_grad_p(z, prm, out)


@njit(cache=True, nogil=True)
def vector_field(kern, z, prm, out):
    k_vector_field(z, prm, out)


@njit(cache=True, nogil=True)
def jacobian(kern, z, prm, out):
    k_jacobian(z, prm, out)


@njit(cache=True, nogil=True)
def hess_pp(kern, z, prm, out):
    k_hess_pp(z, prm, out)


@njit(cache=True, nogil=True)
def hess_qq(kern, z, prm, out):
    k_hess_qq(z, prm, out)


@njit(cache=True, nogil=True)
def map_step(kern, z, prm, out):
    pass


@njit(cache=True, nogil=True)
def map_jacobian(kern, z, prm, out):
    pass
'''

INLINED_MAP_ACCESS = '''
@njit(cache=True, nogil=True)
def nstate(z):
    return NSTATE


@njit(cache=True, nogil=True)
def hamiltonian(kern, z, prm):
    return 0.0


@njit(cache=True, nogil=True)
def grad_q(kern, z, prm, out):
    pass


@njit(cache=True, nogil=True)
def grad_p(kern, z, prm, out):
    pass


@njit(cache=True, nogil=True)
def vector_field(kern, z, prm, out):
    pass


@njit(cache=True, nogil=True)
def jacobian(kern, z, prm, out):
    pass


@njit(cache=True, nogil=True)
def hess_pp(kern, z, prm, out):
    pass


@njit(cache=True, nogil=True)
def hess_qq(kern, z, prm, out):
    pass


@njit(cache=True, nogil=True)
def map_step(kern, z, prm, out):
    k_map_step(z, prm, out)


@njit(cache=True, nogil=True)
def map_jacobian(kern, z, prm, out):
    k_map_jacobian(z, prm, out)
'''


@pytest.mark.parametrize("form, written", [("generic", GENERIC_ACCESS.format(**KERNELS)),
                                           ("flow", INLINED_FLOW_ACCESS),
                                           ("map", INLINED_MAP_ACCESS)])
def test_access_functions_from_one_table_equal_the_written_text(form, written):
    assert loop_source.access_source(form) == written


def test_access_table_covers_every_access_name():
    assert tuple(row[0] for row in loop_source.ACCESS) == (
        "nstate", *[n for n in loop_source.ACCESS_NAMES if n != "nstate"])
    assert {row[0] for row in loop_source.ACCESS} == set(loop_source.ACCESS_NAMES)


def test_generic_module_text_is_the_header_the_access_and_the_loops():
    files = loop_source.closure(["sections"])
    text = loop_source.generic_source(files)
    assert GENERIC_ACCESS.format(**KERNELS) in text
    for lf in files:
        assert lf.text in text
    compile(text, "<generic>", "exec")


def test_loop_source_and_background_build_do_not_import_the_call_side():
    """The cycle compiled <-> inlined_build is gone: neither the loop text nor the background
    build imports engine/compiled.py (read from their ast)."""
    folder = Path(loop_source.__file__).parent
    for name in ("loop_source.py", "inlined_build.py"):
        tree = ast.parse((folder / name).read_text())
        modules = {n.module for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)}
        assert "phaselab.engine.compiled" not in modules, name


def test_a_module_holds_one_stepper_family():
    """A loop module compiles the steppers of one method family only: its text holds that
    family's file and defines ``advance`` once."""
    files = loop_source.closure(["sections", "tangent"])
    for family in loop_source.FAMILIES.values():
        text = loop_source.generic_source(files, family)
        assert loop_source.family_file(family).text in text
        assert text.count("\ndef advance(") == 1 and text.count("\ndef advance_tangent(") == 1
        for other in set(loop_source.FAMILIES.values()) - {family}:
            assert loop_source.family_file(other).text not in text
    names = {loop_source.generic_module_name(files, f) for f in loop_source.FAMILIES.values()}
    assert len(names) == len(loop_source.FAMILIES)


def test_the_family_of_a_call_is_read_from_its_kind_argument():
    files = loop_source.closure(["sections"])
    at = dict(loop_source.loop_file("sections").kind_at)["section_plane_orbits"]
    args = [None] * 30
    for kind, family in loop_source.FAMILIES.items():
        args[at] = kind
        assert loop_source.family_of_call(files, "section_plane_orbits", args) == family
    assert loop_source.family_of_call(files, "section_map_orbits", args) == loop_source.DEFAULT_FAMILY
    with pytest.raises(ParameterError, match="stepper family"):
        loop_source.family_file("euler")
