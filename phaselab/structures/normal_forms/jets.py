"""Taylor polynomials of an expression tree by truncated power-series arithmetic (jets).

Each node of the expression is turned into its Taylor polynomial about the expansion point
(``{exponents: coefficient}``, degrees up to ``order``): sums and products combine the
polynomials of their arguments (truncated), a whole power multiplies, and a function of one
argument ``f(u)`` with ``u = c + d`` (``c`` the constant term) is ``sum f^(k)(c) d^k / k!``,
the univariate derivatives taken by sympy at the number ``c``. The work is bounded by the
number of nodes times the cost of a truncated product, whatever the nesting; it does not
grow with the size of derivatives as repeated differentiation does.

Coefficients are :class:`fractions.Fraction` in exact work (every number met rational) and
``float`` otherwise; :class:`NotRational` tells the caller to start again in floating point.
"""

from __future__ import annotations

import math
from fractions import Fraction

import sympy as sp

from phaselab.errors import ModelError


class NotRational(Exception):
    """A number met in exact work is not rational."""


class Unsupported(Exception):
    """A node this module does not expand (the caller falls back to differentiation)."""


def jet_taylor(expr: sp.Expr, state: tuple, at: list, order: int, exact: bool) -> dict:
    """``{exponents: coefficient}`` of ``expr`` about ``at`` up to total degree ``order``.

    Raises
    ------
    NotRational
        In exact work, when a coefficient is not rational.
    Unsupported
        For a node with several arguments that is not a sum, product or power.
    ModelError
        When ``expr`` is not smooth at the point (a fractional power or logarithm of zero).
    """
    m = len(state)
    index = {s: i for i, s in enumerate(state)}
    zero = tuple([0] * m)
    memo: dict = {}
    number = _exact_number if exact else _float_number

    def mul(a: dict, b: dict) -> dict:
        out: dict = {}
        for ka, ca in a.items():
            da = sum(ka)
            for kb, cb in b.items():
                if da + sum(kb) > order:
                    continue
                key = tuple(x + y for x, y in zip(ka, kb))
                out[key] = out.get(key, 0) + ca * cb
        return {k: c for k, c in out.items() if c != 0}

    def power(a: dict, n: int) -> dict:
        out = {zero: number(sp.Integer(1))}
        base = a
        while n:
            if n & 1:
                out = mul(out, base)
            n >>= 1
            if n:
                base = mul(base, base)
        return out

    def function(f, a: dict) -> dict:
        c = a.get(zero, 0)
        d = {k: v for k, v in a.items() if k != zero}
        t = sp.Dummy("t")
        c_sym = sp.Rational(c.numerator, c.denominator) if exact else sp.Float(c, 17)
        g = f(t)
        out: dict = {}
        term = {zero: number(sp.Integer(1))}
        for k in range(order + 1):
            value = g.subs(t, c_sym)
            if not value.is_finite:
                raise ModelError(f"{f(c_sym)} is not finite at the expansion point; no Taylor expansion there")
            coef = number(value) * Fraction(1, math.factorial(k)) if exact else number(value) / math.factorial(k)
            for key, v in term.items():
                out[key] = out.get(key, 0) + coef * v
            if not d:
                break
            term = mul(term, d)
            if not term:
                break
            g = sp.diff(g, t)
        return {k: v for k, v in out.items() if v != 0}

    def visit(e) -> dict:
        if e in memo:
            return memo[e]
        if e in index:
            i = index[e]
            key = tuple(1 if t == i else 0 for t in range(m))
            out = {key: number(sp.Integer(1))}
            if at[i] != 0:
                out[zero] = number(at[i])
        elif e.is_Number or (e.is_number and not e.free_symbols):
            out = {zero: number(e)} if e != 0 else {}
        elif e.is_Add:
            out = {}
            for arg in e.args:
                for k, v in visit(arg).items():
                    out[k] = out.get(k, 0) + v
            out = {k: v for k, v in out.items() if v != 0}
        elif e.is_Mul:
            out = {zero: number(sp.Integer(1))}
            for arg in e.args:
                out = mul(out, visit(arg))
        elif e.is_Pow and e.exp.is_Integer and e.exp >= 0:
            out = power(visit(e.base), int(e.exp))
        elif e.is_Pow and e.exp.is_number and not e.exp.free_symbols:
            exponent = e.exp
            out = function(lambda u: u ** exponent, visit(e.base))
        elif isinstance(e, sp.Function) and len(e.args) == 1:
            out = function(e.func, visit(e.args[0]))
        else:
            raise Unsupported(type(e).__name__)
        memo[e] = out
        return out

    return visit(expr)


def _exact_number(value) -> Fraction:
    value = sp.sympify(value)
    if not value.is_Rational:
        raise NotRational(str(value))
    return Fraction(int(value.p), int(value.q))


def _float_number(value) -> float:
    out = complex(sp.N(value, 17))
    if out.imag != 0 or not math.isfinite(out.real):
        raise ModelError(f"the expansion meets the value {value}, not a finite real number")
    return out.real
