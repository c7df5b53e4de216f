"""The text of the compiled loops: reading the loop files and assembling them into modules.

The loops (steppers, section crossings, tangent dynamics, ...) live as text in
``engine/loops/*.py``. Each file starts with two declarations::

    REQUIRES = ("steppers",)          # loop files whose functions this one calls
    PROVIDES = ("section_plane_orbits", ...)   # entry points called from Python

and, where entry points run over independent orbits, a third::

    ORBITS = {"section_plane_orbits": ("Z0", "out_points", ...)}   # arguments with one row per orbit

An entry point named in ``ORBITS`` runs its orbits one after the other; the arguments named
there all have one row per orbit, so :mod:`phaselab.engine.compiled` runs slices of the rows
on separate threads (numba's count). The modules hold no ``parallel=True`` code: numba's
parallel compilation costs more than half the first-call compile time of a loop.

A loop file may use, besides its own and its required files' functions, only the names that every
assembled module defines (:data:`MODULE_NAMES`): ``np``, ``math``, ``njit``, ``prange``, the
constants of :mod:`phaselab.engine.status`, and the kernel access functions
``hamiltonian(kern, z, prm)``, ``grad_q(kern, z, prm, out)``, ``grad_p``, ``vector_field``,
``jacobian``, ``hess_pp``, ``hess_qq``, ``map_step``, ``map_jacobian`` and ``nstate(z)``, and
the stepper functions ``advance`` and ``advance_tangent``. A test checks every file's free
names against this contract.

Stepper families: ``advance`` and ``advance_tangent`` come from one *family file*
(``loops/family_<family>.py``, :data:`FAMILIES`: compositions of leapfrogs, Gauss-Legendre,
classical Runge-Kutta), chosen when a module is assembled. Every module holds one family, so
a call compiles the steppers of its own method only; :func:`family_of_call` reads the family
from an entry point's ``kind`` argument (entry points without one use :data:`DEFAULT_FAMILY`).

The same text is assembled into two kinds of module (see :mod:`phaselab.engine.compiled` for
when each runs): the *generic* module of a set of loop files calls ``kern`` through a function
pointer; a system's *inlined* module holds the system's kernel functions and calls them
directly. The two differ only in the kernel access functions, written from one table
(:data:`ACCESS`).
"""

from __future__ import annotations

import ast
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

from phaselab.codegen import KERNELS
from phaselab.codegen.cache import codegen_fingerprint, load_module, source_hash
from phaselab.codegen.kernels import kernel_functions_source
from phaselab.engine import status as codes
from phaselab.errors import ParameterError

LOOPS_DIR = Path(__file__).parent / "loops"

ACCESS_NAMES = ("hamiltonian", "grad_q", "grad_p", "vector_field", "jacobian", "hess_pp", "hess_qq",
                "map_step", "map_jacobian", "nstate")
FAMILY_NAMES = ("advance", "advance_tangent")
"""What a stepper family file defines for the loops."""
MODULE_NAMES = frozenset({"np", "math", "njit", "prange", *codes.LOOP_CONSTANTS, *ACCESS_NAMES,
                          *FAMILY_NAMES, "FAMILY_KIND"})
"""Names every assembled loop module defines for the loop files. ``FAMILY_KIND`` is the
stepper kind of the module's family (``COMPOSITION``, ``GAUSS`` or ``RK4``): a constant when
the loops are compiled, so ``if FAMILY_KIND == COMPOSITION:`` drops the other branch before it
is typed and what only the other families call is never compiled."""

FAMILIES = {codes.COMPOSITION: "composition", codes.GAUSS: "gauss", codes.RK4: "rk4"}
"""Stepper kind -> the family file (``loops/family_<name>.py``) a module is assembled with."""
DEFAULT_FAMILY = "composition"
"""The family of modules whose entry points step with no method (maps, kernel evaluation)."""

HEADER = '''"""Loops assembled by phaselab.engine.compiled ({what}). Do not edit."""
import math
import numpy as np
import numba
from numba import prange


def njit(*args, **options):
    """numba's njit with IEEE division (error_model "numpy"): x / 0 gives inf or nan
    instead of raising, and the loops stop an orbit whose values are not finite."""
    return numba.njit(*args, error_model="numpy", **options)


{constants}
'''

_KERNEL_CALL = "kern({number}, z.ctypes, prm.ctypes, out.ctypes)"
_INLINED_CALL = "k_{name}(z, prm, out)"

