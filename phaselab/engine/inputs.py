"""The argument checks shared by every compute call: one accepted form per argument, one
error per mistake.

Every function here returns the checked value in the form the compiled loops take (C-ordered
float64 arrays, Python ints and floats) or raises :class:`~phaselab.errors.ParameterError`
naming the argument, what was expected and what was given. Requests whose cost can be
known up front are checked against the limits of :mod:`phaselab.engine.limits`.
"""

from __future__ import annotations

import math
import numbers
import os
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from phaselab.engine import status as codes
from phaselab.errors import ParameterError
from phaselab.model.system import PhaseSpaceSystem


# ----------------------------------------------------------------------------- numbers
MAX_COUNT = 2**53
"""No count may exceed this (an int64 loop counter and a float both hold it exactly)."""


def number(value, what: str) -> float:
    """A finite real number (int, float or numpy scalar; not bool, complex or str)."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise ParameterError(f"{what} must be a real number, got {_show(value)}")
    try:
        v = float(value)
    except (OverflowError, TypeError, ValueError):
        raise ParameterError(f"{what} must be a real number that fits a float, got {_show(value)}") from None
    if not math.isfinite(v):
        raise ParameterError(f"{what} must be finite, got {v}")
    return v


def positive_number(value, what: str) -> float:
    """A finite real number > 0."""
    v = number(value, what)
    if not v > 0:
        raise ParameterError(f"{what} must be positive, got {v:g}")
    return v


def count(value, what: str, minimum: int = 1, maximum: int | None = None) -> int:
    """An integer in ``[minimum, maximum]`` (int or numpy integer, or a float with an integral
    value; not bool or str)."""
    if isinstance(value, (bool, np.bool_)):
        raise ParameterError(f"{what} must be an integer, got {value!r}")
    if isinstance(value, numbers.Integral):
        k = int(value)
    elif isinstance(value, numbers.Real) and math.isfinite(float(value)) and float(value).is_integer():
        k = int(value)
    else:
        raise ParameterError(f"{what} must be an integer, got {_show(value)}")
    if k < minimum:
        raise ParameterError(f"{what} must be at least {minimum}, got {k}")
    if maximum is None and k > MAX_COUNT:
        raise ParameterError(f"{what} = {k:.3g} is larger than any count phaselab can hold (2**53, far "
                             "above what the limits of phaselab.set_limits let one call do)")
    if maximum is not None and k > maximum:
        raise ParameterError(f"{what} must be at most {maximum}, got {k}")
    return k


MAX_WORKERS = 8
"""The most worker processes a call that compiles in parallel starts by default (each
holds its own compiler, a few hundred MB)."""


def workers(value, what: str = "workers") -> int:
    """A count of worker processes: ``None`` for one per core this process may use (at most
    :data:`MAX_WORKERS`), else an integer from 1 to 64."""
    if value is None:
        try:
            cores = len(os.sched_getaffinity(0))
        except (AttributeError, OSError):
            cores = os.cpu_count() or 1
        return max(1, min(cores, MAX_WORKERS))
    return count(value, what, minimum=1, maximum=64)


def step(dt, what: str = "dt") -> float | None:
    """A step: ``None`` (the call chooses one) or a positive finite number above 1e-300.

    How many steps a span takes is checked later, against :data:`phaselab.engine.limits.LIMITS`."""
    if dt is None:
        return None
    h = positive_number(dt, what)
    if h < 1e-300:
        raise ParameterError(f"{what} = {h:g} is too small to be a step")
    return h


def direction(value) -> int:
    """+1 or -1."""
    if isinstance(value, (bool, np.bool_)) or value not in (1, -1):
        raise ParameterError(f"direction must be +1 or -1, got {value!r}")
    return int(value)


def tolerance(value, what: str = "tol") -> float:
    """A relative tolerance in (0, 1)."""
    v = positive_number(value, what)
    if v >= 1:
        raise ParameterError(f"{what} must be below 1, got {v:g}")
    return v


def iterations(value, what: str = "maxit") -> int:
    """An iteration cap between 1 and 100000."""
    return count(value, what, minimum=1, maximum=100_000)


def _show(value) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


# ----------------------------------------------------------------------------- states
def states(value, width: int, names=None, what: str = "states") -> np.ndarray:
    """A batch of states as a C-ordered float64 array of shape ``(n_orbits, width)``.

    A single state of shape ``(width,)`` becomes one row. Entries must be real numbers
    (bool, complex and text are refused); NaN or infinite entries are kept, so that the
    orbit is flagged in the result's status rather than the batch refused.

    Parameters
    ----------
    value : array_like, shape (n_orbits, width) or (width,)
    width : int
        Number of state components (2n; 2n + 2 in extended phase space).
    names : sequence of str, optional
        Component names, for the message.
    what : str
        The argument's name, for the message.
    """
    order = f" ordered ({', '.join(names)})" if names else ""
    try:
        arr = np.asarray(value)
    except ValueError:  # ragged nested sequences
        raise ParameterError(f"{what} must be an array of shape (n_orbits, {width}){order}; "
                             "got rows of different lengths") from None
    if arr.dtype == object or arr.dtype.kind not in "iuf":
        kind = {"b": "booleans", "c": "complex numbers", "U": "text", "S": "text",
                "O": "mixed or ragged entries"}.get(arr.dtype.kind, f"dtype {arr.dtype}")
        raise ParameterError(f"{what} must be real numbers of shape (n_orbits, {width}){order}; "
                             f"got {kind}")
    if arr.ndim == 1:
        arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[1] != width:
        raise ParameterError(f"{what} must have shape ({width},) or (n_orbits, {width}){order}; "
                             f"got shape {np.shape(value)}")
    if arr.shape[0] == 0:
        raise ParameterError(f"{what} holds no states")
    return np.ascontiguousarray(arr, dtype=np.float64)


def state_index(system, name, what: str = "name") -> int:
    """Index of a state component given by name or sympy symbol."""
    names = [s.name for s in system.state_symbols]
    key = getattr(name, "name", name)
    if not isinstance(key, str) or key not in names:
        raise ParameterError(f"unknown {what} {name!r}; the state components of this system are: "
                             + ", ".join(names))
    return names.index(key)


# ----------------------------------------------------------------------------- section plane
@dataclass(frozen=True)
class Plane:
    """A ``plane=`` argument as :func:`plane` parsed it.

    Attributes
    ----------
    kind : {"none", "stroboscopic", "fixed"}
        No plane given, the stroboscopic section of a driven flow, or fixed state components.
    indices : tuple of int
        State indices of the fixed components, in the order given (empty unless ``"fixed"``).
    values : tuple of float
        Their values (in each component's units).
    names : tuple of str
        Their names.
    """

    kind: str
    indices: tuple = ()
    values: tuple = ()
    names: tuple = ()

    def as_dict(self) -> dict:
        """The fixed components as ``{name: value}`` (empty unless ``"fixed"``)."""
        return dict(zip(self.names, self.values))

    def single(self, what: str = "plane") -> tuple[int, float]:
        """``(index, value)`` of a plane that fixes exactly one state component."""
        if self.kind != "fixed" or len(self.indices) != 1:
            raise ParameterError(f"{what} must fix exactly one state component, e.g. {{'x': 0.0}}, "
                                 f"got {self.as_dict() if self.kind == 'fixed' else self.kind!r}")
        return self.indices[0], self.values[0]


def plane(system, value, what: str = "plane", stroboscopic: bool = True) -> Plane:
    """The ``plane=`` argument of every function that takes one, parsed in this one place.

    Accepted forms: ``None`` (no plane: what it means is the caller's, e.g. a stroboscopic
    section of a driven flow, a record sampled in time, nothing fixed); the text
    ``"stroboscopic"`` (unless ``stroboscopic`` is False); a mapping of state components
    (name as text or sympy symbol) to finite real numbers, ``{"x": 0.0}``; a :class:`Plane`
    (returned as it is). How many components a caller needs is its own check
    (:meth:`Plane.single` for a section plane).
    """
    if isinstance(value, Plane):
        return value
    if value is None:
        return Plane("none")
    shape = ("a mapping such as {'x': 0.0} or 'stroboscopic'" if stroboscopic
             else "a mapping of state names to values such as {'x': 0.0}")
    if isinstance(value, str) and stroboscopic and value == "stroboscopic":
        return Plane("stroboscopic")
    if not isinstance(value, Mapping):
        raise ParameterError(f"{what} must be {shape}, got {_show(value)}")
    names = [s.name for s in system.state_symbols]
    indices, values = [], []
    for key, v in value.items():
        i = state_index(system, key, f"{what} component")
        if i in indices:
            raise ParameterError(f"{what} fixes {names[i]!r} twice")
        indices.append(i)
        values.append(_plane_value(v, f"{what} value of {names[i]!r}"))
    return Plane("fixed", tuple(indices), tuple(values), tuple(names[i] for i in indices))


def _plane_value(value, what: str) -> float:
    """A finite real number: a Python, numpy or sympy number, or a 0-d array (not text, a
    bool or a complex number)."""
    if isinstance(value, (str, bytes, bool, np.bool_)) or np.ndim(value) != 0 or (
            isinstance(value, numbers.Complex) and not isinstance(value, numbers.Real)):
        raise ParameterError(f"{what} must be a real number, got {_show(value)}")
    try:
        v = float(value)
    except (OverflowError, TypeError, ValueError):
        raise ParameterError(f"{what} must be a real number, got {_show(value)}") from None
    if not math.isfinite(v):
        raise ParameterError(f"{what} must be finite, got {v}")
    return v


# ----------------------------------------------------------------------------- box
def box(system, value, positions=None) -> tuple[np.ndarray, np.ndarray]:
    """Escape region as ``(low, high)`` arrays over the state the loops integrate.

    One form for every call: ``None`` (no bound), a positive number ``R`` (every component
    within ``[-R, R]``), or a mapping ``{name: (low, high)}`` bounding the named components
    (``-inf``/``inf`` for an open side).

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    value : None, float or mapping
    positions : sequence of int, optional
        Where each of the system's state components sits in the integrated state (for
        extended phase space, where tau and p_tau are inserted); default the identity.

    Returns
    -------
    low, high : ndarray, shape (width,)
        ``width`` is ``max(positions) + 1`` (+ 1 for the trailing p_tau in extended space).
    """
    names = [s.name for s in system.state_symbols]
    pos = list(range(len(names))) if positions is None else list(positions)
    width = len(names) if positions is None else len(names) + 2
    lo = np.full(width, -np.inf)
    hi = np.full(width, np.inf)
    if value is None:
        return lo, hi
    if isinstance(value, Mapping):
        for key, bounds in value.items():
            j = state_index(system, key, "box component")
            name = names[j]
            try:
                a, b = (float(bounds[0]), float(bounds[1]))
                if len(bounds) != 2:
                    raise ValueError
            except (TypeError, ValueError, IndexError, KeyError):
                raise ParameterError(f"box bounds of {name!r} must be a pair (low, high), got "
                                     f"{_show(bounds)}") from None
            if math.isnan(a) or math.isnan(b) or not a < b:
                raise ParameterError(f"box bounds of {name!r} need low < high, got ({a}, {b})")
            lo[pos[j]], hi[pos[j]] = a, b
        return lo, hi
    if isinstance(value, numbers.Real) and not isinstance(value, (bool, np.bool_)):
        r = positive_number(value, "box")
        lo[pos] = -r
        hi[pos] = r
        return lo, hi
    raise ParameterError("box must be a positive number R (every component within [-R, R]) or a "
                         f"mapping name -> (low, high), got {_show(value)}")


# ----------------------------------------------------------------------------- method
def method(system, value, adaptive: bool = False):
    """The integrator for ``method=...``: ``"auto"`` or a name of the method table.

    Parameters
    ----------
    system : Hamiltonian
        The (autonomous, possibly extended) system to integrate.
    value : str
    adaptive : bool
        Whether the call accepts the adaptive scipy reference (``"dop853"``).

    Returns
    -------
    Method or str
        A :class:`~phaselab.engine.integrators.Method`, or ``"dop853"``.

    Raises
    ------
    ParameterError
        An unknown name, or ``"dop853"`` where it is not available.
    ModelError
        A splitting method for a Hamiltonian that is not separable.
    """
    from phaselab.engine.integrators import ADAPTIVE, choose_method, get_method

    if not isinstance(value, str):
        raise ParameterError(f"method must be a name such as 'auto' or 'yoshida4', got {_show(value)}")
    key = value.lower()
    if key == "auto":
        return choose_method(system)
    if key in ADAPTIVE:
        if adaptive:
            return key
        raise ParameterError(f"method {value!r} is the adaptive scipy reference, available in "
                             "trajectory() only; here choose a fixed-step method such as "
                             "'yoshida6' or 'gauss6'")
    return get_method(key, system)


def symplectic(meth) -> None:
    """Refuse a method that is not symplectic (the tangent-map indicators need one)."""
    if not getattr(meth, "symplectic", False):
        name = getattr(meth, "name", meth)
        raise ParameterError(f"method {name!r} is not symplectic; use leapfrog, yoshida4/6/8, "
                             "implicit_midpoint, gauss4 or gauss6")


def implicit_solver(tol, maxit) -> tuple[float, int]:
    """The implicit step's tolerance and iteration cap, checked (defaults in
    :mod:`phaselab.engine.status`)."""
    return (tolerance(codes.IMPLICIT_TOL if tol is None else tol),
            iterations(codes.IMPLICIT_MAXIT if maxit is None else maxit))


def flow(system, what: str):
    """Refuse anything but a Hamiltonian flow."""
    is_system = isinstance(system, PhaseSpaceSystem)
    if not is_system or system.kind != "flow" or not hasattr(system, "expr"):
        got = "an area-preserving map" if is_system and system.kind == "map" else type(system).__name__
        raise ParameterError(f"{what} needs a Hamiltonian flow, got {got}")


# ----------------------------------------------------------------------------- grids
def grid_axis(name: str, spec, n_default, what: str = "range") -> np.ndarray:
    """One axis of a grid, ``(low, high)`` or ``(low, high, n)``: n points from low to high.

    The count is checked before anything is allocated (at most 100000 points per axis; the
    grid as a whole is checked by :func:`grid_budget`).
    """
    if isinstance(spec, (str, bytes)) or not isinstance(spec, (tuple, list, np.ndarray)) \
            or len(spec) not in (2, 3):
        raise ParameterError(f"{what} of {name!r} must be (low, high) or (low, high, n), got {_show(spec)}")
    lo = number(spec[0], f"low end of the {what} of {name!r}")
    hi = number(spec[1], f"high end of the {what} of {name!r}")
    if not lo < hi:
        raise ParameterError(f"{what} of {name!r} must have low < high, got ({lo:g}, {hi:g})")
    n = count(spec[2] if len(spec) == 3 else n_default, f"points of the {what} of {name!r}",
              minimum=1, maximum=100_000)
    return np.linspace(lo, hi, n)


# ----------------------------------------------------------------------------- objects and words
def system(value, what: str = "system", kind: str | None = None):
    """A phaselab system (:class:`~phaselab.Hamiltonian` or :class:`~phaselab.AreaPreservingMap`);
    ``kind`` ``"flow"`` or ``"map"`` asks for one of them."""
    if not isinstance(value, PhaseSpaceSystem):
        raise ParameterError(f"{what} must be a phaselab.Hamiltonian or phaselab.AreaPreservingMap, "
                             f"got {_kind(value)}")
    if kind is not None and value.kind != kind:
        want = "an area-preserving map" if kind == "map" else "a Hamiltonian flow"
        raise ParameterError(f"{what} must be {want}, got {_kind(value)}")
    return value


def instance(value, cls, what: str, made_by: str):
    """``value`` if it is a ``cls`` (``made_by`` says where one comes from), else a ParameterError."""
    if not isinstance(value, cls):
        raise ParameterError(f"{what} must be {made_by}, got {_kind(value)}")
    return value


def flag(value, what: str) -> bool:
    """True or False (a bool or numpy bool; not a number or text)."""
    if not isinstance(value, (bool, np.bool_)):
        raise ParameterError(f"{what} must be True or False, got {_show(value)}")
    return bool(value)


def word(value, what: str, choices=None) -> str:
    """A name given as text, one of ``choices`` when given."""
    if not isinstance(value, str):
        raise ParameterError(f"{what} must be a name given as text, got {_show(value)}")
    if choices is not None and value not in choices:
        raise ParameterError(f"{what} must be one of {', '.join(map(repr, choices))}, got {value!r}")
    return value


def mapping(value, what: str, optional: bool = True) -> dict | None:
    """A mapping (``None`` when optional): returned as a dict."""
    if value is None and optional:
        return None
    if not isinstance(value, Mapping):
        raise ParameterError(f"{what} must be a mapping name -> value, got {_show(value)}")
    return dict(value)


def pair(value, what: str) -> tuple[float, float]:
    """Two finite numbers ``(a, b)`` with a != b (a span or bracket, either order)."""
    if isinstance(value, (str, bytes, Mapping)) or not hasattr(value, "__len__") or len(value) != 2:
        raise ParameterError(f"{what} must be two numbers (start, end), got {_show(value)}")
    a, b = number(value[0], what), number(value[1], what)
    if a == b:
        raise ParameterError(f"{what} must have two different ends, got ({a:g}, {b:g})")
    return a, b


def _kind(value) -> str:
    return f"{type(value).__name__} {_show(value)}" if not isinstance(value, PhaseSpaceSystem) \
        else f"{type(value).__name__} ({value.kind})"


__all__ = ["number", "positive_number", "count", "step", "direction", "tolerance", "iterations",
           "states", "state_index", "Plane", "plane", "box", "method", "symplectic", "implicit_solver",
           "flow", "grid_axis",
           "system", "instance", "flag", "word", "mapping", "pair"]
