"""The Taylor polynomial of H about an equilibrium, with its size measured before any work.

Two routes, both bounded:

* H polynomial in the state: the shifted H is expanded once, after
  :func:`phaselab.model.limits.expanded_terms` has bounded the number of terms it produces.
* Otherwise: truncated power-series arithmetic over the expression tree
  (:mod:`.jets`), whose work is bounded by the number of nodes times one truncated product.
  A node it does not handle (a function of several arguments) sends the expansion to
  repeated differentiation: each coefficient ``D^a H / a!`` a derivative built from the
  previous one, with the tree size of each derivative capped.

Past a cap the expansion is refused with a :class:`~phaselab.errors.ParameterError` naming
what is too large (the order, or the size of H).
"""

from __future__ import annotations

import math
from fractions import Fraction

import sympy as sp

from phaselab.errors import ModelError, ParameterError
from phaselab.model.limits import MAX_TREE_NODES, expanded_terms, tree_size
from phaselab.structures.normal_forms.jets import NotRational, Unsupported, jet_taylor

MAX_TERMS = 3_100
"""Most monomials a Taylor polynomial (and so each polynomial of the normal form) may have.
The work of the Lie series grows about as the square of this count: at the cap (2 degrees of
freedom to order 14, 3 to order 8, 4 to order 6) a normal form takes of the order of half a
minute in exact arithmetic on one core (benchmarks/normal_form_benchmark.py)."""
MAX_EXPANDED = 50_000
"""Most terms the expansion of a shifted polynomial H may produce."""


def monomial_count(variables: int, order: int) -> int:
    """Monomials of degree 0..order in ``variables`` unknowns: C(variables + order, order)."""
    return math.comb(variables + order, order)


def check_size(dof: int, order: int) -> None:
    """Refuse an order whose polynomials would be too large, before expanding anything."""
    count = monomial_count(2 * dof, order)
    if count > MAX_TERMS:
        raise ParameterError(
            f"a normal form of order {order} in {dof} degrees of freedom works with polynomials of up "
            f"to {count} terms, more than the budget of {MAX_TERMS}; ask for a lower order")


def taylor(expr: sp.Expr, state: tuple, at: list, order: int) -> dict:
    """Taylor coefficients of ``expr`` about ``at`` up to total degree ``order``.

    Parameters
    ----------
    expr : sympy.Expr
        H with numbers in place of its parameters.
    state : tuple of sympy.Symbol, length m
        The state variables.
    at : list of sympy numbers, length m
        The expansion point (exact numbers stay exact, Floats give Float coefficients).
    order : int

    Returns
    -------
    dict
        ``{exponents (m,): sympy number}`` for degrees 0..order, zero coefficients left out.
    """
    if expr.is_polynomial(*state):
        return _polynomial_taylor(expr, state, at, order)
    if tree_size(expr, limit=MAX_TREE_NODES) > MAX_TREE_NODES:
        raise ParameterError(f"the expression has more than {MAX_TREE_NODES} nodes; too large to expand")
    exact = all(sp.sympify(a).is_Rational for a in at)
    try:
        try:
            jet = jet_taylor(expr, state, at, order, exact)
        except NotRational:
            jet = jet_taylor(expr, state, at, order, False)
    except Unsupported:
        return _derivative_taylor(expr, state, at, order)
    return {k: (sp.Rational(v.numerator, v.denominator) if isinstance(v, Fraction) else sp.Float(v, 17))
            for k, v in jet.items() if sum(k) <= order}


def _polynomial_taylor(expr, state, at, order) -> dict:
    shifted = expr.xreplace({s: s + a for s, a in zip(state, at) if a != 0})
    if expanded_terms(shifted, limit=MAX_EXPANDED) > MAX_EXPANDED:
        raise ParameterError(
            f"the Hamiltonian shifted to the equilibrium expands to more than {MAX_EXPANDED} terms; "
            "too large to normalise")
    poly = sp.Poly(sp.expand(shifted), *state)
    return {tuple(k): sp.sympify(c) for k, c in poly.terms() if sum(k) <= order and c != 0}


def _derivative_taylor(expr, state, at, order) -> dict:
    if tree_size(expr, limit=MAX_TREE_NODES) > MAX_TREE_NODES:
        raise ParameterError(f"the expression has more than {MAX_TREE_NODES} nodes; too large to expand")
    point = dict(zip(state, at))
    m = len(state)
    derivatives = {tuple([0] * m): expr}
    out = {}
    for degree in range(order + 1):
        for key in _keys(m, degree):
            d = derivatives[key] if degree == 0 else _derive(derivatives, key, state)
            if tree_size(d, limit=MAX_TREE_NODES) > MAX_TREE_NODES:
                raise ParameterError(
                    f"the derivative of order {degree} of the expression grows past {MAX_TREE_NODES} "
                    f"nodes; ask for an order below {degree}")
            value = _value(d.xreplace(point), key)
            if value != 0:
                out[key] = value / math.prod(math.factorial(e) for e in key)
    return out


def _keys(m: int, degree: int):
    """Exponent tuples of total ``degree`` in ``m`` variables."""
    if m == 1:
        yield (degree,)
        return
    for first in range(degree, -1, -1):
        for rest in _keys(m - 1, degree - first):
            yield (first,) + rest


def _derive(derivatives: dict, key: tuple, state) -> sp.Expr:
    i = next(t for t, e in enumerate(key) if e)
    lower = list(key)
    lower[i] -= 1
    d = sp.diff(derivatives[tuple(lower)], state[i])
    derivatives[key] = d
    return d


def _value(expr: sp.Expr, key: tuple) -> sp.Expr:
    """A derivative evaluated at the point, as an exact Rational when it is one, else a Float."""
    if expr.is_Rational:
        return expr
    value = sp.N(expr, 20)
    if not value.is_Number or not value.is_finite:
        value = sp.N(value.as_real_imag()[0], 20) if value.is_number else value
    if not value.is_Number or not value.is_finite:
        raise ModelError(f"the derivative of exponents {key} is not a finite number at the "
                         f"equilibrium ({value}); it has no Taylor expansion there")
    return value
