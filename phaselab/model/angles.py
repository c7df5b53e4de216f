"""Angles: state components that live on a circle, declared where a model is made.

A flow's angles (``Hamiltonian(..., angles={"theta": 2*pi})``) and a map's ``modulus`` are one
concept: every system has ``system.angles`` (name -> period) and ``system.angle_intervals``
(name -> (low, high), ``high - low`` the period). Where a point is shown or saved, an angle
is wrapped into its interval ``[low, high)``.

The convention: an angle declared by its period alone is wrapped into the interval centred on
zero, ``[-period/2, period/2)`` (a pendulum's hanging state in the middle, the inverted one at
the edges); an interval ``(low, high)`` is taken as given. A map's ``modulus=P`` keeps its
documented meaning ``[0, P)``, since the iteration itself wraps there.

Integration never wraps a flow: orbits and trajectories keep the lifted (unwrapped) values,
which frequency analysis needs for rotation numbers; sections and figures wrap them.
"""

from __future__ import annotations

import math
from typing import Mapping

import numpy as np
import sympy as sp

from phaselab.errors import ModelError
from phaselab.model.params import finite_number
from phaselab.model.parser import parse_expression

TWO_PI = 2.0 * math.pi


def _number(value, what: str) -> float:
    """A finite float from a number, a sympy number or a constant string such as ``"2*pi"``."""
    if isinstance(value, bool):
        raise ModelError(f"{what} must be a number, got {value!r}")
    if isinstance(value, str):
        value = parse_expression(value, symbols={}, allowed=set())
    return finite_number(value, what, ModelError)


def interval(entry, name: str, centred: bool = True) -> tuple[float, float]:
    """The wrapping interval ``(low, high)`` of one angle.

    Parameters
    ----------
    entry : number, str, sympy number or pair
        A period ``P`` or an interval ``(low, high)``.
    name : str
        The component's name, for messages.
    centred : bool
        Where a bare period goes: ``[-P/2, P/2)`` (True, angles) or ``[0, P)`` (a map's modulus).

    Raises
    ------
    ModelError
        Not a number or pair, not finite, or an empty interval.
    """
    if isinstance(entry, (tuple, list)):
        if len(entry) != 2:
            raise ModelError(f"the angle {name!r} needs a period or an interval (low, high), got {entry!r}")
        low = _number(entry[0], f"low end of the interval of angle {name!r}")
        high = _number(entry[1], f"high end of the interval of angle {name!r}")
    else:
        period = _number(entry, f"period of angle {name!r}")
        low, high = (-0.5 * period, 0.5 * period) if centred else (0.0, period)
    if not high > low:
        raise ModelError(f"the angle {name!r} needs a positive period, got the interval [{low}, {high})")
    return float(low), float(high)


def declared_angles(spec, state_names, coordinate_names) -> dict[str, tuple[float, float]]:
    """Read a flow's ``angles=`` declaration.

    Parameters
    ----------
    spec : None, mapping or sequence
        ``{"theta": 2*pi}``, ``{"theta": (0, 2*pi)}``, or a list of names (period ``2 pi``
        each). Keys may be names or sympy symbols.
    state_names : sequence of str
        Every state component's name (for the message on a momentum).
    coordinate_names : sequence of str
        The coordinates, the only components a flow may declare as angles.

    Returns
    -------
    dict of str to (float, float)
        The interval of each angle, in state order.
    """
    if spec is None:
        return {}
    if isinstance(spec, (str, sp.Symbol)):
        spec = [spec]
    if isinstance(spec, Mapping):
        items = list(spec.items())
    elif isinstance(spec, (list, tuple, set, frozenset)):
        items = [(key, TWO_PI) for key in spec]
    else:
        raise ModelError(f"angles must map coordinate names to periods, e.g. {{'theta': 2*pi}}, or list "
                         f"coordinate names; got {spec!r}")
    out = {}
    for key, entry in items:
        name = key.name if isinstance(key, sp.Symbol) else key
        if not isinstance(name, str) or name not in state_names:
            raise ModelError(f"angles: {key!r} is not a coordinate of this system; the coordinates are "
                             f"{', '.join(coordinate_names)}")
        if name not in coordinate_names:
            raise ModelError(f"angles: {name!r} is a momentum; only coordinates are angles of a flow")
        if name in out:
            raise ModelError(f"angles: {name!r} is declared twice")
        out[name] = interval(entry, name)
    return {n: out[n] for n in state_names if n in out}


def wrapping_arrays(intervals: Mapping, state_names) -> tuple[np.ndarray, np.ndarray]:
    """Per-component ``(period, low)`` arrays of shape ``(2n,)``; period 0 where a component
    is not an angle."""
    period = np.zeros(len(state_names))
    low = np.zeros(len(state_names))
    for j, name in enumerate(state_names):
        if name in intervals:
            a, b = intervals[name]
            period[j], low[j] = b - a, a
    return period, low


def wrap(states, period, low) -> np.ndarray:
    """States with every angle brought into ``[low, low + period)``.

    Parameters
    ----------
    states : array_like, shape (..., m)
    period, low : ndarray, shape (m,)
        Period 0 leaves a component alone.

    Returns
    -------
    numpy.ndarray, same shape (a copy; NaN stays NaN)
    """
    z = np.array(states, dtype=float, copy=True)
    for j in np.flatnonzero(np.asarray(period) > 0):
        p, a = float(period[j]), float(low[j])
        v = np.mod(z[..., j] - a, p)
        v = np.where(p - v <= 1e-12 * p, 0.0, v)   # a rounding hair below the top is the bottom
        z[..., j] = a + v
    return z


def break_jumps(values, period, low) -> np.ndarray:
    """A lifted polyline wrapped for drawing, with a NaN row inserted wherever an angle jumps
    across its interval (so a line is not drawn across the plot).

    Parameters
    ----------
    values : array_like, shape (n_points, m)
        Consecutive lifted states.
    period, low : ndarray, shape (m,)

    Returns
    -------
    numpy.ndarray, shape (n_points + n_jumps, m)
    """
    z = np.asarray(values, dtype=float)
    w = wrap(z, period, low)
    if len(w) < 2 or not np.any(np.asarray(period) > 0):
        return w
    cols = np.flatnonzero(np.asarray(period) > 0)
    with np.errstate(invalid="ignore"):
        jumps = np.any(np.abs(np.diff(w[:, cols], axis=0)) > 0.5 * np.asarray(period)[cols], axis=1)
    cuts = np.flatnonzero(jumps) + 1
    if not cuts.size:
        return w
    return np.insert(w, cuts, np.nan, axis=0)
