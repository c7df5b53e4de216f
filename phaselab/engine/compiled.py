"""The compiled loops: reading the loop files, assembling them into modules, calling them.

The loops (steppers, section crossings, tangent dynamics, ...) live as text in
``engine/loops/*.py``. Each file starts with two declarations::

    REQUIRES = ("steppers",)          # loop files whose functions this one calls
    PROVIDES = ("section_plane_orbits", ...)   # entry points called from Python

and may use, besides its own and its required files' functions, only the names that every
assembled module defines (:data:`MODULE_NAMES`): ``np``, ``math``, ``njit``, ``prange``, the
constants of :mod:`phaselab.engine.status`, and the kernel access functions
``hamiltonian(kern, z, prm)``, ``grad_q(kern, z, prm, out)``, ``grad_p``, ``vector_field``,
``jacobian``, ``hess_pp``, ``hess_qq``, ``map_step``, ``map_jacobian`` and ``nstate(z)``. A test checks every file's
free names against this contract.

The same text is assembled into two kinds of module:

generic
    One per set of loop files, the same for every system: ``kern`` is a function pointer
    to the system's compiled kernel (:func:`phaselab.codegen.compile_kernel`). Compiled once
    per machine and cached, so a new system costs only its small kernel.
inlined
    One per system and set of loop files: the system's kernels are compiled into the loops
    (``kern`` is an unused 0), which is faster for small kernels. It is built in a separate,
    low-priority process (:mod:`phaselab.engine.inlined_build`) while the generic module
    answers, and used from the moment it is ready. Both forms do the same floating-point
    operations in the same order, so their results agree to the last bit.

``PHASELAB_LOOPS`` chooses: ``auto`` (default, as above), ``generic`` (never build inlined
modules), ``inlined`` (build them in this process before the first call, for benchmarks).
"""

from __future__ import annotations

import ast
import json
import os
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

from phaselab.codegen import KERNELS, compile_kernel
from phaselab.codegen.cache import cache_dir, codegen_fingerprint, load_module, reload_module, source_hash
from phaselab.codegen.kernels import ensure_code, kernel_functions_source
from phaselab.codegen.progress import compiling
from phaselab.engine import status as codes
from phaselab.errors import ParameterError

LOOPS_DIR = Path(__file__).parent / "loops"

ACCESS_NAMES = ("hamiltonian", "grad_q", "grad_p", "vector_field", "jacobian", "hess_pp", "hess_qq",
                "map_step", "map_jacobian", "nstate")
MODULE_NAMES = frozenset({"np", "math", "njit", "prange", *codes.LOOP_CONSTANTS, *ACCESS_NAMES})
"""Names every assembled loop module defines for the loop files."""

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
    """

    name: str
    text: str
    requires: tuple
    provides: tuple
    defines: tuple


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
                and isinstance(node.targets[0], ast.Name) and node.targets[0].id in ("REQUIRES", "PROVIDES"):
            declared[node.targets[0].id] = tuple(ast.literal_eval(node.value))
            drop.append((node.lineno, node.end_lineno))
    if set(declared) != {"REQUIRES", "PROVIDES"}:
        raise RuntimeError(f"loop file {path} must declare REQUIRES and PROVIDES")
    lines = text.split("\n")
    for first, last in sorted(drop, reverse=True):
        del lines[first - 1:last]
    defines = tuple(n.name for n in tree.body if isinstance(n, ast.FunctionDef))
    missing = set(declared["PROVIDES"]) - set(defines)
    if missing:
        raise RuntimeError(f"loop file {path} declares entry points it does not define: {sorted(missing)}")
    return LoopFile(name, "\n".join(lines), declared["REQUIRES"], declared["PROVIDES"], defines)


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


def _constants(extra: dict | None = None) -> str:
    items = dict(codes.LOOP_CONSTANTS)
    items.update(extra or {})
    return "\n".join(f"{k} = {v!r}" for k, v in items.items())


def generic_source(files: tuple[LoopFile, ...]) -> str:
    """The text of the generic module of a set of loop files."""
    header = HEADER.format(what="generic: kernels called through a function pointer",
                           constants=_constants())
    access = GENERIC_ACCESS.format(**KERNELS)
    return "\n".join([header, access, *(f.text for f in files)]) + "\n"


def inlined_source(code, files: tuple[LoopFile, ...]) -> str:
    """The text of a system's inlined module: its kernels, then the loops."""
    header = HEADER.format(what=f"inlined kernels of system key {code.key}",
                           constants=_constants({"NSTATE": code.n_state}))
    access = INLINED_FLOW_ACCESS if code.kind == "flow" else INLINED_MAP_ACCESS
    return "\n".join([header, kernel_functions_source(code), access, *(f.text for f in files)]) + "\n"


