"""Polynomials in the complex coordinates of a normal form, stored as ``{exponents: coefficient}``.

A monomial of ``n`` degrees of freedom is ``xi^a eta^b`` with ``xi = (xi_1..xi_n)`` and
``eta = (eta_1..eta_n)``; its key is the tuple ``a + b`` of ``2n`` whole exponents. A *series*
is ``{degree: polynomial}`` with each polynomial homogeneous of that degree. Coefficients are
:class:`~phaselab.structures.normal_forms.numbers.GaussianRational` (exact) or ``complex``.

The Poisson bracket is the one of the coordinates the normal form uses,
``{xi_k, eta_k} = -i s_k`` (``s_k > 0`` real, one per degree of freedom, all other brackets of
coordinates zero), so with ``L_k f = -i s_k (df/dxi_k dg/deta_k - df/deta_k dg/dxi_k)``
``{f, g} = sum_k L_k``. On two monomials this gives one monomial per ``k``
(``{xi^a eta^b, xi^c eta^d}`` has the ``k``-th weight ``a_k d_k - b_k c_k``), which is what
:func:`bracket` uses.
"""

from __future__ import annotations

import numpy as np


def total_degree(key: tuple) -> int:
    return sum(key)


def add_into(target: dict, source: dict, factor=None) -> dict:
    """``target += factor * source`` in place (``factor`` None means 1); returns ``target``."""
    for key, c in source.items():
        term = c if factor is None else c * factor
        if key in target:
            target[key] = target[key] + term
        else:
            target[key] = term
    return target


def prune(poly: dict) -> dict:
    """Drop exactly-zero coefficients."""
    return {k: c for k, c in poly.items() if c}


def multiply(a: dict, b: dict) -> dict:
    """The product of two polynomials."""
    out: dict = {}
    for ka, ca in a.items():
        for kb, cb in b.items():
            key = tuple(x + y for x, y in zip(ka, kb))
            term = ca * cb
            out[key] = out[key] + term if key in out else term
    return prune(out)


def bracket(f: dict, g: dict, factors: list) -> dict:
    """The Poisson bracket ``{f, g}`` of two polynomials.

    Parameters
    ----------
    f, g : dict
        Polynomials ``{exponents (2n,): coefficient}``.
    factors : list, length n
        ``{xi_k, eta_k}`` for each degree of freedom (``-i s_k``), as coefficients.
    """
    n = len(factors)
    out: dict = {}
    scaled: dict = {}  # factors[k] * weight, computed once per pair
    for a, ca in f.items():
        for b, cb in g.items():
            prod = None
            total = None
            for k in range(n):
                weight = a[k] * b[n + k] - a[n + k] * b[k]
                if not weight:
                    continue
                if prod is None:
                    prod = ca * cb
                    total = [x + y for x, y in zip(a, b)]
                key = list(total)
                key[k] -= 1
                key[n + k] -= 1
                key = tuple(key)
                fw = scaled.get((k, weight))
                if fw is None:
                    fw = scaled[(k, weight)] = factors[k] * weight
                term = prod * fw
                out[key] = out[key] + term if key in out else term
    return prune(out)


def series_bracket(series: dict, chi: dict, degree: int, top: int, factors: list) -> dict:
    """``{F, chi}`` for a series ``F`` and a homogeneous ``chi`` of ``degree``, kept up to
    total degree ``top``."""
    out: dict = {}
    for d, poly in series.items():
        new = d + degree - 2
        if new > top or not poly:
            continue
        add_into(out.setdefault(new, {}), bracket(poly, chi, factors))
    return {d: prune(p) for d, p in out.items() if p}


def lie_exp(series: dict, chi: dict, degree: int, top: int, factors: list, reciprocal) -> dict:
    """``exp(L_chi) F = F + {F, chi} + {{F, chi}, chi}/2! + ...`` kept up to degree ``top``.

    This is the Lie series: the result is ``F`` composed with the time-one flow of the
    Hamiltonian ``chi`` (the Lie-series form of a near-identity canonical change of
    variables). ``degree >= 3`` makes each bracket raise the lowest degree, so the sum is
    finite. ``reciprocal(j)`` is ``1/j`` in the coefficients' arithmetic.
    """
    out = {d: dict(p) for d, p in series.items()}
    term = series
    j = 1
    while True:
        term = series_bracket(term, chi, degree, top, factors)
        if not term:
            break
        inv = reciprocal(j)
        term = {d: {k: c * inv for k, c in p.items()} for d, p in term.items()}
        for d, poly in term.items():
            add_into(out.setdefault(d, {}), poly)
        j += 1
    return {d: q for d, p in out.items() if (q := prune(p))}


