"""Deciding whether a symbolic expression is identically zero, quickly."""

from __future__ import annotations

import random

import sympy as sp


def identically_zero(expr: sp.Expr, samples: int = 4) -> bool:
    """True when ``expr`` is zero for all values of its symbols.

    A clearly nonzero value at one of a few random points settles "not zero" at once (cheap,
    and it is the common case); only when the expression vanishes at every sample is
    :func:`sympy.simplify` asked to confirm.

    Parameters
    ----------
    expr : sympy.Expr
    samples : int
        Random points tried before falling back to ``simplify``.
    """
    expr = sp.expand(expr)
    if expr == 0:
        return True
    rng = random.Random(1234)
    symbols = sorted(expr.free_symbols, key=lambda x: x.name)
    for _ in range(samples):
        point = {x: sp.Float(rng.uniform(0.3, 1.7)) for x in symbols}
        value = expr.xreplace(point).evalf()
        if value.is_number and value.is_finite and abs(complex(value)) > 1e-10:
            return False
    return sp.simplify(expr) == 0
