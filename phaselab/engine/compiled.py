"""The compiled loops, called: :func:`loops` (system, loop files) -> :class:`LoopSet`.

The loop files and the text of the modules assembled from them are
:mod:`phaselab.engine.loop_source`; this module chooses which form runs a call and compiles
it. The same text is assembled into two kinds of module:

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

import os

import numpy as np

from phaselab.base.locks import file_lock
from phaselab.codegen import compile_kernel
from phaselab.codegen.cache import cache_dir, load_module, reload_module
from phaselab.codegen.kernels import ensure_code
from phaselab.codegen.progress import compiler_passes, compiling
from phaselab.engine import background_warm
from phaselab.engine.inlined_build import ready_signatures, request_build
from phaselab.engine.orbit_threads import run_sliced
from phaselab.engine.loop_source import (DEFAULT_FAMILY, LOOPS_DIR, MODULE_NAMES,  # noqa: F401 (re-exported)
                                         LoopFile, closure, family_of_kind, generic_module,
                                         generic_module_name, generic_source, inlined_module_name,
                                         inlined_source, kind_positions, loop_file)
from phaselab.errors import ParameterError

# ----------------------------------------------------------------------------- loop form chosen
LOOP_FORM_CHOICES = ("auto", "generic", "inlined")


def loop_form_choice() -> str:
    """Which form of the loops runs, from ``PHASELAB_LOOPS`` (default ``auto``): ``generic``,
    ``inlined``, or ``auto`` (the inlined module where it is built for the call, else generic)."""
    value = os.environ.get("PHASELAB_LOOPS", "auto").strip().lower() or "auto"
    if value not in LOOP_FORM_CHOICES:
        raise ParameterError(f"PHASELAB_LOOPS must be one of {', '.join(LOOP_FORM_CHOICES)}, got {value!r}")
    return value


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


def describe_loop(entry: str, form: str, family) -> str:
    """Words for compile news about the loop ``entry`` of a module: its form and the stepper
    family it runs (None for a loop that steps with no method)."""
    method = "" if family is None else f" ({FAMILY_WORDS[family]})"
    whose = "for this system" if form == "inlined" else "that all systems share"
    return f"the loop {entry}{method} {whose}"


FAMILY_WORDS = {"composition": "explicit symplectic steps", "gauss": "implicit Gauss-Legendre steps",
                "rk4": "Runge-Kutta steps"}
"""How compile news names a stepper family."""


class LoopSet:
    """The loops of a set of loop files, bound to one system's kernel.

    Call an entry point as a method without the kernel argument:
    ``loops(H, "sections").section_plane_orbits(Z0, prm, ...)``; an entry point over
    independent orbits (``ORBITS`` of its loop file) runs slices of them on numba's count of
    threads (:mod:`phaselab.engine.orbit_threads`). The generic module
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
        self._names: dict = {}          # stepper family -> name of the inlined module
        self._generic: dict = {}        # stepper family -> generic module
        self._inlined: dict = {}        # stepper family -> the system's inlined module
        self._requested: set = set()
        self._checked: set = set()
        self.entries = tuple(e for f in files for e in f.provides)
        self._orbit_args = {e: at for f in files for e, at in f.orbit_args}
        self._kind_at = kind_positions(files)

    # ------------------------------------------------------------------ modules
    def generic(self, family: str = DEFAULT_FAMILY):
        """The generic module of these loop files with the stepper ``family``."""
        if family not in self._generic:
            self._generic[family] = generic_module(self.files, family)
        return self._generic[family]

    def inlined_name(self, family: str = DEFAULT_FAMILY) -> str:
        """The cache name of the system's inlined module with the stepper ``family``."""
        name = self._names.get(family)
        if name is None:
            name = self._names[family] = inlined_module_name(self.kernel.key, self.files, family)
        return name

    def _make_inlined_source(self, family):
        return lambda: inlined_source(ensure_code(self.kernel, self.system), self.files, family)

    def inlined(self, family: str = DEFAULT_FAMILY):
        """The system's inlined module (generated now if needed; compiled lazily by numba)."""
        if family not in self._inlined:
            self._inlined[family] = load_module(self.inlined_name(family), self._make_inlined_source(family))
        return self._inlined[family]

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
        """Call the entry point ``entry`` with ``args`` (without the kernel), in the module of
        the stepper family its ``kind`` argument names."""
        family = family_of_kind(self._kind_at.get(entry), args)
        inlined = self._use_inlined(entry, family, args)
        full = (0, *args) if inlined else (self.kernel.kernel, *args)
        disp = self._prepare(entry, "inlined" if inlined else "generic", family, full)
        positions = self._orbit_args.get(entry)
        if positions is None or self._serial:
            return disp(*full)
        return run_sliced(disp, full, tuple(i + 1 for i in positions))

    def runs_inlined(self, entry: str, *args) -> bool:
        """Whether a call of ``entry`` with ``args`` (without the kernel) runs the system's
        inlined module now: ``PHASELAB_LOOPS=inlined``, or ``auto`` once the module is built
        (asking for its build, as :meth:`run` does, when it is not)."""
        return self._use_inlined(entry, family_of_kind(self._kind_at.get(entry), args), args)

    def _use_inlined(self, entry, family, args) -> bool:
        policy = loop_form_choice()
        if policy != "auto":
            return policy == "inlined"
        name = self.inlined_name(family)
        sig = str(_signature((0, *args)))
        if sig in ready_signatures(name).get(entry, ()):
            return True
        if (entry, family, sig) not in self._requested:
            self._requested.add((entry, family, sig))
            request_build(self.system, tuple(f.name for f in self.files), name, entry,
                          _signature((0, *args)), family=family)
        return False

    def _prepare(self, entry, form, family, full):
        """The dispatcher of ``entry``, compiled (or loaded from numba's cache) for the types of
        ``full``. Damaged machine code in the cache is repaired once: the module is
        generated and compiled anew."""
        module = self.inlined(family) if form == "inlined" else self.generic(family)
        disp = getattr(module, entry)
        sig = _signature(full)
        mark = (entry, form, family, str(sig))
        if mark in self._checked:
            return disp
        what = describe_loop(entry, form, family if entry in self._kind_at else None)
        lock = self._lock_path(form, family, entry)
        passes = compiler_passes()
        try:
            with file_lock(lock), compiling(what):
                disp.compile(sig)
        except Exception:
            if form == "generic":
                self._generic[family] = reload_module(generic_module_name(self.files, family),
                                                      lambda: generic_source(self.files, family))
                disp = getattr(self._generic[family], entry)
            else:
                self._inlined[family] = reload_module(self.inlined_name(family),
                                                      self._make_inlined_source(family))
                disp = getattr(self._inlined[family], entry)
            with file_lock(lock), compiling(what):
                disp.compile(sig)
        self._checked.add(mark)
        if form == "generic" and compiler_passes() > passes:
            background_warm.start()      # a user waited for a shared loop: compile the others meanwhile
        return disp

    def _lock_path(self, form, family, entry):
        """The lock file that lets one process per machine compile ``entry`` of a module
        while the others wait and then load its machine code (see phaselab.base.locks)."""
        module = self.inlined_name(family) if form == "inlined" else generic_module_name(self.files, family)
        return cache_dir() / f".lock-{module}-{entry}"

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
        if n_pts <= SMALL_BATCH:
            self.kernel.call_rows(name, Z, prm, out)
            return _shaped(name, out, n_pts, m)
        steppers = _steppers_only(self.files)
        kern = self.kernel.kernel
        if steppers is not self.files:
            module = generic_module(steppers, DEFAULT_FAMILY)
        else:
            module = self.generic(DEFAULT_FAMILY)
        getattr(module, f"evaluate_{name}")(kern, Z, prm, out)
        return _shaped(name, out, n_pts, m)


SMALL_BATCH = 64
"""Up to this many points :meth:`LoopSet.evaluate` calls the kernel row by row from Python
(microseconds each) instead of compiling a batch evaluator (a second or so, once per machine):
the first call of a path evaluates a few seeds, a grid of many points pays the compile."""


def _shaped(name, out, n_pts, m):
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