def substitute_linear(poly: dict, rows: list, zero) -> dict:
    """``poly(x)`` with ``x_i = sum_j rows[i][j] u_j``: a polynomial in ``u``.

    Parameters
    ----------
    poly : dict
        ``{exponents of x (m,): coefficient}``.
    rows : list of m lists of m coefficients
        The linear substitution.
    zero : coefficient
        The zero of the arithmetic.
    """
    m = len(rows)
    linear = []
    for i in range(m):
        lin = {}
        for j in range(m):
            if rows[i][j]:
                key = tuple(1 if t == j else 0 for t in range(m))
                lin[key] = rows[i][j]
        linear.append(lin)
    powers: dict = {tuple([0] * m): {tuple([0] * m): zero + 1}}

    def power(key):
        if key in powers:
            return powers[key]
        i = next(t for t, e in enumerate(key) if e)
        lower = list(key)
        lower[i] -= 1
        powers[key] = multiply(power(tuple(lower)), linear[i])
        return powers[key]

    out: dict = {}
    for key in sorted(poly, key=sum):
        add_into(out, power(key), poly[key])
    return prune(out)


def split_degrees(poly: dict) -> dict:
    """``{degree: homogeneous part}`` of a polynomial."""
    out: dict = {}
    for key, c in poly.items():
        out.setdefault(sum(key), {})[key] = c
    return out


def as_arrays(poly: dict, size: int) -> tuple[np.ndarray, np.ndarray]:
    """Exponents ``(terms, size)`` int and coefficients ``(terms,)`` complex, for evaluation."""
    if not poly:
        return np.zeros((0, size), dtype=np.int64), np.zeros(0, dtype=complex)
    keys = list(poly)
    return np.array(keys, dtype=np.int64), np.array([complex(poly[k]) for k in keys])


def evaluate(exponents: np.ndarray, coefficients: np.ndarray, u: np.ndarray) -> np.ndarray:
    """A polynomial at a batch of points.

    Parameters
    ----------
    exponents : ndarray of int, shape (terms, size)
    coefficients : ndarray of complex, shape (terms,)
    u : ndarray of complex, shape (points, size)

    Returns
    -------
    ndarray of complex, shape (points,)
    """
    out = np.zeros(u.shape[0], dtype=complex)
    if not len(coefficients):
        return out
    top = int(exponents.max()) if exponents.size else 0
    pw = np.ones((top + 1,) + u.shape, dtype=complex)
    for e in range(1, top + 1):
        pw[e] = pw[e - 1] * u
    cols = np.arange(u.shape[1])
    for key, c in zip(exponents, coefficients):
        out += c * np.prod(pw[key, :, cols], axis=0)
    return out


def truncate(poly: dict, top: int) -> dict:
    """The terms of total degree at most ``top``."""
    return {k: c for k, c in poly.items() if sum(k) <= top}


def compose(poly: dict, subs: list, top: int, one) -> dict:
    """``poly(subs_1, ..., subs_m)`` kept up to total degree ``top``.

    Parameters
    ----------
    poly : dict
        A polynomial in m variables.
    subs : list of m polynomials
        What each variable becomes (polynomials in the same number of variables, without
        constant terms, so that truncation is exact).
    one : coefficient
        The unit of the arithmetic.
    """
    m = len(subs)
    zero_key = tuple([0] * len(next(iter(subs[0])))) if subs[0] else tuple([0] * m)
    powers: dict = {tuple([0] * m): {zero_key: one}}

    def power(key):
        if key in powers:
            return powers[key]
        i = next(t for t, e in enumerate(key) if e)
        lower = list(key)
        lower[i] -= 1
        powers[key] = truncate(multiply(power(tuple(lower)), subs[i]), top)
        return powers[key]

    out: dict = {}
    for key in sorted(poly, key=sum):
        add_into(out, power(key), poly[key])
    return prune(truncate(out, top))