ACCESS = (
    # name, arguments, body in the generic module, in a flow's inlined module, in a map's
    ("nstate", "z", "return z.shape[0]", "return NSTATE", "return NSTATE"),
    ("hamiltonian", "kern, z, prm", "return kern({number}, z.ctypes, prm.ctypes, z.ctypes)",
     "return k_hamiltonian(z, prm)", "return 0.0"),
    ("grad_q", "kern, z, prm, out", _KERNEL_CALL, _INLINED_CALL, "pass"),
    ("grad_p", "kern, z, prm, out", _KERNEL_CALL, _INLINED_CALL, "pass"),
    ("vector_field", "kern, z, prm, out", _KERNEL_CALL, _INLINED_CALL, "pass"),
    ("jacobian", "kern, z, prm, out", _KERNEL_CALL, _INLINED_CALL, "pass"),
    ("hess_pp", "kern, z, prm, out", _KERNEL_CALL, _INLINED_CALL, "pass"),
    ("hess_qq", "kern, z, prm, out", _KERNEL_CALL, _INLINED_CALL, "pass"),
    ("map_step", "kern, z, prm, out", _KERNEL_CALL, "pass", _INLINED_CALL),
    ("map_jacobian", "kern, z, prm, out", _KERNEL_CALL, "pass", _INLINED_CALL),
)
"""The kernel access functions of the assembled modules, one row each: the name, the
arguments, and the one line of the body, per form (``{number}`` is the kernel's number in
:data:`phaselab.codegen.KERNELS`, ``{name}`` the function's name)."""

ACCESS_FORMS = ("generic", "flow", "map")

_ACCESS_FUNCTION = '''
@njit(cache=True, nogil=True)
def {name}({arguments}):
    {body}
'''


def access_source(form: str) -> str:
    """The kernel access functions of one form: ``"generic"`` (through the function pointer
    ``kern``), ``"flow"`` or ``"map"`` (a system's inlined module; the functions its kind
    lacks do nothing)."""
    column = ACCESS_FORMS.index(form)
    functions = []
    for name, arguments, *bodies in ACCESS:
        body = bodies[column].format(name=name, number=KERNELS.get(name))
        functions.append(_ACCESS_FUNCTION.format(name=name, arguments=arguments, body=body))
    return "\n".join(functions)


# ----------------------------------------------------------------------------- loop files
@dataclass(frozen=True)
class LoopFile:
    """One loop file and its declarations.

    Attributes
    ----------
    name : str
        The file stem (``"sections"``).
    text : str
        The loop text without its declarations.
    requires : tuple of str
        Loop files whose functions it calls.
    provides : tuple of str
        Entry points called from Python.
    defines : tuple of str
        Every top-level function it defines.
    kind_at : tuple of (str, int)
        Pairs entry point, position of its ``kind`` argument among the arguments after ``kern``
        (entry points without one are absent).
    orbit_args : tuple of (str, tuple of int)
        Pairs entry point, positions (after ``kern``) of its arguments with one row per orbit
        (from ``ORBITS``; entry points whose orbits cannot be sliced are absent).
    """

    name: str
    text: str
    requires: tuple
    provides: tuple
    defines: tuple
    kind_at: tuple
    orbit_args: tuple


@lru_cache(maxsize=None)
def loop_file(name: str) -> LoopFile:
    """Read and check the declarations of ``engine/loops/<name>.py``."""
    path = LOOPS_DIR / f"{name}.py"
    if not path.is_file():
        raise ParameterError(f"no loop file named {name!r} in {LOOPS_DIR}")
    text = path.read_text()
    tree = ast.parse(text)
    declared, drop = {}, []
    for node in tree.body:
        if isinstance(node, ast.Assign) and len(node.targets) == 1 \
                and isinstance(node.targets[0], ast.Name) \
                and node.targets[0].id in ("REQUIRES", "PROVIDES", "ORBITS"):
            declared[node.targets[0].id] = ast.literal_eval(node.value)
            drop.append((node.lineno, node.end_lineno))
    if not {"REQUIRES", "PROVIDES"} <= set(declared):
        raise RuntimeError(f"loop file {path} must declare REQUIRES and PROVIDES")
    declared["REQUIRES"], declared["PROVIDES"] = tuple(declared["REQUIRES"]), tuple(declared["PROVIDES"])
    lines = text.split("\n")
    for first, last in sorted(drop, reverse=True):
        del lines[first - 1:last]
    defines = tuple(n.name for n in tree.body if isinstance(n, ast.FunctionDef))
    missing = set(declared["PROVIDES"]) - set(defines)
    if missing:
        raise RuntimeError(f"loop file {path} declares entry points it does not define: {sorted(missing)}")
    kind_at, orbit_args = [], []
    orbits = declared.get("ORBITS", {})
    for node in tree.body:
        if isinstance(node, ast.FunctionDef) and node.name in declared["PROVIDES"]:
            names = [a.arg for a in node.args.args][1:]      # after kern
            if "kind" in names:
                kind_at.append((node.name, names.index("kind")))
            if node.name in orbits:
                unknown = set(orbits[node.name]) - set(names)
                if unknown:
                    raise RuntimeError(f"loop file {path}: ORBITS names arguments {node.name} lacks: "
                                       f"{sorted(unknown)}")
                orbit_args.append((node.name, tuple(names.index(a) for a in orbits[node.name])))
    if set(orbits) - set(declared["PROVIDES"]):
        raise RuntimeError(f"loop file {path}: ORBITS names what it does not provide")
    return LoopFile(name, "\n".join(lines), declared["REQUIRES"], declared["PROVIDES"], defines,
                    tuple(kind_at), tuple(orbit_args))


