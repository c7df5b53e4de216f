"""The normal form written in actions and angles: one record per real term.

A kept monomial ``c xi^a eta^b`` is ``c prod (s_k J_k)^((a_k + b_k)/2) exp(-i k . phi)`` with
``k = a - b`` (``xi_k = sqrt(s_k J_k) exp(-i phi_k)``, ``eta_k`` its conjugate). A term with
``k = 0`` is real; a term with ``k != 0`` and its conjugate partner (``k -> -k``) together make
``2 Re(c) cos(k . phi) + 2 Im(c) sin(k . phi)`` times the power of the actions. The records
here keep the ``k`` whose first nonzero entry is positive.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import sympy as sp


@dataclass(frozen=True)
class Term:
    """``(cos_coef cos(k . phi) + sin_coef sin(k . phi)) * prod J_k**powers_k``.

    Attributes
    ----------
    powers : tuple of sympy.Rational
        Exponent of each action (half-integers for resonant terms of odd degree).
    harmonic : tuple of int
        ``k``; all zeros for a term of the actions alone.
    cos_coef, sin_coef : sympy number
        Exact (Rational, possibly times square roots of rationals) or Float.
    degree : int
        Degree in the distance from the equilibrium (twice the sum of the powers).
    """

    powers: tuple
    harmonic: tuple
    cos_coef: sp.Expr
    sin_coef: sp.Expr
    degree: int


def collect_terms(series: dict, scales: list, arithmetic, dof: int) -> list[Term]:
    """The normal-form polynomials (degree >= 2) as :class:`Term` records, sorted by degree."""
    s_sym = [_number(s, arithmetic) for s in scales]
    out = []
    for degree in sorted(series):
        for key, c in sorted(series[degree].items()):
            a, b = key[:dof], key[dof:]
            k = tuple(x - y for x, y in zip(a, b))
            first = next((x for x in k if x), 0)
            if first < 0:
                continue
            powers = tuple(sp.Rational(x + y, 2) for x, y in zip(a, b))
            factor = sp.Mul(*[s ** p for s, p in zip(s_sym, powers)])
            re, im = arithmetic.real_part(c), arithmetic.imag_part(c)
            if first == 0:
                cos_coef, sin_coef = re * factor, sp.Integer(0)
            else:
                cos_coef, sin_coef = 2 * re * factor, 2 * im * factor
            if not arithmetic.exact:
                cos_coef, sin_coef = sp.Float(cos_coef, 15), sp.Float(sin_coef, 15)
            if cos_coef == 0 and sin_coef == 0:
                continue
            out.append(Term(powers, k, cos_coef, sin_coef, degree))
    return sorted(out, key=lambda t: (t.degree, tuple(-p for p in t.powers), t.harmonic))


def _number(s, arithmetic) -> sp.Expr:
    if arithmetic.exact:
        return sp.Rational(s.numerator, s.denominator)
    return sp.Float(float(s), 17)


def term_arrays(terms: list[Term], dof: int) -> dict:
    """Float arrays of the terms for evaluation: powers (t, n), harmonic (t, n), cos (t,), sin (t,)."""
    if not terms:
        z = np.zeros((0, dof))
        return {"powers": z, "harmonic": z.astype(int), "cos": np.zeros(0), "sin": np.zeros(0)}
    return {"powers": np.array([[float(p) for p in t.powers] for t in terms]),
            "harmonic": np.array([t.harmonic for t in terms], dtype=int),
            "cos": np.array([float(t.cos_coef) for t in terms]),
            "sin": np.array([float(t.sin_coef) for t in terms])}


def evaluate_terms(arrays: dict, J: np.ndarray, phi: np.ndarray | None, derivative: int | None = None):
    """The sum of the terms (or its derivative in ``J_derivative``) at actions ``J``.

    Parameters
    ----------
    arrays : dict from :func:`term_arrays`
    J : ndarray, shape (m, n)
    phi : ndarray, shape (m, n), or None
        None keeps only the terms without angles.
    derivative : int, optional

    Returns
    -------
    ndarray, shape (m,)
    """
    out = np.zeros(J.shape[0])
    for pw, k, c, s in zip(arrays["powers"], arrays["harmonic"], arrays["cos"], arrays["sin"]):
        if phi is None and np.any(k):
            continue
        angle = 1.0 if not np.any(k) else None
        if angle is None:
            arg = phi @ k
            angle = c * np.cos(arg) + s * np.sin(arg)
        else:
            angle = c
        if derivative is None:
            out += angle * np.prod(J ** pw, axis=1)
        elif pw[derivative] != 0:
            lower = pw.copy()
            lower[derivative] -= 1
            out += angle * pw[derivative] * np.prod(J ** lower, axis=1)
    return out
