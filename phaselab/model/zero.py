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
            point[x] = sp.Float(value, DIGITS)
        yield point


def _value_at(expr: sp.Expr, point: dict):
    """(value, scale) of ``expr`` at ``point`` as mpmath numbers: the value and the size of
    the largest term summed at the top level; (None, None) where it is undefined or not a
    finite number. mpmath keeps values of any size (``5.0**998`` does not overflow)."""
    terms = expr.args if expr.is_Add else (expr,)
    total, scale = _MP.mpc(0), _MP.mpf(0)
    for term in terms:
        try:
            value = term.xreplace(point).evalf(DIGITS)
            re, im = value.as_real_imag()
            z = _MP.mpc(_MP.mpf(re), _MP.mpf(im))
        except (TypeError, ValueError, AttributeError, ArithmeticError):
            return None, None
        if not _MP.isfinite(z):
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
        if _nonzero(*_value_at(expr, point)):
            return ZeroCheck(False, "symbolic")
    if expanded_terms(expr) <= EXPAND_MAX_TERMS:
        expanded = sp.expand(expr)
        if expanded == 0:
            return ZeroCheck(True, "symbolic")
        if expanded.is_Number:
            return ZeroCheck(False, "symbolic")
    defined = 0
    for point in _points(symbols, 4 * CONFIRM_POINTS, rng, both_signs=True):
        value, scale = _value_at(expr, point)
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