@lru_cache(maxsize=None)
def _fingerprint() -> str:
    return codegen_fingerprint()


def _set_name(files) -> str:
    return "-".join(f.name for f in files)


def generic_module_name(files) -> str:
    return f"loops_{_set_name(files)}_{source_hash(generic_source(files), _fingerprint())}"


def inlined_module_name(key: str, files) -> str:
    texts = [HEADER, *(f.text for f in files)]
    return f"inlined_{key[:16]}_{_set_name(files)}_{source_hash(key, *texts, _fingerprint())}"


def generic_module(files):
    """The imported generic module of a set of loop files."""
    name = generic_module_name(files)
    return load_module(name, lambda: generic_source(files))


# ----------------------------------------------------------------------------- loop form chosen
LOOP_FORM_CHOICES = ("auto", "generic", "inlined")


def loop_form_choice() -> str:
    """Which form of the loops runs, from ``PHASELAB_LOOPS`` (default ``auto``): ``generic``,
    ``inlined``, or ``auto`` (the inlined module where it is built for the call, else generic)."""
    value = os.environ.get("PHASELAB_LOOPS", "auto").strip().lower() or "auto"
    if value not in LOOP_FORM_CHOICES:
        raise ParameterError(f"PHASELAB_LOOPS must be one of {', '.join(LOOP_FORM_CHOICES)}, got {value!r}")
    return value


def _ready_path(name: str) -> Path:
    return cache_dir() / f"{name}.ready.json"


_ready_seen: dict = {}


def ready_signatures(name: str) -> dict:
    """Entry point -> list of signature texts compiled for the inlined module ``name`` (read
    from the marker file the background build writes; re-read only when it changes)."""
    path = _ready_path(name)
    try:
        stamp = path.stat().st_mtime_ns
    except OSError:
        return {}
    seen = _ready_seen.get(name)
    if seen is not None and seen[0] == stamp:
        return seen[1]
    try:
        data = json.loads(path.read_text())
    except (OSError, ValueError):
        data = {}
    _ready_seen[name] = (stamp, data)
    return data


_signatures: dict = {}


def _type_key(a):
    if isinstance(a, np.ndarray):
        return ("a", a.dtype.str, a.ndim, a.flags.c_contiguous, a.flags.writeable)
    if isinstance(a, (bool, np.bool_)):
        return "b"
    if isinstance(a, (int, np.integer)):
        return "i"
    if isinstance(a, (float, np.floating)):
        return "f"
    return ("o", type(a))


def _signature(args) -> tuple:
    """The numba types of ``args`` (looked up once per combination of cheap type keys: numba's
    own typing costs most of a millisecond per call)."""
    key = tuple(_type_key(a) for a in args)
    sig = _signatures.get(key)
    if sig is None:
        import numba

        sig = tuple(numba.typeof(a) for a in args)
        _signatures[key] = sig
    return sig


def _rows(args) -> int:
    """Rows (orbits) of the first array argument of two or more dimensions."""
    for a in args:
        if isinstance(a, np.ndarray) and a.ndim >= 2:
            return a.shape[0]
    return 0


