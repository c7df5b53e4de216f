"""The one way from a system's symbols to numbers in Python: renamed symbols, floats.

Every numpy function made from a model's expressions (the energy, a map's step, root
formulas, ...) goes through :func:`numeric_function`. Before printing, each symbol is
renamed to a plain identifier (``s0..`` for the state, ``k0..`` for parameters, ``a0..`` for
anything else), as the compiled kernels are (:func:`rename_map`), so a parameter called
``pi``, ``E``, ``I``, ``cos`` or ``sqrt`` cannot shadow the constant or function of that
name, and no name a user typed becomes code. Numbers are printed as doubles, as the
kernels print them, so the energy and the kernel agree.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import sympy as sp
from sympy.printing.numpy import NumPyPrinter


def rename_map(state: Sequence[sp.Symbol], params: Sequence[sp.Symbol] = (),
               others: Sequence[sp.Symbol] = ()) -> dict:
    """Model symbol -> safe identifier: ``s0..`` (state), ``k0..`` (parameters), ``a0..``
    (other arguments, such as time or an energy level)."""
    mapping = {s: sp.Symbol(f"s{i}", real=True) for i, s in enumerate(state)}
    mapping.update({s: sp.Symbol(f"k{j}", real=True) for j, s in enumerate(params)})
    mapping.update({s: sp.Symbol(f"a{j}", real=True) for j, s in enumerate(others)})
    return mapping


def as_double(number) -> float:
    """The double nearest to a sympy rational (``p / q`` rounded once; inf past the range)."""
    try:
        return float(sp.Rational(number))
    except OverflowError:
        return float(np.copysign(np.inf, float(sp.sign(number))))


class _FloatPrinter(NumPyPrinter):
    """numpy printing with every number a float literal (a whole number past 2**53 or a
    fraction would otherwise reach numpy as a Python int or an exact division)."""

    def _print_Integer(self, expr):
        value = int(expr)
        return str(value) if abs(value) < 2**53 else self._double(as_double(expr))

    def _print_Rational(self, expr):
        return self._double(as_double(expr))

    def _print_Half(self, expr):
        return "0.5"

    def _double(self, value: float) -> str:
        if np.isfinite(value):
            return repr(value)
        return "numpy.inf" if value > 0 else "(-numpy.inf)"


def numeric_function(args: Sequence[sp.Symbol], exprs, state: Sequence[sp.Symbol] = (),
                     params: Sequence[sp.Symbol] = ()):
    """A numpy function of ``args`` evaluating ``exprs``, printed from renamed symbols.

    Parameters
    ----------
    args : sequence of sympy.Symbol
        The function's arguments in order (every free symbol of ``exprs`` must be one).
    exprs : sympy.Expr or sequence or sympy.Matrix
        What to evaluate (the result has the same structure).
    state, params : sequence of sympy.Symbol, optional
        Which arguments are state components and parameters (only the printed names
        depend on this).

    Returns
    -------
    callable
        ``fn(*values)`` with numpy broadcasting.
    """
    others = [a for a in args if a not in set(state) | set(params)]
    ren = rename_map(state, params, others)
    renamed = exprs.xreplace(ren) if isinstance(exprs, (sp.Basic, sp.MatrixBase)) else \
        [e.xreplace(ren) if isinstance(e, sp.Basic) else e for e in exprs]
    # the printer prints sympy's own expression trees in renamed symbols (never user text)
    return sp.lambdify([ren[a] for a in args], renamed, modules="numpy", printer=_FloatPrinter)
