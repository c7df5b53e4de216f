"""Deciding whether a symbolic expression is identically zero, with bounded work.

An expression that is not zero is almost always recognised at the first random point where
it is evaluated. One that vanishes at every sample is confirmed symbolically only when
expanding it is known to be cheap (:func:`phaselab.model.limits.expanded_terms`); otherwise,
or when expanding does not reduce it to zero (trigonometric identities and the like), the
decision is numerical: the expression must vanish, to 20 of the 30 significant digits of
its terms, at :data:`CONFIRM_POINTS` further random points of both signs. Where a caller
cannot be sure, "not zero" is the safe answer (a general integrator, a numerical check), so
a complex value or too few points where the expression is defined count as "not zero". A nonzero analytic expression
vanishes only on a set of measure zero, so random points find it. The answer says which way
it was reached.

No unbounded ``expand`` or ``simplify`` is ever called.
"""

from __future__ import annotations

import random
from dataclasses import dataclass

import mpmath
import sympy as sp

from phaselab.model.limits import EXPAND_MAX_TERMS, expanded_terms

#: random points of the confirmation when symbolic expansion is skipped or inconclusive
CONFIRM_POINTS = 12
#: significant digits of the numerical evaluation
DIGITS = 30
#: a value counts as zero below this fraction of the size of the terms it sums
RELATIVE_TOLERANCE = 1e-20

_MP = mpmath.MPContext()
_MP.dps = DIGITS + 10


@dataclass(frozen=True)
class ZeroCheck:
    """The answer to "is this expression identically zero".

    Attributes
    ----------
    zero : bool
    how : str
        ``"symbolic"`` (sympy reduced it to 0, or a value at a point showed it is not zero)
        or ``"numeric"`` (zero at every one of the random points, to :data:`DIGITS` digits).
    """

    zero: bool
    how: str

    def __bool__(self) -> bool:
        return self.zero


def _points(symbols, count: int, rng: random.Random, both_signs: bool):
    for _ in range(count):
        point = {}
        for x in symbols:
            value = rng.uniform(0.3, 1.7) if not both_signs else rng.uniform(0.3, 3.0)
            if both_signs and rng.random() < 0.5:
                value = -value
            point[x] = value
        yield point


class _OutOfRange(ArithmeticError):
    """A value at a sample point is too large (or a function's argument too wild) to be worth
    computing: the point is skipped, like a point where the expression is undefined."""


#: values are followed up to 2**MAX_BITS in size; beyond, the point is skipped (a symbolic
#: power tower such as x**(pi**(10**(10**px))) would otherwise need numbers with more
#: digits than memory can hold)
MAX_BITS = 100_000
#: largest argument of a periodic function (its argument reduction needs that many bits)
MAX_PERIODIC_ARGUMENT = _MP.mpf(2) ** 2000

_PERIODIC = {"sin": _MP.sin, "cos": _MP.cos, "tan": _MP.tan, "cot": _MP.cot, "sec": _MP.sec,
             "csc": _MP.csc}
_GROWING = {"exp": _MP.exp, "sinh": _MP.sinh, "cosh": _MP.cosh}
_OTHER = {"asin": _MP.asin, "acos": _MP.acos, "atan": _MP.atan, "acot": _MP.acot,
          "tanh": _MP.tanh, "coth": _MP.coth, "sech": _MP.sech, "csch": _MP.csch,
          "asinh": _MP.asinh, "acosh": _MP.acosh, "atanh": _MP.atanh, "log": _MP.log,
          "Abs": abs, "sign": _MP.sign, "erf": _MP.erf, "erfc": _MP.erfc,
          "LambertW": _MP.lambertw}


def _power(base, exponent):
    if base == 0:
        return _MP.mpf(0) if _MP.re(exponent) > 0 else _MP.inf
    if abs(exponent) * abs(_MP.log(abs(base), 2)) > MAX_BITS:
        raise _OutOfRange
    return _MP.power(base, exponent)


def _function(name: str, args: list):
    if name in _PERIODIC:
        if abs(args[0]) > MAX_PERIODIC_ARGUMENT:
            raise _OutOfRange
        return _PERIODIC[name](args[0])
    if name in _GROWING:
        if abs(_MP.re(args[0])) > MAX_BITS * 0.69:
            raise _OutOfRange
        return _GROWING[name](args[0])
    if name in _OTHER:
        return _OTHER[name](*args)
    if name == "atan2":
        y, x = args
        if isinstance(y, _MP.mpc) or isinstance(x, _MP.mpc):
            raise _OutOfRange
        return _MP.atan2(y, x)
    if name == "Heaviside":
        return _MP.mpf(0) if args[0] < 0 else (_MP.mpf(0.5) if args[0] == 0 else _MP.mpf(1))
    if name == "DiracDelta":
        return _MP.mpf(0) if args[0] != 0 else _MP.inf
    raise _OutOfRange  # a function this evaluator does not know: no evidence either way