class LoopSet:
    """The loops of a set of loop files, bound to one system's kernel.

    Call an entry point as a method without the kernel argument:
    ``loops(H, "sections").section_plane_orbits(Z0, bounds, prm, ...)``. The generic module
    answers until the system's inlined module is ready (see the module docstring).

    Attributes
    ----------
    kernel : CompiledKernel
    files : tuple of LoopFile
    """

    def __init__(self, system, files: tuple[LoopFile, ...], serial: bool = False):
        self.system = system
        self._serial = serial
        self.files = files
        self.kernel = compile_kernel(system)
        self._generic = None
        self._inlined = None
        self._inlined_name = inlined_module_name(self.kernel.key, files)
        self._requested: set = set()
        self._checked: set = set()
        self.entries = tuple(e for f in files for e in f.provides)

    # ------------------------------------------------------------------ modules
    def generic(self):
        if self._generic is None:
            self._generic = generic_module(self.files)
        return self._generic

    def _make_inlined_source(self):
        return inlined_source(ensure_code(self.kernel, self.system), self.files)

    def inlined(self):
        """The system's inlined module (generated now if needed; compiled lazily by numba)."""
        if self._inlined is None:
            self._inlined = load_module(self._inlined_name, self._make_inlined_source)
        return self._inlined

    @property
    def serial(self) -> "LoopSet":
        """The same loops run on the calling thread only (for small batches of cheap orbits,
        where starting threads costs more than it gains)."""
        twin = self.__dict__.get("_twin")
        if twin is None:
            twin = LoopSet.__new__(LoopSet)
            twin.__dict__.update(self.__dict__)
            twin._serial = True
            self.__dict__["_twin"] = twin
        return twin

    # ------------------------------------------------------------------ calls
    def __getattr__(self, name):
        if name.startswith("_") or name not in self.__dict__.get("entries", ()):
            raise AttributeError(name)

        def call(*args):
            return self.run(name, *args)

        call.__name__ = name
        return call

    def run(self, entry: str, *args):
        """Call the entry point ``entry`` with ``args`` (without the kernel)."""
        policy = loop_form_choice()
        inlined = policy == "inlined"
        if policy == "auto":
            sig = str(_signature((0, *args)))
            inlined = sig in ready_signatures(self._inlined_name).get(entry, ())
            if not inlined and (entry, sig) not in self._requested:
                self._requested.add((entry, sig))
                from phaselab.engine.inlined_build import request_build

                request_build(self.system, tuple(f.name for f in self.files), self._inlined_name, entry,
                              _signature((0, *args)))
        full = (0, *args) if inlined else (self.kernel.kernel, *args)
        disp = self._prepare(entry, "inlined" if inlined else "generic", full)
        if self._serial or _rows(args) <= 1:
            # one orbit gains nothing from threads, and waking them costs milliseconds on a
            # busy machine
            import numba

            before = numba.get_num_threads()
            numba.set_num_threads(1)
            try:
                return disp(*full)
            finally:
                numba.set_num_threads(before)
        return disp(*full)

    def _prepare(self, entry, form, full):
        """The dispatcher of ``entry``, compiled (or loaded from numba's cache) for the types of
        ``full``. Damaged machine code in the cache is repaired once: the module is
        generated and compiled anew."""
        module = self.inlined() if form == "inlined" else self.generic()
        disp = getattr(module, entry)
        sig = _signature(full)
        mark = (entry, form, str(sig))
        if mark in self._checked:
            return disp
        what = f"the loop {entry} " + ("for this system" if form == "inlined" else "that all systems share")
        try:
            with compiling(what):
                disp.compile(sig)
        except Exception:
            if form == "generic":
                self._generic = reload_module(generic_module_name(self.files),
                                              lambda: generic_source(self.files))
                disp = getattr(self._generic, entry)
            else:
                self._inlined = reload_module(self._inlined_name, self._make_inlined_source)
                disp = getattr(self._inlined, entry)
            with compiling(what):
                disp.compile(sig)
        self._checked.add(mark)
        return disp

    def evaluate(self, name: str, Z, prm) -> np.ndarray:
        """Evaluate the kernel ``name`` at every row of ``Z`` (shape ``(n_points, 2n)``).

        Returns
        -------
        ndarray
            Shape ``(n_points,)`` for ``"hamiltonian"``, ``(n_points, n)`` for the gradients,
            ``(n_points, 2n)`` for the vector field and the map step, ``(n_points, 2n, 2n)``
            for Jacobians.
        """
        Z = np.ascontiguousarray(np.atleast_2d(Z), dtype=np.float64)
        prm = np.ascontiguousarray(prm, dtype=np.float64)
        n_pts, m = Z.shape
        width = {"hamiltonian": 1, "grad_q": m // 2, "grad_p": m // 2, "vector_field": m,
                 "map_step": m, "jacobian": m * m, "map_jacobian": m * m}[name]
        out = np.full((n_pts, width), np.nan)
        steppers = _steppers_only(self.files)
        kern = self.kernel.kernel
        if steppers is not self.files:
            module = generic_module(steppers)
        else:
            module = self.generic()
        module.evaluate_points(kern, KERNELS[name], Z, prm, out)
        if name == "hamiltonian":
            return out[:, 0]
        if name.endswith("jacobian"):
            return out.reshape(n_pts, m, m)
        return out


def _steppers_only(files):
    return files if tuple(f.name for f in files) == ("steppers",) else closure(["steppers"])


_sets: dict = {}


def loops(system, *names: str) -> LoopSet:
    """The loops of the named loop files (and those they require) bound to ``system``.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
        An autonomous flow (lift a time-dependent one with ``.extended()``) or a map.
    *names : str
        Loop files of ``engine/loops`` (``"sections"``, ``"tangent"``, ...); ``"steppers"``
        is always included.

    Returns
    -------
    LoopSet
        Memoised per system and set of files in this process.
    """
    files = closure(("steppers",) + names)
    key = (system.key, tuple(f.name for f in files))
    if key not in _sets:
        _sets[key] = LoopSet(system, files)
    return _sets[key]
