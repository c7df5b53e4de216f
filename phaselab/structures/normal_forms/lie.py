"""Removing the non-resonant terms order by order with Lie series, and the change of variables.

At each degree ``r = 3..order`` the current H is split, monomial by monomial
``xi^a eta^b`` with ``k = a - b``, into terms that stay (``k = 0``, and ``k`` in the span of
the resonances asked for) and terms removed by the generator ``chi_r``: the homological
equation ``{H2, chi_r} + H_r = kept part``, with ``{xi^a eta^b, H2} = -i (k . omega) xi^a eta^b``,
gives ``chi_r = i h / (k . omega)`` for each removed term ``h``. Then
``H <- exp(L_chi_r) H`` (the Lie series, :func:`~.polynomials.lie_exp`), whose degree-``r``
part is exactly the kept one. The old coordinates are the composition of the time-one flows
of ``chi_3, chi_4, ...``; both directions are Lie series applied to the coordinate
functions (:func:`transformations`).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction

import sympy as sp

from phaselab.errors import ModelError
from phaselab.structures.normal_forms.polynomials import lie_exp, prune

RESONANT = 1e-9
"""In floating arithmetic, ``|k . omega|`` below this times ``max |omega|`` is an exact resonance."""


@dataclass
class Normalised:
    """What the normalisation returns.

    Attributes
    ----------
    series : dict
        The normal form ``{degree: polynomial in (xi, eta)}``, degrees 2..order.
    generators : list of (int, dict)
        ``(r, chi_r)`` in the order they were applied.
    small_divisors : dict
        ``{r: smallest |k . omega| among the terms removed at degree r}`` (inf when none).
    """

    series: dict
    generators: list
    small_divisors: dict = field(default_factory=dict)


class ResonanceRule:
    """Which ``k = a - b`` stay in the normal form: 0 and the rational span of ``resonances``."""

    def __init__(self, resonances: list, dof: int):
        self.basis = sp.Matrix(resonances) if resonances else sp.zeros(0, dof)
        self.rank = self.basis.rank() if resonances else 0
        self._memo: dict = {}

    def keeps(self, k: tuple) -> bool:
        if not any(k):
            return True
        if not self.rank:
            return False
        if k not in self._memo:
            self._memo[k] = self.basis.col_join(sp.Matrix([k])).rank() == self.rank
        return self._memo[k]


def reciprocal_for(arithmetic):
    """``1/j`` in the given arithmetic."""
    if arithmetic.exact:
        return lambda j: Fraction(1, j)
    return lambda j: 1.0 / j


def bracket_factors(diag) -> list:
    """``{xi_k, eta_k} = -i s_k`` as coefficients."""
    return [-(diag.arithmetic.unit * s) for s in diag.scales]


def normalise(series: dict, diag, order: int, rule: ResonanceRule) -> Normalised:
    """Birkhoff's (or the resonant) normal form of ``series`` up to degree ``order``.

    Parameters
    ----------
    series : dict
        ``{degree: polynomial}`` of H in ``(xi, eta)``, with ``series[2]`` diagonal.
    diag : Diagonal
        Frequencies, scales and arithmetic from :mod:`.linear`.
    order : int
    rule : ResonanceRule

    Raises
    ------
    ModelError
        When a term with ``k . omega = 0`` (an exact resonance) would have to be removed:
        the message names ``k`` and the degree, and says to pass it among the resonances.
    """
    n = len(diag.omega)
    ar = diag.arithmetic
    factors = bracket_factors(diag)
    recip = reciprocal_for(ar)
    top_omega = max(abs(float(w)) for w in diag.omega)
    H = {d: dict(p) for d, p in series.items()}
    generators, smallest = [], {}
    for r in range(3, order + 1):
        kept, chi = {}, {}
        low = float("inf")
        for key, c in H.get(r, {}).items():
            k = tuple(key[j] - key[n + j] for j in range(n))
            if rule.keeps(k):
                kept[key] = c
                continue
            divisor = sum(kj * w for kj, w in zip(k, diag.omega))
            size = abs(float(divisor))
            if divisor == 0 or size < RESONANT * top_omega:
                raise ModelError(
                    f"the frequencies {_listed(diag.omega)} are in resonance: the term with k = {k} "
                    f"(k . omega = 0) at degree {r} cannot be removed; pass resonances=[{k}] (or a "
                    "vector spanning it) for a resonant normal form")
            low = min(low, size)
            chi[key] = c * ar.unit / divisor
        smallest[r] = low
        if chi:
            generators.append((r, chi))
            H = lie_exp(H, chi, r, order, factors, recip)
        H[r] = kept
    return Normalised({d: prune(p) for d, p in H.items() if d >= 2}, generators, smallest)


def _listed(omega) -> str:
    return "(" + ", ".join(f"{float(w):.6g}" for w in omega) + ")"


def transformations(generators: list, diag, top: int) -> tuple[list, list]:
    """The change of variables both ways, as ``2n`` polynomials each, kept up to degree ``top``.

    Returns
    -------
    old_of_new : list of dict
        ``u = F(w)``: the original complex coordinates as polynomials in the normal ones
        (``exp(L_chi_r)`` applied for r = 3, 4, ... in turn).
    new_of_old : list of dict
        ``w = G(u)``: the inverse (``exp(L_-chi_r)`` for r = order, ..., 3).
    """
    ar = diag.arithmetic
    m = 2 * len(diag.omega)
    factors = bracket_factors(diag)
    recip = reciprocal_for(ar)
    one = ar.number(1)

    def identity(j):
        return {1: {tuple(1 if t == j else 0 for t in range(m)): one}}

    n = m // 2
    forward, backward = [], []
    for j in range(n):  # the eta components are the conjugates of the xi ones (H is real)
        f = identity(j)
        for r, chi in generators:
            f = lie_exp(f, chi, r, top, factors, recip)
        forward.append(_flatten(f))
        g = identity(j)
        for r, chi in reversed(generators):
            g = lie_exp(g, {k: -c for k, c in chi.items()}, r, top, factors, recip)
        backward.append(_flatten(g))
    forward += [_conjugate(f, n) for f in forward]
    backward += [_conjugate(g, n) for g in backward]
    return forward, backward


def _conjugate(poly: dict, n: int) -> dict:
    """The complex conjugate of a polynomial on real states (``xi`` and ``eta`` swap)."""
    return {key[n:] + key[:n]: c.conjugate() for key, c in poly.items()}


def _flatten(series: dict) -> dict:
    out = {}
    for poly in series.values():
        out.update(poly)
    return out