def _evaluate(expr: sp.Expr, point: dict):
    """The value of ``expr`` at ``point`` (symbols -> mpmath numbers), computed node by node
    with the size guards above; shared subexpressions are computed once."""
    values: dict = {}
    stack = [(expr, False)]
    while stack:
        node, ready = stack.pop()
        if node in values:
            continue
        if not ready:
            if node.is_Symbol:
                if node not in point:
                    raise _OutOfRange
                values[node] = point[node]
                continue
            if node.is_Number or node.is_NumberSymbol:
                values[node] = _MP.mpmathify(node.evalf(DIGITS + 10))
                continue
            stack.append((node, True))
            stack.extend((a, False) for a in node.args if a not in values)
            continue
        args = [values[a] for a in node.args]
        if node.is_Add:
            out = _MP.fsum(args)
        elif node.is_Mul:
            out = _MP.fprod(args)
        elif node.is_Pow:
            out = _power(*args)
        elif isinstance(node, sp.Function):
            out = _function(type(node).__name__, args)
        else:
            raise _OutOfRange
        if not _MP.isfinite(out) or (out != 0 and _MP.mag(out) > MAX_BITS):
            raise _OutOfRange
        values[node] = out
    return values[expr]


def value_at(expr: sp.Expr, point: dict):
    """(value, scale) of ``expr`` at ``point`` as mpmath numbers, with :data:`DIGITS`
    significant digits.

    Parameters
    ----------
    expr : sympy.Expr
    point : dict of sympy.Symbol to float
        A value for every free symbol.

    Returns
    -------
    value : mpmath.mpc or None
    scale : mpmath.mpf or None
        The size of the largest term summed at the top level, against which cancellation
        is judged. Both None where the expression is undefined, too large to follow, or not
        a finite number. mpmath keeps values of any reasonable size (``5.0**998`` does not
        overflow).
    """
    terms = expr.args if expr.is_Add else (expr,)
    total, scale = _MP.mpc(0), _MP.mpf(0)
    numbers = {x: _MP.mpf(v) for x, v in point.items()}
    for term in terms:
        try:
            z = _MP.mpc(_evaluate(term, numbers))
        except (_OutOfRange, ValueError, TypeError, ZeroDivisionError, ArithmeticError):
            return None, None
        total += z
        scale = max(scale, abs(z))
    return total, scale


def _nonzero(value, scale) -> bool:
    """A finite value clearly away from zero. A complex value counts too: every caller
    treats "not zero" as the safe answer (a general integrator, a numerical check)."""
    if value is None:
        return False
    return abs(value) > RELATIVE_TOLERANCE * scale


def zero_check(expr: sp.Expr, samples: int = 4) -> ZeroCheck:
    """Decide whether ``expr`` is zero for all real values of its symbols, with bounded work.

    Parameters
    ----------
    expr : sympy.Expr
    samples : int
        Random points with positive coordinates tried first (the cheap, common case).

    Returns
    -------
    ZeroCheck
    """
    expr = sp.sympify(expr) if not isinstance(expr, sp.Basic) else expr
    if expr == 0:
        return ZeroCheck(True, "symbolic")
    if expr.is_Number:
        return ZeroCheck(False, "symbolic")
    rng = random.Random(1234)
    symbols = sorted(expr.free_symbols, key=lambda x: x.name)
    for point in _points(symbols, samples, rng, both_signs=False):
        if _nonzero(*value_at(expr, point)):
            return ZeroCheck(False, "symbolic")
    if expanded_terms(expr) <= EXPAND_MAX_TERMS:
        expanded = sp.expand(expr)
        if expanded == 0:
            return ZeroCheck(True, "symbolic")
        if expanded.is_Number:
            return ZeroCheck(False, "symbolic")
    defined = 0
    for point in _points(symbols, 4 * CONFIRM_POINTS, rng, both_signs=True):
        value, scale = value_at(expr, point)
        if _nonzero(value, scale):
            return ZeroCheck(False, "symbolic")
        defined += value is not None
        if defined >= CONFIRM_POINTS:
            return ZeroCheck(True, "numeric")
    # undefined almost everywhere it was tried: "not zero" is the safe answer
    return ZeroCheck(False, "numeric")


def identically_zero(expr: sp.Expr, samples: int = 4) -> bool:
    """True when ``expr`` is zero for all values of its symbols (see :func:`zero_check`)."""
    return zero_check(expr, samples).zero
