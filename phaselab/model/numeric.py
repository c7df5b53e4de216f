"""The one way from a system's symbols to numbers in Python: renamed symbols, floats.

Every numpy function made from a model's expressions (the energy, a map's step, root
formulas, ...) goes through :func:`numeric_function`. Before printing, each symbol is
renamed to a plain identifier (as the compiled kernels' symbols are, :func:`rename_map`), so
a parameter called ``pi``, ``E``, ``I``, ``cos`` or ``sqrt`` cannot shadow the constant or
function of that name, and no name a user typed becomes code. Whole numbers and fractions
past 2**53 are printed as doubles, as the kernels print them, so the energy and the kernel
agree.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import sympy as sp
from sympy.printing.numpy import NumPyPrinter


def rename_map(state: Sequence[sp.Symbol], params: Sequence[sp.Symbol]) -> dict:
    """The compiled kernels' names: model symbol -> ``s0..`` (state), ``k0..`` (parameters)."""
    mapping = {s: sp.Symbol(f"s{i}", real=True) for i, s in enumerate(state)}
    mapping.update({s: sp.Symbol(f"k{j}", real=True) for j, s in enumerate(params)})
    return mapping


def as_double(number) -> float:
    """The double nearest to a sympy rational (``p / q`` rounded once; inf past the range)."""
    try:
        return float(sp.Rational(number))
    except OverflowError:
        return float(np.copysign(np.inf, float(sp.sign(number))))


class _FloatPrinter(NumPyPrinter):
    """numpy printing in which a number with a whole part past 2**53 is a float literal (it
    would otherwise reach numpy as a Python int, which numpy's functions refuse, or as an
    exact division that can overflow); smaller numbers print as sympy prints them."""

    def _print_Integer(self, expr):
        value = int(expr)
        return str(value) if abs(value) < 2**53 else self._double(as_double(expr))

    def _print_Rational(self, expr):
        if max(abs(expr.p), expr.q) < 2**53:
            return super()._print_Rational(expr)
        return self._double(as_double(expr))

    def _double(self, value: float) -> str:
        if np.isfinite(value):
            return repr(value)
        return "numpy.inf" if value > 0 else "(-numpy.inf)"


def numeric_function(args: Sequence[sp.Symbol], exprs):
    """A numpy function of ``args`` evaluating ``exprs``, printed from renamed symbols.

    The symbols are renamed ``v0000, v0001, ...`` in the order in which sympy sorts the
    originals, so sums and products print their terms in the same order as before renaming
    (the same rounding, the same numbers) while no model name reaches the printed code.

    Parameters
    ----------
    args : sequence of sympy.Symbol
        The function's arguments in order (every free symbol of ``exprs`` must be one).
    exprs : sympy.Expr or sequence or sympy.Matrix
        What to evaluate (the result has the same structure).

    Returns
    -------
    callable
        ``fn(*values)`` with numpy broadcasting.
    """
    ordered = sorted(set(args), key=sp.default_sort_key)
    ren = {a: sp.Symbol(f"v{i:04d}", real=True) for i, a in enumerate(ordered)}
    renamed = exprs.xreplace(ren) if isinstance(exprs, (sp.Basic, sp.MatrixBase)) else \
        [e.xreplace(ren) if isinstance(e, sp.Basic) else e for e in exprs]
    # the printer prints sympy's own expression trees in renamed symbols (never user text);
    # lambdify replaces every argument by a fresh symbol when one is a Dummy, as it did
    # before renaming, which keeps that printing order too
    return sp.lambdify([ren[a] for a in args], renamed, modules="numpy", printer=_FloatPrinter,
                       dummify=any(isinstance(a, sp.Dummy) for a in args))