def family_file(family: str) -> LoopFile:
    """The stepper family file ``loops/family_<family>.py`` (``family`` in :data:`FAMILIES`)."""
    if family not in FAMILIES.values():
        raise ParameterError(f"no stepper family {family!r}; known: {', '.join(FAMILIES.values())}")
    return loop_file(f"family_{family}")


def family_kind(family: str) -> int:
    """The stepper kind whose family file is ``family`` (the module constant ``FAMILY_KIND``)."""
    family_file(family)
    return next(kind for kind, name in FAMILIES.items() if name == family)


def family_of_call(files, entry: str, args) -> str:
    """The stepper family a call of ``entry`` with ``args`` (without the kernel) runs: read
    from its ``kind`` argument (a kind outside :data:`FAMILIES` steps as Runge-Kutta, as
    the steppers always did), :data:`DEFAULT_FAMILY` for an entry point without one."""
    return family_of_kind(kind_positions(files).get(entry), args)


def kind_positions(files) -> dict:
    """Entry point -> position of its ``kind`` argument (after ``kern``), for ``files``."""
    return {e: at for f in files for e, at in f.kind_at}


def family_of_kind(at, args) -> str:
    """The family named by ``args[at]`` (:data:`DEFAULT_FAMILY` when ``at`` is None)."""
    if at is None:
        return DEFAULT_FAMILY
    return FAMILIES.get(int(args[at]), FAMILIES[codes.RK4])


def closure(names) -> tuple[LoopFile, ...]:
    """The named loop files and everything they require, each once, required files first."""
    order: list[LoopFile] = []

    def visit(name, trail):
        if name in trail:
            raise RuntimeError(f"loop files require each other in a cycle: {' -> '.join(trail + (name,))}")
        if any(f.name == name for f in order):
            return
        lf = loop_file(name)
        for dep in lf.requires:
            visit(dep, trail + (name,))
        order.append(lf)

    for name in sorted(set(names)):
        visit(name, ())
    return tuple(order)


# ----------------------------------------------------------------------------- module text
def _constants(extra: dict | None = None) -> str:
    items = dict(codes.LOOP_CONSTANTS)
    items.update(extra or {})
    return "\n".join(f"{k} = {v!r}" for k, v in items.items())


def generic_source(files: tuple[LoopFile, ...], family: str = DEFAULT_FAMILY) -> str:
    """The text of the generic module of a set of loop files with one stepper family."""
    header = HEADER.format(what="generic: kernels called through a function pointer",
                           constants=_constants({"FAMILY_KIND": family_kind(family)}))
    texts = [f.text for f in files] + [family_file(family).text]
    return "\n".join([header, access_source("generic"), *texts]) + "\n"


def inlined_source(code, files: tuple[LoopFile, ...], family: str = DEFAULT_FAMILY) -> str:
    """The text of a system's inlined module: its kernels, then the loops and one stepper family."""
    header = HEADER.format(what=f"inlined kernels of system key {code.key}",
                           constants=_constants({"NSTATE": code.n_state, "FAMILY_KIND": family_kind(family)}))
    access = access_source("flow" if code.kind == "flow" else "map")
    texts = [f.text for f in files] + [family_file(family).text]
    return "\n".join([header, kernel_functions_source(code), access, *texts]) + "\n"


@lru_cache(maxsize=None)
def _fingerprint() -> str:
    return codegen_fingerprint()


def _set_name(files) -> str:
    return "-".join(f.name for f in files)


def generic_module_name(files, family: str = DEFAULT_FAMILY) -> str:
    """The cache name of the generic module of ``files`` and ``family`` (changes with its text)."""
    text = generic_source(files, family)
    return f"loops_{_set_name(files)}_{family}_{source_hash(text, _fingerprint())}"


def inlined_module_name(key: str, files, family: str = DEFAULT_FAMILY) -> str:
    """The cache name of the inlined module of the system ``key``, ``files`` and ``family``."""
    texts = [HEADER, *(f.text for f in files), family_file(family).text]
    return f"inlined_{key[:16]}_{_set_name(files)}_{family}_{source_hash(key, *texts, _fingerprint())}"


def generic_module(files, family: str = DEFAULT_FAMILY):
    """The imported generic module of a set of loop files with one stepper family."""
    name = generic_module_name(files, family)
    return load_module(name, lambda: generic_source(files, family))
