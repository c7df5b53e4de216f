"""The argument checks that flows' and maps' normal forms share (order, point, resonances)."""

from __future__ import annotations

import numbers

import numpy as np
import sympy as sp

from phaselab.errors import ModelError, ParameterError

MAX_ORDER = 16
"""Highest order accepted (the size budget of :mod:`.expansion` usually binds first)."""


def check_order(order) -> int:
    if isinstance(order, bool) or not isinstance(order, numbers.Integral):
        raise ParameterError(f"order must be a whole number, got {order!r}")
    if not 2 <= int(order) <= MAX_ORDER:
        raise ParameterError(f"order must be between 2 and {MAX_ORDER}, got {order}")
    return int(order)


def check_resonances(resonances, n: int) -> list:
    if resonances is None:
        return []
    if n == 1 and len(list(resonances)):
        raise ParameterError("a system of one degree of freedom has no resonances (k . omega = k omega is "
                             "never zero); leave resonances out")
    try:
        vectors = [tuple(r) for r in resonances]
    except TypeError:
        raise ParameterError("resonances must be a list of integer vectors such as [(1, -2)]") from None
    for r in vectors:
        if len(r) != n or not all(isinstance(x, numbers.Integral) and not isinstance(x, bool) for x in r):
            raise ParameterError(f"each resonance must be {n} whole numbers (one per degree of freedom), got {r!r}")
        if not any(r):
            raise ParameterError("a resonance vector must not be all zeros")
    return [tuple(int(x) for x in r) for r in vectors]


def check_point(at, m: int) -> list:
    state = getattr(at, "state", at)
    stability = getattr(at, "stability", None)
    if stability is not None and stability != "elliptic":
        raise ModelError(f"the equilibrium is {stability}, not elliptic; normal_form needs an elliptic one")
    try:
        items = list(np.ravel(np.asarray(state, dtype=object)))
    except Exception:
        raise ParameterError("at must be an Equilibrium or a state vector") from None
    if len(items) != m:
        raise ParameterError(f"at must have {m} components (q then p), got {len(items)}")
    out = []
    for v in items:
        if isinstance(v, sp.Basic):
            if not (v.is_number and v.is_real and v.is_finite):
                raise ParameterError(f"at holds {v}, not a finite real number")
            out.append(v)
        elif isinstance(v, numbers.Real) and not isinstance(v, bool):
            if not np.isfinite(float(v)):
                raise ParameterError("at must be finite")
            f = float(v)
            out.append(sp.Integer(int(f)) if f == int(f) and abs(f) < 2 ** 53 else sp.Float(f, 17))
        else:
            raise ParameterError(f"at must hold real numbers, got {v!r}")
    return out
